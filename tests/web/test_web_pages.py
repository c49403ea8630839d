"""The cohort, import and administration pages, and the day page's row forms."""

from __future__ import annotations

import re

import pytest

from conftest import dump
from web.conftest import PASSWORD, audit_rows, csrf_from, sign_in

NEW_FAMILY = ("family,condition,notes\n"
              "WEB01,hypertrophic cardiomyopathy,Invented family for a web import test.\n")  # fmt: skip
BAD_FAMILY = ("family,condition,notes\n"
              "WEB02,,Invented.\n"
              "bad code!,hypertrophic cardiomyopathy,\n")  # fmt: skip


def _labels_with_errors(html: str) -> list[str]:
    return [lab for lab in re.findall(r"<label>.*?</label>", html, re.S) if "field-error" in lab]


# --------------------------------------------------------------------------- cohort


def test_cohort_flags_first_with_cautions_and_read_audit(browser, web_db):
    client = browser("cardiologist")
    r = client.get("/cohort")
    assert r.status_code == 200 and "Decision support only" in r.text
    rows = re.findall(r'<tr class="(overdue|)" id="trend-([^"]+)"', r.text)
    assert rows and rows[0][0] == "overdue"
    flags = [cls for cls, _ in rows]
    assert flags == sorted(flags, key=lambda c: c != "overdue")  # flagged rows first
    assert audit_rows(web_db, "read")[-1].what.startswith("cohort trends")


def test_cohort_filters(browser, web_db):
    client = browser("nurse")
    r = client.get("/cohort?family=HV02&measure=mwt_echo&flag=any")
    ids = re.findall(r'id="trend-([^"]+)"', r.text)
    assert ids and all(i.startswith("HV02-") and i.endswith("-mwt_echo") for i in ids)
    entry = audit_rows(web_db, "read")[-1]
    assert entry.family_code == "HV02"


@pytest.mark.parametrize("query,field", [("family=NOPE", "family"), ("measure=nope", "measure"),
                                          ("flag=bogus", "flag"), ("family=" + "X" * 41, "family")])  # fmt: skip
def test_cohort_filter_errors_beside_the_field(browser, web_db, query, field):
    client = browser("nurse")
    before = dump(web_db)
    r = client.get("/cohort?" + query)
    assert r.status_code == 400
    assert [f'name="{field}"' in lab for lab in _labels_with_errors(r.text)] == [True]
    assert dump(web_db) == before


# --------------------------------------------------------------------------- import


def _upload(client, content: str, name: str = "families.csv", kind: str = "guess"):
    return client.post("/import", data={"csrf_token": client.token, "kind": kind},
                       files={"file": (name, content.encode("utf-8"), "text/csv")})  # fmt: skip


def test_import_dry_run_then_confirm(browser, web_db):
    client = browser("admin")
    before = dump(web_db)
    r = _upload(client, NEW_FAMILY)
    assert r.status_code == 200 and "would add 1" in r.text
    assert dump(web_db) == before  # the dry run wrote nothing
    upload_id = re.search(r'action="/import/([^/]+)/confirm"', r.text).group(1)
    r = client.post(f"/import/{upload_id}/confirm", data={"csrf_token": client.token})
    assert r.status_code == 200 and "1 added" in r.text
    assert any(row[1] == "WEB01" for row in dump(web_db)["family"])
    assert audit_rows(web_db, "import")[-1].actor == client.name
    # the kept upload is gone: confirming again stores nothing
    again = client.post(f"/import/{upload_id}/confirm", data={"csrf_token": client.token})
    assert again.status_code == 404


def test_import_report_lists_every_problem_by_row_and_column(browser, web_db):
    client = browser("admin")
    before = dump(web_db)
    r = _upload(client, BAD_FAMILY)
    assert r.status_code == 400
    cells = re.findall(r'<tr><td class="where">(\d*)</td><td class="code">([^<]*)</td>', r.text)
    assert ("2", "condition") in cells and ("3", "family") in cells
    assert "/confirm" not in r.text
    assert dump(web_db) == before


@pytest.mark.parametrize("case", ["no_file", "unknown_name", "bad_kind"])
def test_import_form_errors_beside_the_field(browser, web_db, case):
    client = browser("admin")
    before = dump(web_db)
    if case == "no_file":
        r = client.post("/import", data={"csrf_token": client.token, "kind": "guess"})
        field = "file"
    elif case == "unknown_name":
        r = _upload(client, NEW_FAMILY, name="mine.csv")
        field = "kind"
    else:
        r = _upload(client, NEW_FAMILY, kind="nonsense")
        field = "kind"
    assert r.status_code == 400
    assert re.search(rf'name="{field}".*?<span class="field-error"', r.text, re.S)
    assert dump(web_db) == before


