"""Cascade uptake (``/uptake``): the clinic's figures and each family's, by degree of relationship to
the proband, each as a count of its denominator with the percentage (n always shown), the medians
of the time to first contact and to a test, the route by which relatives were informed, and every
figure's definition; filters family, from and to; the same figures as a PDF (``/uptake.pdf``).

The figures come from :func:`tracker.services.uptake.uptake_data`, as ``tracker uptake`` gets them.
Everyone signed in may read; each view is a read entry in the audit trail naming the families shown.
"""

from __future__ import annotations

import datetime as dt

from starlette.requests import Request
from starlette.responses import Response
from starlette.routing import Route

from tracker.errors import UserError
from tracker.web import auth, clinic
from tracker.web.templating import render

GROUP_WORDS = {"all": "all degrees", "first": "first degree", "second": "second degree",
               "more_distant": "more distant", "unknown": "degree unknown"}  # fmt: skip
LABELS = {"informed": "informed", "counselled": "counselled", "tested": "tested", "screened": "screened",
          "declined": "declined", "not_reachable": "not reachable", "via_family": "through the family",
          "direct": "directly by the clinic", "not_recorded": "route not recorded"}  # fmt: skip


def filters(request: Request) -> tuple[dict, dict]:
    """The page's filters (family, from, to) from the query, and any errors by field."""
    from tracker.domain.dates import parse_date

    q = request.query_params
    errors: dict[str, list[str]] = {}
    f: dict = {"family": (q.get("family") or "").strip(), "from": None, "to": clinic.today(request)}
    for key in ("from", "to"):
        text = (q.get(key) or "").strip()
        if text:
            try:
                f[key] = parse_date(text)
            except ValueError as exc:
                errors[key] = [str(exc)]
                f[key] = text
    if len(f["family"]) > 40:
        errors["family"] = ["a family code has at most 40 characters"]
    if not errors and f["from"] is not None and f["from"] > f["to"]:
        errors["to"] = ["is before the first day"]
    return f, errors


def _data(request: Request, f: dict) -> dict:
    from tracker.services import uptake as S
    from tracker.store.database import reading

    with reading(auth.engine(request)) as conn:
        return S.uptake_data(conn, family=f["family"] or None, start=f["from"], end=f["to"])


def _query(f: dict) -> str:
    from urllib.parse import urlencode

    return urlencode({"family": f["family"], "from": f["from"].isoformat() if f["from"] else "",
                      "to": f["to"].isoformat()})  # fmt: skip


def _audit(request: Request, user, data: dict, what: str) -> None:
    families = [x["family"] for x in data["families"]]
    clinic.audit_read(request, user, family=families[0] if len(families) == 1 else None,
                      what=f"{what}: families {', '.join(families) or 'none'}")  # fmt: skip


def uptake_page(request: Request):
    user = auth.current_user(request)
    f, errors = filters(request)
    data = None
    if not errors:
        try:
            data = _data(request, f)
        except UserError as exc:
            errors = {"family" if "family" in str(exc) else "from": [str(exc)]}
    if errors:
        return render(request, "uptake.html", {"f": f, "errors": errors, "data": None}, status_code=400)
    _audit(request, user, data, "cascade uptake page")
    groups = [("all", data["clinic"])] + list(data["by_degree"].items())
    return render(request, "uptake.html", {"f": f, "data": data, "groups": groups, "group_words": GROUP_WORDS,
                                           "labels": LABELS, "query": _query(f)})  # fmt: skip


def uptake_pdf(request: Request):
    user = auth.current_user(request)
    f, errors = filters(request)
    if errors:
        raise auth.Refused("; ".join(f"{k}: {' '.join(v)}" for k, v in errors.items()), status=400)
    data = _data(request, f)
    _audit(request, user, data, "cascade uptake PDF download")
    body = _pdf(request, data, f)
    from tracker.outputs import uptake_pdf as P

    name = P.file_name(f["from"], f["to"]) if not f["family"] else f"uptake-{f['family']}-{f['to'].isoformat()}.pdf"
    return Response(body, media_type="application/pdf", headers={"Content-Disposition": f'attachment; filename="{name}"'})


def _pdf(request: Request, data: dict, f: dict) -> bytes:
    import tempfile
    from pathlib import Path

    from tracker.outputs import uptake_pdf as P

    doc = P.UptakeDocument(clinic=request.app.state.settings.clinic.name, printed=clinic.today(request),
                           report=data["_report"], source=data["source"])  # fmt: skip
    with tempfile.TemporaryDirectory(prefix="tracker-web-") as tmp:
        path = Path(tmp) / "uptake.pdf"
        P.write_uptake_pdf(doc, path)
        return path.read_bytes()


routes = [
    Route("/uptake", uptake_page, methods=["GET"]),
    Route("/uptake.pdf", uptake_pdf, methods=["GET"]),
]
