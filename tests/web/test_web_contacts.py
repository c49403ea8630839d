"""The contact log page (/person/{code}/contact) and its forms, the family page's "mark as sent", and
the day page's contact standing (docs/contacts-and-letters.md).  Demo families only (invented)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from conftest import dump as _dump
from web.conftest import audit_rows

PERSON = "HV01-III-2"  # an invented demo relative
AT_RISK = "HV01-IV-5"  # an invented demo relative at risk, never informed: a first-contact letter
SETTINGS = Path(__file__).resolve().parents[2] / "demo_family" / "clinic.toml"  # the invented demo clinic


@pytest.fixture
def app(web_db, clock):
    """The app with the invented demo clinic's settings (a family letter needs the clinic's phone)."""
    from tracker.web.app import create_app

    application = create_app(web_db, SETTINGS)
    application.state.clock = clock
    yield application
    application.state.engine.dispose()


def dump(db: str) -> dict:
    """Every row of every table, except the read entries of the audit trail: a page re-shown with a
    form's errors appends a read entry (it shows the person), and writes nothing else."""
    d = _dump(db)
    d["audit_entry"] = [r for r in d["audit_entry"] if r[3] != "read"]
    return d


def _post(client, path, data, **kw):
    return client.post(path, data={"csrf_token": client.token, **data}, follow_redirects=False, **kw)


def test_contact_page_shows_the_log_with_cautions_and_audits_the_read(browser, web_db):
    client = browser("cardiologist")
    r = client.get(f"/person/{PERSON}/contact")
    assert r.status_code == 200, r.text
    assert "Decision support only" in r.text and "Where things stand" in r.text
    entry = audit_rows(web_db, "read")[-1]
    assert entry.person_code == PERSON and "contact log" in entry.what
    assert "Add a contact" not in r.text  # a cardiologist reads only


def _db_rows(db: str, sql: str, **params) -> list:
    from sqlalchemy import text

    from tracker.store.database import locate, make_engine

    engine = make_engine(locate(db))
    try:
        with engine.connect() as conn:
            return conn.execute(text(sql), params).all()
    finally:
        engine.dispose()


def _events(db: str, person: str) -> list:
    return _db_rows(db, "SELECT e.event_date, e.channel, e.by_role, e.outcome, e.notes, e.entered_by FROM contact_event e "
                        "JOIN person p ON p.id = e.person_id WHERE p.code = :p ORDER BY e.id", p=person)  # fmt: skip


def _beside(html: str, form: str, field: str) -> bool:
    """The error span of ``form.field`` follows that field's control, with no other label between."""
    m = re.search(rf'id="{re.escape(form)}-{field}"(.*?)<span class="field-error" id="error-{re.escape(form)}\.{field}"',
                  html, re.S)  # fmt: skip
    return bool(m) and "<label" not in m.group(1)


# form -> (roles allowed, roles refused, a valid submission for PERSON)
FORMS = {
    "event": (("nurse", "counsellor"), ("cardiologist", "admin"),
              {"on": "2026-12-07", "channel": "phone", "by": "nurse", "outcome": "informed", "notes": "rang"}),
    "wish": (("counsellor",), ("nurse", "cardiologist", "admin"), {"wish": "no_further_contact", "on": "2026-12-07"}),
    "external": (("counsellor",), ("nurse", "cardiologist", "admin"),
                 {"kind": "screening", "on": "2026-11-02", "centre": "Invented Heart Centre", "result": "unaffected"}),
    "booking": (("nurse",), ("counsellor", "cardiologist", "admin"), {"on": "2027-01-11", "purpose": "echo and ECG"}),
}  # fmt: skip