def test_only_the_uploader_can_confirm(browser, web_db):
    first, second = browser("admin"), browser("admin")
    r = _upload(first, NEW_FAMILY)
    upload_id = re.search(r'action="/import/([^/]+)/confirm"', r.text).group(1)
    before = dump(web_db)
    r = second.post(f"/import/{upload_id}/confirm", data={"csrf_token": second.token})
    assert r.status_code == 403
    assert dump(web_db) == before


def test_upload_expires(browser, web_db, clock):
    client = browser("admin")
    r = _upload(client, NEW_FAMILY)
    upload_id = re.search(r'action="/import/([^/]+)/confirm"', r.text).group(1)
    for _ in range(4):  # 80 minutes, the session kept in use
        clock.advance(minutes=20)
        assert client.get("/password").status_code == 200
    before = dump(web_db)
    r = client.post(f"/import/{upload_id}/confirm", data={"csrf_token": client.token})
    assert r.status_code == 404 and "expired" in r.text
    assert dump(web_db) == before


@pytest.mark.parametrize("role", ["nurse", "cardiologist", "counsellor"])
def test_import_is_for_admins(browser, web_db, role):
    client = browser(role)
    assert client.get("/import").status_code == 403
    before = dump(web_db)
    r = _upload(client, NEW_FAMILY)
    assert r.status_code == 403 and "admin" in r.text
    assert dump(web_db) == before


# --------------------------------------------------------------------------- admin: accounts


def test_admin_adds_an_account_and_the_password_is_shown_once(browser, web_db):
    admin = browser("admin")
    r = admin.post("/admin/accounts", data={"csrf_token": admin.token, "name": "web.counsellor", "role": "counsellor"})
    assert r.status_code == 200
    once = re.search(r'<span class="onetime">([^<]+)</span>', r.text).group(1)
    assert once not in admin.get("/admin/accounts").text
    client = browser()
    r = sign_in(client, "web.counsellor", once)
    assert r.status_code == 303 and r.headers["location"] == "/password"
    assert audit_rows(web_db, "account")[-1].what.startswith("account web.counsellor added")


@pytest.mark.parametrize("name,role,field", [("", "nurse", "name"), ("Has Space", "nurse", "name"),
                                              ("x" * 101, "nurse", "name"), ("ok.name", "surgeon", "role")])  # fmt: skip
def test_add_account_errors_beside_the_field(browser, web_db, name, role, field):
    admin = browser("admin")
    before = dump(web_db)
    r = admin.post("/admin/accounts", data={"csrf_token": admin.token, "name": name, "role": role})
    assert r.status_code == 400
    assert re.search(rf'name="{field}".*?<span class="field-error"', r.text, re.S)
    assert dump(web_db) == before


def test_duplicate_account_refused(browser, web_db):
    admin = browser("admin")
    before = dump(web_db)
    r = admin.post("/admin/accounts", data={"csrf_token": admin.token, "name": admin.name, "role": "nurse"})
    assert r.status_code == 400 and "already exists" in r.text
    assert dump(web_db) == before


def test_admin_disables_and_resets(browser, web_db):
    admin, nurse = browser("admin"), browser("nurse")
    r = admin.post(f"/admin/accounts/{nurse.name}/reset", data={"csrf_token": admin.token})
    assert r.status_code == 200 and 'class="onetime"' in r.text
    assert nurse.get("/day", follow_redirects=False).status_code == 303  # the reset ended the session
    r = admin.post(f"/admin/accounts/{nurse.name}/disable", data={"csrf_token": admin.token})
    assert r.status_code == 200
    assert sign_in(browser(), nurse.name, PASSWORD).status_code == 400
    before = dump(web_db)
    r = admin.post(f"/admin/accounts/{admin.name}/disable", data={"csrf_token": admin.token})
    assert r.status_code == 400 and "your own account" in r.text
    r = admin.post("/admin/accounts/no.such/disable", data={"csrf_token": admin.token})
    assert r.status_code == 400 and "no account" in r.text
    assert dump(web_db) == before


@pytest.mark.parametrize("role", ["nurse", "cardiologist", "counsellor"])
def test_accounts_and_audit_are_for_admins(browser, web_db, role):
    client = browser(role)
    before = dump(web_db)
    assert client.get("/admin/accounts").status_code == 403
    assert client.get("/admin/audit").status_code == 403
    r = client.post("/admin/accounts", data={"csrf_token": client.token, "name": "sneaky", "role": "admin"})
    assert r.status_code == 403
    r = client.post(f"/admin/accounts/{client.name}/reset", data={"csrf_token": client.token})
    assert r.status_code == 403
    assert dump(web_db) == before


