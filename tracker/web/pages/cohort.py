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


def _page_number(text: str | None) -> int | None:
    if len(text) > 7 or not text.isdigit() or not 1 <= int(text) <= 1_000_000:
        return None
    return int(text)


def cohort_page(request: Request):
    from tracker.services import cohort_view as CV
    from tracker.services import review as SR

    user = auth.current_user(request)
    q = request.query_params
    f = {"family": (q.get("family") or "").strip(), "measure": (q.get("measure") or "").strip(),
         "flag": q.get("flag") or "", "page": (q.get("page") or "1").strip()}  # fmt: skip
    errors: dict[str, list[str]] = {}
    for name in ("family", "measure"):
        if len(f[name]) > 40:
            errors[name] = ["at most 40 characters"]
    if f["flag"] not in FLAGS:
        errors["flag"] = [f"not a choice: {', '.join(k for k in FLAGS if k)}"]
    page = _page_number(f["page"])
    if page is None:
        errors["page"] = ["a page number from 1"]
    result = None
    paging = None
    if not errors:
        settings = request.app.state.settings
        try:
            with reading(auth.engine(request)) as conn:
                result, paging = _read(conn, CV, SR, f, page, settings)
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
    # The read entry: one short write transaction after the page's reads, before rendering.
    with writing(auth.engine(request)) as conn:
        AC.audit_read(conn, user, family=f["family"] or None, person=people[0] if len(people) == 1 else None,
                      what=f"cohort trends: {len(people)} people ({', '.join(people) or 'none'}); families "
                           f"{', '.join(families) or 'none'}", now=auth.now(request))  # fmt: skip
    return render(request, "cohort.html", {"f": f, "flags": FLAGS, "result": result, "rows": rows,
                                           "flagged": _flagged, "horizon": HORIZON_YEARS,
                                           "paging": paging, "flagged_families": CV.FLAGGED_FAMILIES})  # fmt: skip


def _read(conn, CV, SR, f: dict, page: int, settings) -> tuple[dict, dict | None]:
    """The trend rows the page shows, read a family page at a time (never the whole cohort).

    - a family: that family's rows;
    - a flag: the families whose stored proposals carry a flag, ``FLAGGED_FAMILIES`` a page;
    - neither: a page of families in code order; page 1 also lists the flagged rows of the
      first ``FLAGGED_FAMILIES`` flagged families (people with flags first, cohort-wide)."""
    measure = f["measure"] or None
    if f["family"]:
        return SR.trends_of(conn, [f["family"]], measure, settings, HORIZON_YEARS), None
    if measure is not None:
        SR.trends_of(conn, [], measure, settings, HORIZON_YEARS)  # an unknown measure: the error first
    if f["flag"]:
        size = CV.FLAGGED_FAMILIES
        fams = CV.flagged_families(conn, limit=size, offset=(page - 1) * size)
        total = CV.flagged_count(conn)
    else:
        size = CV.PAGE_FAMILIES
        fams = CV.family_page(conn, page, size)
        total = CV.family_count(conn)
    result = SR.trends_of(conn, fams, measure, settings, HORIZON_YEARS)
    if not f["flag"] and page == 1:
        extra = [x for x in CV.flagged_families(conn, limit=CV.FLAGGED_FAMILIES) if x not in set(fams)]
        if extra:
            more = SR.trends_of(conn, extra, measure, settings, HORIZON_YEARS)["rows"]
            result["rows"] = _merge(result["rows"], [r for r in more if _flagged(r)])
    pages = max(1, -(-total // size))
    return result, {"page": page, "pages": pages, "families": fams, "total": total,
                    "flagged_list": bool(f["flag"])}  # fmt: skip


def _merge(a: list[dict], b: list[dict]) -> list[dict]:
    """Rows of ``a`` and ``b`` in the trend table's order (concern highest first, then person, measure)."""
    return sorted(a + b, key=lambda r: (-int(r["concern"]), r["person"], r["measure"]))


routes = [Route("/cohort", cohort_page, methods=["GET"])]
