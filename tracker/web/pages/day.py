"""The nurse's day (``/day``): who is due or overdue in a window, never screened, contact gaps and
open reclassification tasks, most urgent first; the same list as CSV, iCalendar and PDF; and, on
each row, forms to record a contact or book a visit.

The page reads a page of the list (the most urgent rows, with the size of each part) from
:mod:`tracker.services.day_list`; the downloads hold every row of the worklist as
``tracker worklist`` gets it (:mod:`tracker.services.worklist`), the tasks as ``tracker tasks``.
Each view is a read entry in the audit trail naming the people shown.
"""

from __future__ import annotations

import datetime as dt

from starlette.requests import Request
from starlette.responses import RedirectResponse, Response
from starlette.routing import Route

from tracker.services import accounts as AC
from tracker.store.database import reading, writing
from tracker.web import auth
from tracker.web.templating import field_errors, render

DEFAULT_WEEKS = 6  # the look-ahead window shown by default (a planning choice of this project, not a clinical value)
MAX_WINDOW_DAYS = 2 * 366  # a longer window is refused (engineering limit: the page stays readable)
PAGE_ROWS = 50  # rows of the main list drawn at once, most urgent first; "show all" draws every row (a
# reading choice of this project, as the terminal's [display] table_rows; downloads always hold every row)
SECTION_ROWS = 20  # rows drawn of "informed, no response" and "must not be approached" (the same kind of choice;
# everyone in the first is on the main list too; "show all" draws every row)
REASONS = {
    "": "everything",
    "overdue": "overdue",
    "due": "due in the window",
    "never_screened": "never screened",
    "contact_gap": "contact gaps",
    "task": "reclassification tasks",
}
# The contact log's words (tracker.domain.vocabulary CONTACT_CHANNELS and the outcomes a user enters);
# the service checks them again.
CONTACT_CHANNELS = ("phone", "letter", "in_clinic", "via_family", "other")
CONTACT_OUTCOMES = ("informed", "no_answer", "wrong_address", "declined", "contact_later", "moved_away")
CONTACT_FIELDS = ("on", "channel", "outcome", "later", "via", "notes")
BOOKING_FIELDS = ("on", "purpose", "notes")


# Where a row stands with contact (the worklist's ``contact`` category, docs/contacts-and-letters.md).
CONTACT_WORDS = {
    "must_not_approach": "must not be approached",
    "declined": "declined contact",
    "lost_to_follow_up": "lost to follow-up",
    "contact_later": "asked to be contacted later",
    "not_informed": "not yet informed",
    "no_response": "informed, no response",
}


def waiting_words(row: dict) -> str:
    """The "Waiting" column: the never-screened phrase, 'declined: not recalled', else how long overdue
    in words ("4025 days overdue", "due today", "due in 12 days")."""
    if row.get("waiting"):
        return row["waiting"]
    if row.get("status") == "not_recalled":
        return "declined: not recalled"
    days = row.get("days_overdue")
    if days is None:
        return ""
    if days == 0:
        return "due today"
    if days < 0:
        return f"due in {-days} day{'s' if days != -1 else ''}"
    return f"{days} day{'s' if days != 1 else ''} overdue"


def contact_words(row: dict, booked: dict | None = None) -> str:
    """The details of the row's contact standing (its category is shown as a tag beside them): the day
    informed, the day asked for, the family member contact goes through, and a visit already booked."""
    parts = []
    cat = row.get("contact")
    if cat == "contact_later" and row.get("contact_later_on"):
        parts.append(f"on {row['contact_later_on']}")
    elif row.get("informed_on"):
        parts.append(f"informed {row['informed_on']}" + (", nothing back since" if cat == "no_response" else ""))
    if row.get("contact_via"):
        parts.append(f"only through {row['contact_via']}")
    if booked:
        parts.append(f"visit booked for {booked['visit_date']}")
    return "; ".join(parts)


def _day(text: str | None, field: str, default: dt.date, errors: dict) -> dt.date:
    from tracker.domain.dates import parse_date

    if not text:
        return default
    try:
        return parse_date(text)
    except ValueError as exc:
        errors.setdefault(field, []).append(str(exc))
        return default