def test_password_form_errors_beside_the_fields(browser, web_db):
    client = browser("nurse")
    before = dump(web_db)
    cases = [({"current_password": "wrong", "new_password": "another-long-password",
               "repeat_password": "another-long-password"}, "current_password"),
             ({"current_password": PASSWORD, "new_password": "short", "repeat_password": "short"}, "new_password"),
             ({"current_password": PASSWORD, "new_password": PASSWORD, "repeat_password": PASSWORD}, "new_password"),
             ({"current_password": PASSWORD, "new_password": "another-long-password",
               "repeat_password": "different-long-password"}, "repeat_password")]  # fmt: skip
    for data, field in cases:
        r = client.post("/password", data={**data, "csrf_token": client.token})
        assert r.status_code == 400
        assert re.search(rf'name="{field}"[^>]*>\s*<span class="field-error"', r.text), field
    assert dump(web_db) == before


# --------------------------------------------------------------------------- admin: audit trail


def test_audit_trail_filters(browser, web_db):
    admin = browser("admin")
    browser("nurse").get("/day?family=HV01")
    r = admin.get("/admin/audit?action=read")
    assert r.status_code == 200
    actions = re.findall(r"<tr><td>\d+</td><td class=\"date\">[^<]*</td><td class=\"code\">[^<]*</td><td>([^<]+)</td>", r.text)
    assert actions and set(actions) == {"read"}
    r = admin.get("/admin/audit?family=HV01&since=2020-01-01&until=2030-12-31")
    assert r.status_code == 200 and "HV01" in r.text


@pytest.mark.parametrize("query,field", [("since=2026-02-30", "since"), ("until=soon", "until"),
                                          ("action=delete", "action"),
                                          ("since=2026-12-07&until=2026-12-01", "until")])  # fmt: skip
def test_audit_filter_errors_beside_the_field(browser, web_db, query, field):
    admin = browser("admin")
    before = dump(web_db)
    r = admin.get("/admin/audit?" + query)
    assert r.status_code == 400
    assert [f'name="{field}"' in lab for lab in _labels_with_errors(r.text)] == [True]
    assert dump(web_db) == before


# --------------------------------------------------------------------------- day: row forms


def _first_person(client) -> str:
    return re.findall(r'id="row-([^"]+)"', client.get("/day").text)[0]


def test_nurse_records_a_contact(browser, web_db):
    nurse = browser("nurse")
    person = _first_person(nurse)
    r = nurse.post(f"/day/contact/{person}", data={"csrf_token": nurse.token, "on": "2026-12-07",
                                                    "channel": "phone", "outcome": "informed"},
                   headers={"HX-Request": "true"})  # fmt: skip
    assert r.status_code == 200 and "contact recorded" in r.text


def test_nurse_books_a_visit(browser, web_db):
    nurse = browser("nurse")
    person = _first_person(nurse)
    r = nurse.post(f"/day/contact/{person}", data={"csrf_token": nurse.token, "on": "2026-12-07",
                                                    "channel": "phone", "outcome": "informed"},
                   follow_redirects=False)  # fmt: skip
    assert r.status_code == 303
    r = nurse.post(f"/day/booking/{person}", data={"csrf_token": nurse.token, "on": "2027-01-11",
                                                    "purpose": "screening echo and ECG"}, follow_redirects=False)  # fmt: skip
    assert r.status_code == 303


@pytest.mark.parametrize("form,data,field", [
    ("contact", {"on": "2026-02-30", "channel": "phone", "outcome": "informed"}, "on"),
    ("contact", {"on": "", "channel": "phone", "outcome": "informed"}, "on"),
    ("contact", {"on": "2026-12-07", "channel": "", "outcome": "informed"}, "channel"),
    ("contact", {"on": "2026-12-07", "channel": "phone", "outcome": ""}, "outcome"),
    ("contact", {"on": "2026-12-07", "channel": "carrier_pigeon", "outcome": "informed"}, "channel"),
    ("contact", {"on": "2026-12-07", "channel": "phone", "outcome": "contact_later", "later": "2026-12-01"}, "later"),
    ("contact", {"on": "2026-12-07", "channel": "via_family", "outcome": "informed", "via": ""}, "via"),
    ("booking", {"on": "next week", "purpose": "screening"}, "on"),
    ("booking", {"on": "2027-01-11", "purpose": ""}, "purpose"),
    ("booking", {"on": "2020-01-06", "purpose": "screening"}, "on"),
])  # fmt: skip
def test_row_form_errors_beside_the_field(browser, web_db, form, data, field):
    nurse = browser("nurse")
    person = _first_person(nurse)
    before = dump(web_db)
    r = nurse.post(f"/day/{form}/{person}", data={"csrf_token": nurse.token, **data}, headers={"HX-Request": "true"})
    assert r.status_code == 400
    assert re.search(rf'name="{field}"[^>]*>[^<]*<span class="field-error"', r.text) or \
        re.search(rf'name="{field}".*?</(?:select|input)>?\s*<span class="field-error"', r.text, re.S)
    assert dump(web_db) == before


def test_row_forms_refused_for_others(browser, web_db):
    client = browser("cardiologist")
    before = dump(web_db)
    r = client.post("/day/contact/HV01-III-2", data={"csrf_token": client.token, "on": "2026-12-07"})
    assert r.status_code == 403
    assert dump(web_db) == before