def test_contact_page_signed_out_redirects_and_unknown_person_404(browser):
    anon = browser()
    r = anon.get(f"/person/{PERSON}/contact", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")
    assert browser("nurse").get("/person/NO-SUCH-9/contact").status_code == 404


@pytest.mark.parametrize("form", sorted(FORMS))
def test_each_form_writes_the_log_and_the_audit_trail(browser, web_db, form):
    allowed, _refused, data = FORMS[form]
    client = browser(allowed[-1])
    before = len(audit_rows(web_db, "record"))
    r = _post(client, f"/person/{PERSON}/contact/{form}", data)
    assert r.status_code == 303, r.text
    assert r.headers["location"] == f"/person/{PERSON}/contact?done={form}"
    entries = audit_rows(web_db, "record")
    assert len(entries) == before + 1
    assert entries[-1].actor == client.name and entries[-1].person_code == PERSON
    page = client.get(r.headers["location"]).text
    assert "The entry is in the audit trail" in page
    if form == "event":
        assert _events(web_db, PERSON)[-1][1:] == ("phone", "nurse", "informed", "rang", client.name)
        assert re.search(r'id="contact-log".*?<td>2026-12-07</td><td>phone</td>', page, re.S)
    elif form == "wish":
        assert "Must not be approached" in page and "open</strong>" in page
    elif form == "external":
        assert "Invented Heart Centre" in page
    else:
        assert re.search(r'id="bookings".*?<td>2027-01-11</td><td>echo and ECG</td>', page, re.S)


@pytest.mark.parametrize("form,role", [(f, r) for f, (_, refused, _d) in sorted(FORMS.items()) for r in refused]
                         + [("discharge", "nurse"), ("wish-end", "nurse"), ("reply", "cardiologist"),
                            ("cancel", "counsellor")])  # fmt: skip
def test_refused_roles_write_nothing(browser, web_db, form, role):
    client = browser(role)
    data = FORMS[form][2] if form in FORMS else {"on": "2026-12-07"}
    before = dump(web_db)
    r = _post(client, f"/person/{PERSON}/contact/{form}", data)
    assert r.status_code == 403 and "Nothing was changed" in r.text
    assert dump(web_db) == before


@pytest.mark.parametrize("form", sorted(FORMS) + ["discharge", "wish-end", "reply", "cancel"])
def test_missing_or_wrong_csrf_token_refused(browser, web_db, form):
    client = browser("counsellor")
    data = FORMS.get(form, (None, None, {"on": "2026-12-07"}))[2]
    before = dump(web_db)
    r = client.post(f"/person/{PERSON}/contact/{form}", data=data, follow_redirects=False)
    assert r.status_code == 403 and "security token" in r.text
    r = client.post(f"/person/{PERSON}/contact/{form}", data={**data, "csrf_token": "0" * 64}, follow_redirects=False)
    assert r.status_code == 403
    assert dump(web_db) == before


def test_signed_out_post_writes_nothing(browser, web_db):
    anon = browser()
    before = dump(web_db)
    r = anon.post(f"/person/{PERSON}/contact/event", data=FORMS["event"][2], follow_redirects=False)
    assert r.status_code in (303, 403)
    assert dump(web_db) == before


@pytest.mark.parametrize("form,role,data,field", [
    ("event", "nurse", {"on": "2026-02-30", "channel": "phone", "by": "nurse", "outcome": "informed"}, "on"),
    ("event", "nurse", {"on": "2026-12-08", "channel": "phone", "by": "nurse", "outcome": "informed"}, "on"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "pigeon", "by": "nurse", "outcome": "informed"}, "channel"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "phone", "by": "surgeon", "outcome": "informed"}, "by"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "phone", "by": "nurse", "outcome": ""}, "outcome"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "phone", "by": "nurse", "outcome": "contact_later",
                        "later": "2026-12-01"}, "later"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "via_family", "outcome": "informed", "via": ""}, "via"),
    ("event", "nurse", {"on": "2026-12-07", "channel": "phone", "by": "nurse", "outcome": "informed",
                        "notes": "bell\x07"}, "notes"),
    ("wish", "counsellor", {"wish": "", "on": "2026-12-07"}, "wish"),
    ("wish", "counsellor", {"wish": "no_further_contact", "on": "2027-01-01"}, "on"),
    ("wish", "counsellor", {"wish": "only_via_family_member", "on": "2026-12-07", "via": ""}, "via"),
    ("wish", "counsellor", {"wish": "only_via_family_member", "on": "2026-12-07", "via": "HV02-IV-2"}, "via"),
    ("external", "counsellor", {"kind": "", "on": "2026-11-02", "centre": "X", "result": "unaffected"}, "kind"),
    ("external", "counsellor", {"kind": "screening", "on": "", "centre": "X", "result": "unaffected"}, "on"),
    ("external", "counsellor", {"kind": "screening", "on": "2026-11-02", "centre": "", "result": "unaffected"},
     "centre"),
    ("external", "counsellor", {"kind": "screening", "on": "2026-11-02", "centre": "X", "result": "carrier"}, "result"),
    ("external", "counsellor", {"kind": "screening", "on": "2026-11-02", "centre": "X", "result": "affected",
                                "variant": "NM_000256.3:c.1504C>T"}, "variant"),
    ("discharge", "counsellor", {"on": "2026-12-07", "advice": ""}, "advice"),
    ("discharge", "counsellor", {"on": "12/07/2026", "advice": "come back with symptoms"}, "on"),
    ("booking", "nurse", {"on": "2020-01-06", "purpose": "screening"}, "on"),
    ("booking", "nurse", {"on": "2027-01-11", "purpose": ""}, "purpose"),
    ("cancel", "nurse", {"visit_date": "2027-03-01"}, "visit_date"),
    ("reply", "nurse", {"letter": "", "on": "2026-12-07"}, "letter"),
])  # fmt: skip
def test_bad_input_error_beside_the_field_nothing_written(browser, web_db, form, role, data, field):
    client = browser(role)
    person = "HV01-IV-3" if form == "discharge" else PERSON  # HV01-IV-3: an invented non-carrier
    before = dump(web_db)
    r = _post(client, f"/person/{person}/contact/{form}", data)
    assert r.status_code == 400, r.text[:300]
    assert _beside(r.text, form, field), re.findall(r'class="field-error"[^>]*>[^<]*', r.text)
    assert dump(web_db) == before


