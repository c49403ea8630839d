"""The per-person and per-family commands whose --json output is pinned in tests/data/expected/.

Shared by tests/test_output_unchanged.py (compares) and tests/data/expected/regenerate.py (writes).
Every case runs in this process with the calendar fixed at ``TODAY`` so the ages and
"as of" dates in the output do not move with the day the tests run.
"""

from __future__ import annotations

import contextlib
import datetime
import io
import json
import os
from pathlib import Path

TODAY = datetime.date(2026, 12, 1)
AS_OF = TODAY.isoformat()
EXPECTED = Path(__file__).parent / "data" / "expected"
CLINIC = Path(__file__).parent.parent / "demo_family" / "clinic.toml"

# Probands, a carrier child, a relative released by a non-carrier parent, an untested at-risk relative.
PEOPLE = ["HV01-III-1", "HV01-IV-2", "HV01-III-6", "HV02-III-2", "HV04-IV-2", "HV05-II-1"]
FAMILIES = ["HV01", "HV02", "HV03", "HV04", "HV05"]


def cases() -> dict[str, list[str]]:
    """Case name -> command arguments (without --db and --json)."""
    out: dict[str, list[str]] = {}
    for p in PEOPLE:
        out[f"person-{p}"] = ["person", p]
        out[f"recall-{p}"] = ["recall", p, "--as-of", AS_OF]
        out[f"trajectory-{p}"] = ["report", "trajectory", p, "--out", "{out}", "--as-of", AS_OF]
    for f in FAMILIES:
        out[f"cascade-{f}"] = ["cascade", f, "--as-of", AS_OF]
        out[f"trends-{f}"] = ["trends", "--family", f]
        out[f"pedigree-{f}"] = ["report", "pedigree", f, "--out", "{out}"]
    for f, to in (("HV01", "likely_benign"), ("HV03", "likely_pathogenic"), ("HV04", "pathogenic")):
        out[f"reclassify-{f}"] = ["reclassify", f, "--to", to, "--date", AS_OF, "--reason", "laboratory re-review",
                                  "--dry-run"]  # fmt: skip
    for p in ("HV01-IV-5", "HV02-IV-4", "HV04-IV-2", "HV01-III-6"):
        out[f"letter-{p}"] = ["report", "letter", p, "--out", "{out}", "--date", AS_OF, "--settings", "{clinic}"]
    return out


_REAL_DATE = datetime.date


class _AnyDate(type):
    # Code that reads ``datetime.date`` while the patch is on (SQLAlchemy's SQLite date type
    # checks isinstance against it) must still take real dates, e.g. ``date.max``.
    def __instancecheck__(cls, obj):
        return isinstance(obj, _REAL_DATE)


class _FixedDate(datetime.date, metaclass=_AnyDate):
    @classmethod
    def today(cls):  # noqa: D102
        return cls(TODAY.year, TODAY.month, TODAY.day)


@contextlib.contextmanager
def fixed_today():
    real = datetime.date
    datetime.date = _FixedDate
    try:
        yield
    finally:
        datetime.date = real


def run_case(args: list[str], db: str, out_dir: Path) -> tuple[int, object]:
    """Run one case; its exit code and parsed JSON (the output folder replaced by "OUT")."""
    from tracker.cli.app import main

    argv = [a.replace("{out}", str(out_dir)).replace("{clinic}", str(CLINIC)) for a in args] + ["--db", db, "--json"]
    buf = io.StringIO()
    with fixed_today(), contextlib.redirect_stdout(buf):
        code = main(argv)
    text = buf.getvalue().replace(str(out_dir), "OUT")
    return code, json.loads(text) if text.strip() else None


def build_demo(db: str) -> None:
    from tracker.cli.app import main

    with fixed_today(), contextlib.redirect_stdout(io.StringIO()):
        assert main(["demo", "--db", db]) == 0


def env_clean() -> None:
    """No clinic settings from the caller's environment."""
    os.environ.pop("TRACKER_SETTINGS", None)
