"""The cohort (``/cohort``): each person's serial-measurement trends, people with flags first,
filtered by family, measure and flag.  The rows come from :func:`tracker.services.review.trends`
exactly as ``tracker trends`` gets them; each view is a read entry in the audit trail."""

from __future__ import annotations

from starlette.requests import Request
from starlette.routing import Route

from tracker.errors import UserError
from tracker.services import accounts as AC
from tracker.store.database import reading, writing
from tracker.web import auth
from tracker.web.templating import render

HORIZON_YEARS = 3.0  # the projection horizon of `tracker trends` (its default)
FLAGS = {
    "": "all series",
    "any": "any flag",
    "progressing": "progressing beyond measurement variability",
    "crossing": "projected to cross the threshold within the horizon",
    "converted": "converted",
    "review": "criteria not assessable: review",
}


def _flagged(r: dict) -> bool:
    return bool(r["progressing"] or r["crossing_within_horizon"] or r["converted"] or r["review_flag"]
                or r["criteria_not_assessable"])  # fmt: skip


def _keep(r: dict, flag: str) -> bool:
    return {
        "": True,
        "any": _flagged(r),
        "progressing": bool(r["progressing"]),
        "crossing": bool(r["crossing_within_horizon"]),
        "converted": bool(r["converted"]),
        "review": bool(r["review_flag"] or r["criteria_not_assessable"]),
    }[flag]


def cohort_page(request: Request):
    from tracker.services import review as SR

    user = auth.current_user(request)
    q = request.query_params
    f = {"family": (q.get("family") or "").strip(), "measure": (q.get("measure") or "").strip(),
         "flag": q.get("flag") or ""}  # fmt: skip
    errors: dict[str, list[str]] = {}
    for name in ("family", "measure"):
        if len(f[name]) > 40:
            errors[name] = ["at most 40 characters"]
    if f["flag"] not in FLAGS:
        errors["flag"] = [f"not a choice: {', '.join(k for k in FLAGS if k)}"]
    result = None
    if not errors:
        settings = request.app.state.settings
        try:
            with reading(auth.engine(request)) as conn:
                result = SR.trends(conn, f["family"] or None, f["measure"] or None, settings, HORIZON_YEARS)
        except UserError as exc:
            text = str(exc)
            errors["measure" if "measure" in text else "family"] = [text]
    if errors:
        return render(request, "cohort.html", {"f": f, "flags": FLAGS, "errors": errors, "result": None},
                      status_code=400)  # fmt: skip
    rows = [r for r in result["rows"] if _keep(r, f["flag"])]
    rows.sort(key=lambda r: not _flagged(r))  # stable: the service's order (most concerning first) within each
    people = sorted({r["person"] for r in rows})
    families = sorted({r["family"] for r in rows})
    with writing(auth.engine(request)) as conn:
        AC.audit_read(conn, user, family=f["family"] or None, person=people[0] if len(people) == 1 else None,
                      what=f"cohort trends: {len(people)} people ({', '.join(people) or 'none'}); families "
                           f"{', '.join(families) or 'none'}", now=auth.now(request))  # fmt: skip
    return render(request, "cohort.html", {"f": f, "flags": FLAGS, "result": result, "rows": rows,
                                           "flagged": _flagged, "horizon": HORIZON_YEARS})  # fmt: skip


routes = [Route("/cohort", cohort_page, methods=["GET"])]