def filters(request: Request) -> tuple[dict, dict]:
    """The page's filters from the query (window, family, reason), and any errors by field."""
    q = request.query_params
    errors: dict[str, list[str]] = {}
    today = auth.now(request).date()
    start = _day(q.get("from"), "from", today, errors)
    end = _day(q.get("to"), "to", start + dt.timedelta(weeks=DEFAULT_WEEKS), errors)
    if "from" not in errors and "to" not in errors:
        if end < start:
            errors["to"] = ["is before the first day"]
        elif (end - start).days > MAX_WINDOW_DAYS:
            errors["to"] = [f"the window is longer than {MAX_WINDOW_DAYS} days"]
    family = (q.get("family") or "").strip()
    if len(family) > 40:
        errors["family"] = ["a family code has at most 40 characters"]
    reason = q.get("reason") or ""
    if reason not in REASONS:
        errors["reason"] = [f"not a choice: {', '.join(k for k in REASONS if k)}"]
        reason = ""
    show_all = (q.get("show") or "") == "all"
    return {"from": start, "to": end, "family": family, "reason": reason, "all": show_all}, errors


def day_data(request: Request, f: dict) -> dict:
    """What the page shows for the filters ``f``: a page of each part of the day list
    (:func:`tracker.services.day_list.day_list`; every row with "show all"), the open
    reclassification tasks and the visits already booked for the rows shown."""
    from tracker.services import contact_view as CV
    from tracker.services import day_list as DL
    from tracker.services import recall as SV
    from tracker.services import tasks as TS

    conf, rule_set, policy = SV.recall_rules(request.app.state.settings_path, None)
    on = auth.now(request).date()
    # The app's clock says what today is: the proposals that do not hold are stored for that day.
    page = DL.day_list(auth.engine(request), f["from"], f["to"], on, conf, rule_set, policy, f["family"],
                       f["reason"], None if f.get("all") else PAGE_ROWS, today=on,
                       section_limit=None if f.get("all") else SECTION_ROWS)  # fmt: skip
    with reading(auth.engine(request)) as conn:
        families = TS.list_tasks(conn, None) if f["reason"] in ("", "task") else []
        tasks = [t for t in families if not f["family"] or t["family"] == f["family"]]
        booked = CV.open_bookings(conn, [r["family"] for r in page.rows + page.must_not], on)
    return {"rows": page.rows, "total": page.total, "no_response": page.no_response,
            "no_response_total": page.no_response_total, "must_not_approach": page.must_not,
            "must_not_total": page.must_not_total, "tasks": tasks, "rule_set": rule_set, "on": on,
            "booked": booked, "wait_weeks": page.wait_weeks, "trend": page.trend}  # fmt: skip


def download_data(request: Request, f: dict) -> dict:
    """Every row of the day list for the filters ``f``, and the whole worklist (the PDF's sections)."""
    from tracker.services import day_list as DL
    from tracker.services import recall as SV
    from tracker.services import tasks as TS
    from tracker.services import worklist as SW

    conf, rule_set, policy = SV.recall_rules(request.app.state.settings_path, None)
    on = auth.now(request).date()
    lists = SW.nurse_worklist(auth.engine(request), f["from"], f["to"], on, conf, rule_set, policy,
                              conf.slots_per_week)  # fmt: skip
    page = DL.from_lists(lists, on, f["family"], f["reason"], None, conf.cascade.reply_wait_weeks)
    with reading(auth.engine(request)) as conn:
        families = TS.list_tasks(conn, None) if f["reason"] in ("", "task") else []
    return {"lists": lists, "rows": page.rows, "must_not_approach": page.must_not, "conf": conf,
            "rule_set": rule_set, "policy": policy, "on": on,
            "tasks": [t for t in families if not f["family"] or t["family"] == f["family"]]}  # fmt: skip


def _audit_view(request: Request, user: AC.User, data: dict, what: str) -> None:
    shown = data["rows"] + data["must_not_approach"]
    people = sorted({r["person"] for r in shown} | {t["person"] for t in data["tasks"] if t["person"]})
    families = sorted({r["family"] for r in shown} | {t["family"] for t in data["tasks"]})
    with writing(auth.engine(request)) as conn:
        AC.audit_read(conn, user, family=families[0] if len(families) == 1 else None,
                      person=people[0] if len(people) == 1 else None,
                      what=f"{what}: {len(people)} people ({', '.join(people) or 'none'}); families "
                           f"{', '.join(families) or 'none'}", now=auth.now(request))  # fmt: skip


