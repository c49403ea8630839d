"""One person's contact log (``/person/{code}/contact``): the current state derived from the log with
its date, every contact (newest first; nothing is overwritten), open and ended wishes, letters
recorded as sent with any reply, results from other centres, bookings and discharges; and the forms
that add to them, each allowed to the roles in :data:`tracker.web.roles.ALLOWED`:

* a contact (``contact``), a wish recorded or ended (``wish``), a reply to a letter
  (``letter_reply``), a result from another centre (``external_result``), a discharge
  (``discharge``), a visit booked or a booking cancelled (``booking``).

Every write goes through :mod:`tracker.services.contacts` (checked field by field, audited, the
family's stored recall proposals refreshed); a refused field is shown beside it (400) and nothing
is written.  Each view is a read entry in the audit trail.
"""

from __future__ import annotations

from starlette.exceptions import HTTPException
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


def _opt(v: str | None) -> str | None:
    v = (v or "").strip()
    return v or None


# --------------------------------------------------------------------------- the writes, one per form


def _event(conn, code, f, user, today):
    from tracker.services import contacts as SC

    via_family = f.get("channel") == "via_family"
    return SC.record_contact(conn, code, on=f.get("on", ""), channel=f.get("channel", ""),
                             by=None if via_family else _opt(f.get("by")), outcome=f.get("outcome", ""),
                             later=_opt(f.get("later")), via=_opt(f.get("via")), notes=_opt(f.get("notes")),
                             user=user.name, today=today)  # fmt: skip


def _wish(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.record_wish(conn, code, wish=f.get("wish", ""), on=f.get("on", ""), via=_opt(f.get("via")),
                          notes=_opt(f.get("notes")), user=user.name, today=today)  # fmt: skip


def _wish_end(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.end_wish(conn, code, on=f.get("on", ""), notes=_opt(f.get("notes")), user=user.name, today=today)


def _reply(conn, code, f, user, today):
    from tracker.io.reading import Problem
    from tracker.services import contacts as SC

    kind, _, sent = (f.get("letter") or "").partition("|")
    if not kind or not sent:
        raise InputRejected([Problem("letter", None, "letter", "choose the letter the reply is to")])
    return SC.record_letter_reply(conn, code, kind=kind, sent_date=sent, on=f.get("on", ""), user=user.name,
                                  today=today)  # fmt: skip


def _external(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.record_external_result(conn, code, kind=f.get("kind", ""), on=f.get("on", ""),
                                     centre=f.get("centre", ""), result=f.get("result", ""),
                                     variant=_opt(f.get("variant")), document_ref=_opt(f.get("document_ref")),
                                     notes=_opt(f.get("notes")), user=user.name, today=today)  # fmt: skip


def _discharge(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.record_discharge(conn, code, on=f.get("on", ""), advice=f.get("advice", ""),
                               variant=_opt(f.get("variant")), notes=_opt(f.get("notes")), user=user.name,
                               today=today)  # fmt: skip


def _booking(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.record_booking(conn, code, on=f.get("on", ""), purpose=f.get("purpose", ""),
                             notes=_opt(f.get("notes")), user=user.name, today=today)  # fmt: skip


def _cancel(conn, code, f, user, today):
    from tracker.services import contacts as SC

    return SC.cancel_booking(conn, code, visit_date=f.get("visit_date", ""), on=_opt(f.get("on")), user=user.name,
                             today=today)  # fmt: skip


# form name -> (action in roles.ALLOWED, the fields it shows, the write, the words of the notice)
FORMS = {
    "event": ("contact", ("on", "channel", "by", "outcome", "later", "via", "notes"), _event,
              "The contact was added to the log."),
    "wish": ("wish", ("wish", "on", "via", "notes"), _wish, "The wish was recorded."),
    "wish-end": ("wish", ("on", "notes"), _wish_end, "The wish was ended; it stays in the history."),
    "reply": ("letter_reply", ("letter", "on"), _reply, "The reply was recorded with the letter."),
    "external": ("external_result", ("kind", "on", "centre", "result", "variant", "document_ref", "notes"),
                 _external, "The result from the other centre was recorded."),
    "discharge": ("discharge", ("on", "variant", "advice", "notes"), _discharge, "The discharge was recorded."),
    "booking": ("booking", ("on", "purpose", "notes"), _booking, "The visit was booked."),
    "cancel": ("booking", ("visit_date", "on"), _cancel, "The booking was cancelled; it stays in the history."),
}
# A service problem about these columns is shown beside the field the form names otherwise.
ALIASES = {"reply": {"kind": "letter", "sent_date": "letter"}}


def _errors(form: str, exc: InputRejected) -> dict[str, list[str]]:
    """The service's problems keyed ``form.field`` (several forms on the page share field names)."""
    fields = FORMS[form][1]
    alias = ALIASES.get(form, {})
    out: dict[str, list[str]] = {}
    for key, messages in field_errors(exc).items():
        key = alias.get(key, key)
        if key and key not in fields:
            out.setdefault(f"{form}.", []).extend(f"{key}: {m}" for m in messages)
        else:
            out.setdefault(f"{form}.{key}", []).extend(messages)
    return out


# --------------------------------------------------------------------------- the page


def _page(request: Request, user, code: str, extra: dict | None = None, status_code: int = 200):
    from tracker.domain import vocabulary as V
    from tracker.services import contact_view as CV
    from tracker.services import views as SV

    with reading(auth.engine(request)) as conn:
        try:
            data = CV.person_contact_record(conn, code)
        except InputRejected:
            raise HTTPException(404) from None
        members = SV.family_members(conn, data["family"])
        variants = SV.family_variant_keys(conn, data["family"])
    clinic.audit_read(request, user, family=data["family"], person=code,
                      what=f"contact log of {code}: {len(data['history'])} events, {len(data['letters'])} letters")  # fmt: skip
    ctx = {"d": data, "s": data["state"], "members": [m for m in members if m != code], "variants": variants,
           "V": V, "today": clinic.today(request).isoformat(), "errors": {}, "values": {}, "open": None,
           "role": user.role}  # fmt: skip
    ctx.update(extra or {})
    return render(request, "person_contact.html", ctx, status_code=status_code)


def contact_page(request: Request):
    user = auth.current_user(request)
    done = request.query_params.get("done", "")
    notice = FORMS[done][3] + " The entry is in the audit trail." if done in FORMS else None
    return _page(request, user, _code(request), {"notice": notice})


def _post(request: Request, form: str):
    action, _fields, write, _words = FORMS[form]
    user = auth.require_to(request, action)
    code = _code(request)
    f = clinic.posted(request)
    with reading(auth.engine(request)) as conn:
        from tracker.services.recall import person_family

        try:
            person_family(conn, code)
        except UserError:
            raise HTTPException(404) from None
    try:
        with writing(auth.engine(request)) as conn:
            write(conn, code, f, user, clinic.today(request))
    except InputRejected as exc:
        return _page(request, user, code, {"errors": _errors(form, exc), "values": {form: f}, "open": form},
                     status_code=400)  # fmt: skip
    return RedirectResponse(f"/person/{code}/contact?done={form}", status_code=303)


def _handler(form: str):
    def handler(request: Request):
        return _post(request, form)

    handler.__name__ = f"contact_{form.replace('-', '_')}"
    return handler


routes = [Route("/person/{code}/contact", contact_page, methods=["GET"])] + [
    Route(f"/person/{{code}}/contact/{form}", _handler(form), methods=["POST"]) for form in FORMS
]