def test_form_problems_without_a_field_are_shown_on_top(browser, web_db):
    """A discharge for someone without a non-carrier result; ending a wish when none is open."""
    client = browser("counsellor")
    before = dump(web_db)
    r = _post(client, f"/person/{PERSON}/contact/discharge", {"on": "2026-12-07", "advice": "come back"})
    assert r.status_code == 400 and re.search(r'class="form-error".*?person: .*?no non-carrier result', r.text, re.S)
    r = _post(client, f"/person/{PERSON}/contact/wish-end", {"on": "2026-12-07"})
    assert r.status_code == 400 and "has no open wish" in r.text
    assert dump(web_db) == before


def test_wish_blocks_booking_until_ended_history_kept(browser, web_db):
    counsellor, nurse = browser("counsellor"), browser("nurse")
    assert _post(counsellor, f"/person/{PERSON}/contact/wish", FORMS["wish"][2]).status_code == 303
    before = dump(web_db)
    r = _post(nurse, f"/person/{PERSON}/contact/booking", FORMS["booking"][2])
    assert r.status_code == 400 and "asked for no further contact" in r.text
    assert dump(web_db) == before
    assert _post(counsellor, f"/person/{PERSON}/contact/wish-end", {"on": "2026-12-07", "notes": "asked to be seen"}
                 ).status_code == 303  # fmt: skip
    assert _post(nurse, f"/person/{PERSON}/contact/booking", FORMS["booking"][2]).status_code == 303
    assert _post(nurse, f"/person/{PERSON}/contact/cancel", {"visit_date": "2027-01-11"}).status_code == 303
    page = nurse.get(f"/person/{PERSON}/contact").text
    assert re.search(r'id="wishes".*?no further contact</td><td>2026-12-07</td><td>2026-12-07 \(', page, re.S)
    assert re.search(r'<td>2027-01-11</td><td>echo and ECG</td>.*?<td>2026-12-07 \(', page, re.S)  # kept, cancelled
    edits = audit_rows(web_db, "edit")
    assert [e.person_code for e in edits[-2:]] == [PERSON, PERSON]


def test_discharge_keeps_the_class_relied_on(browser, web_db):
    client = browser("counsellor")
    r = _post(client, "/person/HV01-IV-3/contact/discharge", {"on": "2026-12-07", "advice": "come back with symptoms"})
    assert r.status_code == 303, r.text
    page = client.get("/person/HV01-IV-3/contact").text
    assert re.search(r'id="discharges".*?NM_000256.3:c.1504C&gt;T.*?pathogenic.*?since \d{4}-\d\d-\d\d.*?come back with '
                     r'symptoms', page, re.S)  # fmt: skip
    assert audit_rows(web_db, "record")[-1].person_code == "HV01-IV-3"


# --------------------------------------------------------------------------- letters: mark as sent, reply