def _query(f: dict) -> str:
    from urllib.parse import urlencode

    return urlencode({"from": f["from"].isoformat(), "to": f["to"].isoformat(), "family": f["family"],
                      "reason": f["reason"]})  # fmt: skip  (downloads hold every row: no "show")


def day_page(request: Request):
    from tracker.outputs.worklist_pdf import GAP_WORDS, flag_words
    from tracker.outputs.ics import needs_words

    user = auth.current_user(request)
    f, errors = filters(request)
    if errors:
        return render(request, "day.html", {"f": f, "errors": errors, "reasons": REASONS, "data": None},
                      status_code=400)  # fmt: skip
    data = day_data(request, f)
    _audit_view(request, user, data, f"day list {f['from'].isoformat()} to {f['to'].isoformat()}")
    return render(request, "day.html", {
        "f": f, "reasons": REASONS, "data": data, "query": _query(f), "gap_words": GAP_WORDS,
        "flag_words": flag_words, "waiting_text": waiting_words, "contact_words": contact_words,
        "contact_labels": CONTACT_WORDS,
        "needs_words": needs_words, "channels": CONTACT_CHANNELS, "outcomes": CONTACT_OUTCOMES,
        "today": data["on"].isoformat(), "done": DONE_WORDS.get(request.query_params.get("done", "")),
    })  # fmt: skip


def _download(request: Request, kind: str):
    user = auth.current_user(request)
    f, errors = filters(request)
    if errors:
        raise auth.Refused("; ".join(f"{k}: {' '.join(v)}" for k, v in errors.items()), status=400)
    data = download_data(request, f)  # a download holds every row
    _audit_view(request, user, data, f"day list {kind.upper()} download {f['from'].isoformat()} to {f['to'].isoformat()}")
    from tracker.services import worklist as SW

    name = f"worklist-{f['from'].isoformat()}-{f['to'].isoformat()}"
    if kind == "csv":
        body, media = SW.csv_text(data["rows"]).encode("utf-8"), "text/csv; charset=utf-8"
    elif kind == "ics":
        body, media = SW.calendar_bytes([r for r in data["rows"] if r["list"] != "contact_gap"]), "text/calendar"
    else:
        body, media = _pdf(data, f), "application/pdf"
    return Response(body, media_type=media,
                    headers={"Content-Disposition": f'attachment; filename="{name}.{kind}"'})  # fmt: skip


def _pdf(data: dict, f: dict) -> bytes:
    import tempfile
    from pathlib import Path

    from tracker.outputs import worklist_pdf as W
    from tracker.services import worklist as SW

    keep = {r["person"] for r in data["rows"]}
    lists = dict(data["lists"])
    for k in ("due", "affected", "contact_gaps"):
        lists[k] = [r for r in lists[k] if r["person"] in keep]
    doc = SW.pdf_document(lists, clinic=data["conf"].clinic.name, start=f["from"], end=f["to"],
                          rule_set=data["rule_set"], policy=data["policy"], on=data["on"],
                          slots=data["conf"].slots_per_week, printed=data["on"])  # fmt: skip
    with tempfile.TemporaryDirectory(prefix="tracker-web-") as tmp:
        path = Path(tmp) / "worklist.pdf"
        W.write_worklist_pdf(doc, path)
        return path.read_bytes()


def day_csv(request: Request):
    return _download(request, "csv")


def day_ics(request: Request):
    return _download(request, "ics")


def day_pdf(request: Request):
    return _download(request, "pdf")


# --------------------------------------------------------------------------- row forms


def _person(request: Request) -> str:
    code = request.path_params["person"]
    if not 1 <= len(code) <= 40:
        raise auth.Refused("no such person", status=404)
    return code


def _text(form, name: str) -> str | None:
    v = form.get(name)
    return v.strip() if isinstance(v, str) and v.strip() else None


DONE_WORDS = {"contact": "The contact was recorded; the list below shows it.",
              "booking": "The visit was booked; the list below shows it."}


