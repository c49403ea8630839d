"""One person (``/person/{code}``): identity, the latest values against their limits (a measure-by-date
grid), a chart per key measure, flags, the recall proposal with every rule, modifier and source,
HCM Risk-SCD with its inputs and any conflict, the strain map, and this person's audit trail; for
the counsellor, a correction of one field and the removal of the person, each with a reason.

The data come from :mod:`tracker.services.views` (the services of ``tracker person``, ``tracker
recall`` and the trajectory report); writes go through :mod:`tracker.services.corrections`.  Each
view is a read entry in the audit trail.
"""

from __future__ import annotations

from markupsafe import Markup
from starlette.requests import Request
from starlette.responses import RedirectResponse
from starlette.routing import Route

from tracker.errors import UserError
from tracker.io.reading import InputRejected
from tracker.store.database import reading, writing
from tracker.web import auth, clinic
from tracker.web.templating import field_errors, render

CODE_MAX = 40


def _code(request: Request) -> str:
    code = request.path_params["code"]
    if not code or len(code) > CODE_MAX:
        raise UserError("no such person")
    return code


def _page(request: Request, user, code: str, extra: dict | None = None, status_code: int = 200):
    from tracker.services import corrections as SC
    from tracker.services import views as SV

    from starlette.exceptions import HTTPException

    from tracker.services.recall import person_family

    conf, rule_set, policy = clinic.rules(request)
    with reading(auth.engine(request)) as conn:
        try:
            person_family(conn, code)
        except UserError:
            raise HTTPException(404) from None
        data = SV.person_view(conn, code, clinic.today(request), conf, rule_set, policy)
    clinic.audit_read(request, user, family=data["family"], person=code, what=f"person page {code}")
    for c in data["charts"]:
        c["svg"] = Markup(c["svg"])
    if data["strain"]:
        data["strain"]["svg"] = Markup(data["strain"]["svg"])
    ctx = {"d": data, "editable": SC.EDITABLE, "errors": {}, "values": {}}
    ctx.update(extra or {})
    return render(request, "person.html", ctx, status_code=status_code)


def person_page(request: Request):
    user = auth.current_user(request)
    code = _code(request)
    notice = {"edited": "The correction was saved; the old value is kept in the audit trail.",
              "entered": "The record was saved; the entry is in the audit trail."}.get(
        request.query_params.get("done", ""))
    return _page(request, user, code, {"notice": notice})


def edit(request: Request):
    """POST: correct one field of the person, with a reason (counsellor)."""
    from tracker.services import corrections as SC

    user = auth.require_to(request, "pedigree")
    code = _code(request)
    f = clinic.posted(request)
    field = f.get("field", "")
    try:
        with writing(auth.engine(request)) as conn:
            SC.edit_person(conn, code, field, f.get("value", ""), reason=f.get("reason", ""), user=user.name)
    except InputRejected as exc:
        errors = field_errors(exc)
        if field in errors:  # the value's problem is shown beside the value
            errors.setdefault("value", []).extend(errors.pop(field))
        return _page(request, user, code, {"errors": errors, "values": f, "open": "edit"}, status_code=400)
    return RedirectResponse(f"/person/{code}?done=edited", status_code=303)


def remove(request: Request):
    """POST: remove the person (kept in the store, hidden), with a reason (counsellor)."""
    from tracker.services import corrections as SC

    user = auth.require_to(request, "pedigree")
    code = _code(request)
    f = clinic.posted(request)
    try:
        with reading(auth.engine(request)) as conn:
            from tracker.services.recall import person_family

            family = person_family(conn, code)
        with writing(auth.engine(request)) as conn:
            SC.remove_person(conn, code, reason=f.get("reason", ""), user=user.name)
    except InputRejected as exc:
        errors = field_errors(exc)
        errors.setdefault("remove_reason", []).extend(errors.pop("reason", []))
        errors.setdefault("remove", []).extend(errors.pop("", []))
        return _page(request, user, code, {"errors": errors, "values": f, "open": "remove"}, status_code=400)
    return render(request, "removed.html", {"code": code, "family": family})


routes = [
    Route("/person/{code}", person_page, methods=["GET"]),
    Route("/person/{code}/edit", edit, methods=["POST"]),
    Route("/person/{code}/remove", remove, methods=["POST"]),
]
