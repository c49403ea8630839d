"""Importing a CSV file (``/import``, admin): upload, see the dry-run report (every problem by row
and column), then confirm to store it.

The upload is kept on the server under a random id between the dry run and the confirmation
(:data:`KEEP_MINUTES`); the confirmation names only that id, so the file stored is the file
checked, never one sent again by the browser.  The kept files are in a private folder (mode 0700)
shared by the server's processes; only the account that uploaded a file can confirm it.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import os
import re
import secrets
import shutil
import tempfile
from pathlib import Path

from starlette.requests import Request
from starlette.responses import RedirectResponse
from starlette.routing import Route

from tracker.io.layouts import IMPORT_ORDER, LAYOUTS
from tracker.web import auth
from tracker.web.templating import render

KEEP_MINUTES = 60  # an unconfirmed upload is discarded after this long (engineering choice)
MAX_UPLOAD_BYTES = 50 * 1024 * 1024  # larger uploads are refused (engineering limit; use `tracker import`)
ID_RE = re.compile(r"^[A-Za-z0-9_-]{16,64}$")
GUESS = "guess"


def upload_root(request: Request) -> Path:
    """The private folder of kept uploads for this store (the same for every server process)."""
    key = hashlib.sha256(request.app.state.location.describe().encode("utf-8")).hexdigest()[:16]
    root = Path(tempfile.gettempdir()) / f"tracker-uploads-{os.getuid()}-{key}"
    root.mkdir(mode=0o700, exist_ok=True)
    return root


def _safe_name(name: str) -> str:
    base = Path(name or "upload.csv").name
    base = re.sub(r"[^A-Za-z0-9._-]", "_", base)[:100].lstrip(".") or "upload.csv"
    return base


def _kind_for(choice: str, file_name: str) -> str | None:
    if choice != GUESS:
        return choice if choice in IMPORT_ORDER else None
    for k in IMPORT_ORDER:
        if LAYOUTS[k].file_name == file_name:
            return k
    return None


def _purge_old(root: Path, now: dt.datetime) -> None:
    for d in root.iterdir():
        meta = d / "upload.json"
        try:
            at = dt.datetime.fromisoformat(json.loads(meta.read_text())["at"])
        except (OSError, ValueError, KeyError):
            continue
        if now - at > dt.timedelta(minutes=KEEP_MINUTES):
            shutil.rmtree(d, ignore_errors=True)


def _kept(request: Request, upload_id: str, user) -> tuple[Path, dict]:
    if not ID_RE.match(upload_id):
        raise auth.Refused("no such upload", status=404)
    d = upload_root(request) / upload_id
    try:
        meta = json.loads((d / "upload.json").read_text())
    except (OSError, ValueError):
        raise auth.Refused("this upload is no longer kept (it was stored, discarded or expired): upload the file again",
                           status=404) from None  # fmt: skip
    if meta["by"] != user.name:
        raise auth.Refused("only the account that uploaded this file can store it; nothing was changed")
    if auth.now(request) - dt.datetime.fromisoformat(meta["at"]) > dt.timedelta(minutes=KEEP_MINUTES):
        shutil.rmtree(d, ignore_errors=True)
        raise auth.Refused("this upload has expired: upload the file again", status=404)
    return d / meta["file"], meta


def _choices() -> dict[str, str]:
    return {GUESS: "from the file name", **{k: f"{k} ({LAYOUTS[k].file_name})" for k in IMPORT_ORDER}}


def import_form(request: Request):
    auth.require_to(request, "import")
    return render(request, "import.html", {"kinds": _choices(), "report": None})


def import_check(request: Request):
    """Keep the upload, run the dry run, and show its report."""
    from tracker.io.reading import InputRejected
    from tracker.services import imports as SI

    user = auth.require_to(request, "import")
    form = request.state.form
    choice = form.get("kind") if isinstance(form.get("kind"), str) else GUESS
    upload = form.get("file")
    errors: dict[str, list[str]] = {}
    if choice not in _choices():
        errors["kind"] = ["choose what the file holds"]
    if upload is None or isinstance(upload, str) or not upload.filename:
        errors["file"] = ["choose a CSV file"]
    if errors:
        return render(request, "import.html", {"kinds": _choices(), "errors": errors, "report": None,
                                               "values": {"kind": choice}}, status_code=400)  # fmt: skip
    name = _safe_name(upload.filename)
    kind = _kind_for(choice, name)
    if kind is None:
        errors["kind"] = [f"the file name {name} is not one of the layouts' names: choose what the file holds"]
        return render(request, "import.html", {"kinds": _choices(), "errors": errors, "report": None,
                                               "values": {"kind": choice}}, status_code=400)  # fmt: skip
    root = upload_root(request)
    _purge_old(root, auth.now(request))
    upload_id = secrets.token_urlsafe(24)
    d = root / upload_id
    d.mkdir(mode=0o700)
    path = d / name
    size = 0
    with open(path, "wb") as out:
        upload.file.seek(0)
        while chunk := upload.file.read(1 << 20):
            size += len(chunk)
            if size > MAX_UPLOAD_BYTES:
                break
            out.write(chunk)
    if size > MAX_UPLOAD_BYTES:
        shutil.rmtree(d, ignore_errors=True)
        errors["file"] = [f"larger than {MAX_UPLOAD_BYTES // (1024 * 1024)} MB: use `tracker import` for this file"]
        return render(request, "import.html", {"kinds": _choices(), "errors": errors, "report": None,
                                               "values": {"kind": choice}}, status_code=400)  # fmt: skip
    meta = {"kind": kind, "file": name, "by": user.name, "at": auth.now(request).isoformat(),
            "sha256": hashlib.sha256(path.read_bytes()).hexdigest()}  # fmt: skip
    (d / "upload.json").write_text(json.dumps(meta))
    try:
        summaries = SI.import_csv(auth.engine(request), kind, path, user=user.name, dry_run=True)
    except InputRejected as exc:
        shutil.rmtree(d, ignore_errors=True)  # a refused file is not kept: fix it and upload again
        return render(request, "import.html", {"kinds": _choices(), "report": {"kind": kind, "file": name,
                                               "problems": exc.problems}, "values": {"kind": choice}},
                      status_code=400)  # fmt: skip
    return render(request, "import.html", {"kinds": _choices(), "values": {"kind": choice},
                                           "report": {"kind": kind, "file": name, "problems": [],
                                                      "summaries": summaries, "upload_id": upload_id}})  # fmt: skip


def import_confirm(request: Request):
    """Store the kept upload (checked again, all or nothing), then forget it."""
    from tracker.io.reading import InputRejected
    from tracker.services import imports as SI

    user = auth.require_to(request, "import")
    path, meta = _kept(request, request.path_params["upload_id"], user)
    if hashlib.sha256(path.read_bytes()).hexdigest() != meta["sha256"]:
        shutil.rmtree(path.parent, ignore_errors=True)
        raise auth.Refused("the kept file changed after its check; nothing was stored: upload it again")
    try:
        summaries = SI.import_csv(auth.engine(request), meta["kind"], path, user=user.name, dry_run=False)
    except InputRejected as exc:  # the store changed since the dry run
        shutil.rmtree(path.parent, ignore_errors=True)
        return render(request, "import.html", {"kinds": _choices(), "report": {"kind": meta["kind"], "file": meta["file"],
                                               "problems": exc.problems}}, status_code=400)  # fmt: skip
    shutil.rmtree(path.parent, ignore_errors=True)
    return render(request, "import.html", {"kinds": _choices(), "stored": summaries, "report": None})


def import_discard(request: Request):
    user = auth.require_to(request, "import")
    path, _meta = _kept(request, request.path_params["upload_id"], user)
    shutil.rmtree(path.parent, ignore_errors=True)
    return RedirectResponse("/import", status_code=303)


routes = [
    Route("/import", import_form, methods=["GET"]),
    Route("/import", import_check, methods=["POST"]),
    Route("/import/{upload_id}/confirm", import_confirm, methods=["POST"]),
    Route("/import/{upload_id}/discard", import_discard, methods=["POST"]),
]