def test_making_the_letter_records_nothing_marking_it_sent_does(browser, web_db):
    client = browser("counsellor")
    before = _db_rows(web_db, "SELECT count(*) FROM letter_sent")[0][0]
    r = _post(client, "/family/HV01/letter", {"person": AT_RISK})
    assert r.status_code == 200 and r.headers["content-type"] == "application/pdf"
    assert _db_rows(web_db, "SELECT count(*) FROM letter_sent")[0][0] == before
    r = _post(client, "/family/HV01/letter-sent", {"person": AT_RISK, "on": "2026-12-07"})
    assert r.status_code == 200 and "first contact" in r.text and "was recorded as sent on 2026-12-07" in r.text
    rows = _db_rows(web_db, "SELECT l.kind, l.template, l.template_version, l.sent_date, l.sent_to FROM letter_sent l "
                            "JOIN person p ON p.id = l.person_id WHERE p.code = :p", p=AT_RISK)  # fmt: skip
    assert len(rows) == 1 and rows[0].kind == "first_contact" and rows[0].sent_to == "person"
    assert re.fullmatch(r"sha256:[0-9a-f]{12}", rows[0].template_version)
    entry = audit_rows(web_db, "record")[-1]
    assert entry.actor == client.name and entry.person_code == AT_RISK and "letter" in entry.what
    # The nurse records the reply; the contact page shows both.
    nurse = browser("nurse")
    r = _post(nurse, f"/person/{AT_RISK}/contact/reply", {"letter": f"{rows[0].kind}|{rows[0].sent_date}",
                                                         "on": "2026-12-07"})  # fmt: skip
    assert r.status_code == 303, r.text
    page = nurse.get(f"/person/{AT_RISK}/contact").text
    assert re.search(r'id="letters".*?<td>2026-12-07</td>.*?sha256:.*?<td>the person</td><td>2026-12-07</td>', page, re.S)
    assert audit_rows(web_db, "edit")[-1].person_code == AT_RISK


def test_letter_refused_for_no_further_contact_with_the_reason(browser, web_db):
    client = browser("counsellor")
    assert _post(client, f"/person/{AT_RISK}/contact/wish", FORMS["wish"][2]).status_code == 303
    before = dump(web_db)
    r = _post(client, "/family/HV01/letter-sent", {"person": AT_RISK, "on": "2026-12-07"})
    assert r.status_code == 400
    assert re.search(r'name="person".*?</select><span class="field-error" id="error-sent_person"[^>]*>[^<]*asked for no '
                     r'further contact', r.text, re.S)  # fmt: skip
    assert dump(web_db) == before


def test_letter_only_through_the_named_member(browser, web_db):
    client = browser("counsellor")
    r = _post(client, f"/person/{AT_RISK}/contact/wish", {"wish": "only_via_family_member", "on": "2026-12-07",
                                                         "via": "HV01-II-2"})  # fmt: skip
    assert r.status_code == 303, r.text
    before = dump(web_db)
    r = _post(client, "/family/HV01/letter-sent", {"person": AT_RISK, "on": "2026-12-07"})
    assert r.status_code == 400 and 'id="error-sent_via"' in r.text and "only through HV01-II-2" in r.text
    assert dump(web_db) == before
    r = _post(client, "/family/HV01/letter-sent", {"person": AT_RISK, "on": "2026-12-07", "via": "HV01-II-2"})
    assert r.status_code == 200 and "through HV01-II-2" in r.text


@pytest.mark.parametrize("data,field", [({"person": "HV02-IV-2", "on": "2026-12-07"}, "sent_person"),
                                        ({"person": AT_RISK, "on": "2026-13-01"}, "sent_on"),
                                        ({"person": AT_RISK, "on": "2026-12-09"}, "sent_on"),
                                        ({"person": AT_RISK, "on": "2026-12-07", "via": AT_RISK}, "sent_via")])  # fmt: skip
def test_letter_sent_bad_input_beside_the_field(browser, web_db, data, field):
    client = browser("counsellor")
    before = dump(web_db)
    r = _post(client, "/family/HV01/letter-sent", data)
    assert r.status_code == 400
    assert re.search(rf'</(?:select|label)?>?\s*<span class="field-error" id="error-{field}"', r.text) or \
        re.search(rf'>\s*<span class="field-error" id="error-{field}"', r.text)
    assert dump(web_db) == before


@pytest.mark.parametrize("role", ["nurse", "cardiologist", "admin"])
def test_letter_sent_refused_for_other_roles(browser, web_db, role):
    client = browser(role)
    before = dump(web_db)
    r = _post(client, "/family/HV01/letter-sent", {"person": AT_RISK, "on": "2026-12-07"})
    assert r.status_code == 403
    assert dump(web_db) == before
    counsellor = browser("counsellor")
    before = dump(web_db)
    r = counsellor.post("/family/HV01/letter-sent", data={"person": AT_RISK, "on": "2026-12-07"})  # no token
    assert r.status_code == 403 and dump(web_db) == before


# --------------------------------------------------------------------------- the day page


def _rows(html: str) -> list[str]:
    return re.findall(r'<tr class="[^"]*" id="row-([^"]+)"', html)


def _cell(html: str, person: str) -> str:
    m = re.search(rf'id="row-{re.escape(person)}">(.*?)</tr>', html, re.S)
    return m.group(1) if m else ""


def test_waiting_column_says_days_overdue(browser):
    html = browser("nurse").get("/day").text
    assert re.search(r"<td>\d+ days? overdue</td>", html)
    assert not re.search(r"<td>\d+</td>", html)  # never a bare number of days