def _row_form_result(request: Request, template: str, person: str, values: dict, errors: dict | None):
    if errors:
        if request.headers.get("hx-request"):  # htmx: only the form, with its errors
            template = "_contact_form.html" if template == "day_contact.html" else "_booking_form.html"
        return render(request, template, {"person": person, "values": values, "errors": errors,
                                          "channels": CONTACT_CHANNELS, "outcomes": CONTACT_OUTCOMES,
                                          "today": auth.now(request).date().isoformat()},
                      status_code=400)  # fmt: skip
    if request.headers.get("hx-request"):  # the notice in place of the form, and the row's contact cell refreshed
        return render(request, "_row_done.html", {"person": person, "what": values.get("_what", "recorded"),
                                                  "standing": _standing_now(request, person)})  # fmt: skip
    kind = "contact" if template == "day_contact.html" else "booking"
    return RedirectResponse(f"/day?done={kind}#row-{person}", status_code=303)


def _standing_now(request: Request, person: str) -> str:
    """The row's contact details straight after a write, from the log (the tag waits for the next view)."""
    from tracker.services import contact_view as CV
    from tracker.services import contacts as SC

    today = auth.now(request).date()
    with reading(auth.engine(request)) as conn:
        state = SC.contact_state(conn, person)
        booked = CV.open_bookings(conn, [state["family"]], today).get(person)
    row = {"informed_on": state["informed_date"], "contact_later_on": state["contact_later_on"],
           "contact": "contact_later" if state["contact_later_on"] and state["contact_later_on"] > today.isoformat()
           else None, "contact_via": state["wish_via"]}  # fmt: skip
    return contact_words(row, booked)


def _date_field(form, name: str, errors: dict) -> dt.date | None:
    from tracker.domain.dates import parse_date

    v = _text(form, name)
    if v is None:
        errors.setdefault(name, []).append("give a date (YYYY-MM-DD)")
        return None
    try:
        return parse_date(v)
    except ValueError as exc:
        errors.setdefault(name, []).append(str(exc))
        return None


def record_contact(request: Request):
    from tracker.io.reading import InputRejected

    from tracker.services import contacts as SC

    user = auth.require_to(request, "contact")
    person, form = _person(request), request.state.form
    values = {k: _text(form, k) or "" for k in CONTACT_FIELDS}
    errors: dict[str, list[str]] = {}
    on = _date_field(form, "on", errors)
    later = _date_field(form, "later", errors) if values["later"] else None
    for name in ("channel", "outcome"):
        if not values[name]:
            errors.setdefault(name, []).append("choose one")
    if not errors:
        via_family = values["channel"] == "via_family"
        try:
            with writing(auth.engine(request)) as conn:
                SC.record_contact(conn, person, on=on, channel=values["channel"], by=None if via_family else user.role,
                                  outcome=values["outcome"], notes=values["notes"] or None, later=later,
                                  via=values["via"] or None, user=user.name, today=auth.now(request).date())  # fmt: skip
        except InputRejected as exc:
            errors = field_errors(exc, CONTACT_FIELDS)
    values["_what"] = "contact recorded"
    return _row_form_result(request, "day_contact.html", person, values, errors)


def record_booking(request: Request):
    from tracker.io.reading import InputRejected

    from tracker.services import contacts as SC

    user = auth.require_to(request, "booking")
    person, form = _person(request), request.state.form
    values = {k: _text(form, k) or "" for k in ("on", "purpose", "notes")}
    errors: dict[str, list[str]] = {}
    on = _date_field(form, "on", errors)
    if not values["purpose"]:
        errors.setdefault("purpose", []).append("say what the visit is for")
    if not errors:
        try:
            with writing(auth.engine(request)) as conn:
                SC.record_booking(conn, person, on=on, purpose=values["purpose"], user=user.name,
                                  notes=values["notes"] or None, today=auth.now(request).date())  # fmt: skip
        except InputRejected as exc:
            errors = field_errors(exc, BOOKING_FIELDS)
    values["_what"] = "visit booked"
    return _row_form_result(request, "day_booking.html", person, values, errors)


routes = [
    Route("/day", day_page, methods=["GET"]),
    Route("/day.csv", day_csv, methods=["GET"]),
    Route("/day.ics", day_ics, methods=["GET"]),
    Route("/day.pdf", day_pdf, methods=["GET"]),
    Route("/day/contact/{person}", record_contact, methods=["POST"]),
    Route("/day/booking/{person}", record_booking, methods=["POST"]),
]