def test_recorded_contact_and_booking_show_on_the_list_straight_after(browser, web_db):
    nurse = browser("nurse")
    person = _rows(nurse.get("/day").text)[0]
    r = nurse.post(f"/day/contact/{person}", data={"csrf_token": nurse.token, "on": "2026-12-07", "channel": "phone",
                                                    "outcome": "informed"}, follow_redirects=False)  # fmt: skip
    assert r.status_code == 303
    page = nurse.get(r.headers["location"]).text
    assert "The contact was recorded" in page and "informed 2026-12-07" in _cell(page, person)
    r = nurse.post(f"/day/booking/{person}", data={"csrf_token": nurse.token, "on": "2027-01-11",
                                                    "purpose": "echo"}, follow_redirects=True)  # fmt: skip
    assert "visit booked for 2027-01-11" in _cell(r.text, person)
    assert [e for e in _events(web_db, person) if e.event_date and str(e.event_date)[:10] == "2026-12-07"]


def test_htmx_row_form_refreshes_the_contact_cell(browser):
    nurse = browser("nurse")
    person = _rows(nurse.get("/day").text)[0]
    r = nurse.post(f"/day/booking/{person}", data={"csrf_token": nurse.token, "on": "2027-01-11", "purpose": "echo"},
                   headers={"HX-Request": "true"})  # fmt: skip
    assert r.status_code == 200 and "visit booked" in r.text
    assert re.search(rf'<td class="contact-cell" id="contact-{re.escape(person)}" hx-swap-oob="true">[^<]*visit booked '
                     r'for 2027-01-11', r.text)  # fmt: skip


def test_no_response_and_must_not_approach_sections(browser, web_db):
    nurse, counsellor = browser("nurse"), browser("counsellor")
    people = _rows(nurse.get("/day").text)
    quiet, stop = people[0], people[1]
    # informed 12 weeks ago, nothing back since: past the reply wait (default 6 weeks)
    r = nurse.post(f"/day/contact/{quiet}", data={"csrf_token": nurse.token, "on": "2026-09-14", "channel": "letter",
                                                   "outcome": "informed"}, follow_redirects=False)  # fmt: skip
    assert r.status_code == 303
    assert _post(counsellor, f"/person/{stop}/contact/wish", FORMS["wish"][2]).status_code == 303
    html = nurse.get("/day").text
    no_resp = re.search(r'id="no-response-list".*?</table>', html, re.S).group(0)
    assert quiet in no_resp and "2026-09-14" in no_resp
    must_not = re.search(r'id="must-not-list".*?</table>', html, re.S).group(0)
    assert stop in must_not
    assert stop not in _rows(html)  # never proposed with the row forms
    assert "no response" in _cell(html, quiet)
    entry = audit_rows(web_db, "read")[-1]
    assert stop in entry.what  # the read entry names everyone shown


def test_day_list_draws_the_most_urgent_rows_and_links_to_all(browser, web_db, monkeypatch):
    """The page draws a page of rows (most urgent first) with a count and a link to every row; the read
    audit entry names the people drawn; downloads hold every row."""
    import sqlite3

    from tracker.web.pages import day

    nurse = browser("nurse")
    everyone = re.findall(r'<tr class="[^"]*" id="row-([^"]+)"', nurse.get("/day").text)
    assert len(everyone) > 3
    monkeypatch.setattr(day, "PAGE_ROWS", 3)
    html = nurse.get("/day").text
    drawn = re.findall(r'<tr class="[^"]*" id="row-([^"]+)"', html)
    assert drawn == everyone[:3]
    assert f"Showing the 3 most urgent of {len(everyone)} people" in html and "show=all" in html
    html = nurse.get("/day?show=all").text
    assert re.findall(r'<tr class="[^"]*" id="row-([^"]+)"', html) == everyone and 'id="more-rows"' not in html
    csv_rows = nurse.get("/day.csv").text.strip().splitlines()
    assert sum(1 for p in everyone if any(line.startswith(p + ",") or f",{p}," in line for line in csv_rows)) == len(everyone)
    if web_db.endswith(".sqlite"):
        with sqlite3.connect(web_db) as con:
            what = con.execute("SELECT what FROM audit_entry WHERE action = 'read' AND what LIKE 'day list%' "
                               "ORDER BY id").fetchall()  # fmt: skip
        page, show_all, download = (w[0] for w in what[-3:])
        assert "3 people" in page and f"{len(everyone)} people" in show_all  # the people drawn
        assert "download" in download and f"{len(everyone)} people" in download  # a download holds every row
