"""One working day per user on the invented demo store, in a real browser; axe-core on every page visited.

Each test runs the app on its own copy of the demo store (tests/browser/conftest.py).
A page whose route is not in the app yet (404) skips its test, naming the page;
any other failure fails.  Writes are checked in the store's audit trail (who, for
whom), not only on screen.
"""

from __future__ import annotations

import datetime as dt
import re
import sqlite3

import pytest

from browser.browsing import assert_accessible, assert_keyboard_forms
from browser.steps import open_page, route_exists, sign_in, words


def audit_rows(site, actor: str) -> list[tuple]:
    """(action, table, family, person, what) of every audit entry written by ``actor``, oldest first."""
    with sqlite3.connect(f"file:{site.db}?mode=ro", uri=True) as conn:
        return conn.execute("SELECT action, table_name, family_code, person_code, what FROM audit_entry "
                            "WHERE actor = ? ORDER BY id", (actor,)).fetchall()  # fmt: skip


def writes(site, actor: str) -> list[tuple]:
    return [r for r in audit_rows(site, actor) if r[0] not in ("sign_in", "sign_in_refused", "read", "sign_out")]


def press_submit(form) -> None:
    """Submit a form from the keyboard: focus its submit button, press Enter."""
    button = form.locator("button[type=submit], button:not([type]), input[type=submit]").first
    button.focus()
    button.press("Enter")


def sent_with(page, action, what: str):
    """Do ``action`` (sends a POST); the response.  501 (the writer behind the form is not merged yet) skips."""
    with page.expect_response(lambda r: r.request.method == "POST") as info:
        action()
    response = info.value
    if response.status == 501:
        pytest.skip(f"not merged yet: {what} ({response.url.split('/', 3)[-1]} answers 501)")
    return response


# --------------------------------------------------------------------------- the nurse


def test_nurse_day_records_a_contact_and_books_a_visit(page, site):
    sign_in(page, site, "nurse")
    open_page(page, site, "/day", "the nurse's day")
    assert_keyboard_forms(page, "the day's filters")
    rows = page.locator("#day-list tbody tr")
    assert rows.count() >= 1, "the demo day list is empty"
    row = rows.first
    person = row.get_attribute("id").removeprefix("row-")

    # a contact: the row's form opened from the keyboard, filled, sent with Enter
    summary = row.locator("summary", has_text=words("contact"))
    summary.focus()
    summary.press("Enter")
    form = row.locator("form", has=page.locator("select[name=outcome]"))
    assert form.is_visible()
    assert_keyboard_forms(page, "the day with a contact form open")
    assert_accessible(page, "the day with a contact form open")
    outcome = form.locator("select[name=outcome]")
    outcome.select_option(index=min(1, outcome.locator("option").count() - 1))
    form.locator("input[name=notes]").fill("Left a message (test)")
    before = len(writes(site, "demo.nurse"))
    sent_with(page, lambda: press_submit(form), "recording a contact")
    done = row.locator(".notice.ok")
    done.wait_for()
    assert person in done.inner_text() and "contact" in done.inner_text().lower()
    assert_accessible(page, "the day after recording a contact")
    new = writes(site, "demo.nurse")[before:]
    assert len(new) == 1 and new[0][3] == person, new

    # a visit booked in a fortnight
    row.locator("summary", has_text=words("book")).click()
    form = row.locator("form", has=page.locator("input[name=purpose]"))
    form.locator("input[name=on]").fill((dt.date.today() + dt.timedelta(days=14)).isoformat())
    form.locator("input[name=purpose]").fill("screening echo and ECG")
    sent_with(page, lambda: form.locator("input[name=purpose]").press("Enter"), "booking a visit")  # implicit submit
    row.locator(".notice.ok", has_text=words("book|visit")).wait_for()
    assert_accessible(page, "the day after booking a visit")
    new = writes(site, "demo.nurse")[before:]
    assert len(new) == 2 and new[1][3] == person, new


def test_nurse_cannot_write_what_the_role_does_not_allow(page, site):
    """The nurse's day shows no study or letter actions; a study form post is refused (403), nothing written."""
    sign_in(page, site, "nurse")
    open_page(page, site, "/day", "the nurse's day")
    assert page.get_by_role("button", name=words("record study|write letter")).count() == 0
    before = len(writes(site, "demo.nurse"))
    r = page.request.post(site.at("/day/contact/NOBODY"), form={"on": "2026-01-01"})
    assert r.status in (400, 403, 404)  # no CSRF token from outside the page: refused either way
    assert len(writes(site, "demo.nurse")) == before


# --------------------------------------------------------------------------- the cardiologist


def first_person_with_echo(site) -> str:
    with sqlite3.connect(f"file:{site.db}?mode=ro", uri=True) as conn:
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
        assert "person" in tables
        row = conn.execute("SELECT p.code FROM person p JOIN study s ON s.person_id = p.id "
                           "WHERE s.modality = 'echo' GROUP BY p.code ORDER BY count(*) DESC LIMIT 1").fetchone()  # fmt: skip
    return row[0]


def test_cardiologist_records_an_echo_and_sees_the_chart_and_recall_change(page, site):
    person = first_person_with_echo(site)
    sign_in(page, site, "cardiologist")
    open_page(page, site, f"/person/{person}", "a person's page")
    chart = page.locator("svg, img[src*='chart'], img[src*='trend']")
    points_before = page.locator("svg circle, svg [data-point]").count()
    recall = page.locator("[id*=recall], .recall").first
    recall_before = recall.inner_text() if recall.count() else ""
    assert chart.count() >= 1, "no trend chart on the person's page"

    page.get_by_role("link", name=words("record.*(study|echo)|new study|add study")).first.click()
    page.wait_for_load_state()
    assert_accessible(page, "the study form")
    assert_keyboard_forms(page, "the study form")
    today = dt.date.today().isoformat()
    page.get_by_label(words("^(study )?date")).first.fill(today)
    modality = page.get_by_label(words("modality|kind"))
    if modality.count():
        modality.first.select_option("echo")
    page.get_by_label(words("maximal wall|MWT|wall thickness")).first.fill("19")
    with page.expect_navigation():
        press_submit(page.locator("form", has=page.get_by_label(words("maximal wall|MWT|wall thickness"))).first)
    assert_accessible(page, "the person's page after the study")
    assert person in page.url or page.get_by_text(person).count()
    open_page(page, site, f"/person/{person}", "a person's page")
    assert page.locator("svg circle, svg [data-point]").count() == points_before + 1, "the new point is not on the chart"
    recall = page.locator("[id*=recall], .recall").first
    assert recall.inner_text() != recall_before, "the recall did not change after a 19 mm wall"
    assert any(w[3] == person for w in writes(site, "demo.cardiologist"))


# --------------------------------------------------------------------------- the counsellor


def test_counsellor_adds_a_relative_records_a_result_reclassifies_and_writes_a_letter(page, site):
    sign_in(page, site, "counsellor")
    open_page(page, site, "/family/HV01", "a family's page")
    assert page.locator("svg, img[src*='pedigree']").count() >= 1, "no pedigree on the family page"

    # a new relative
    page.get_by_role("link", name=words("add (a )?relative|new relative|add person")).first.click()
    page.wait_for_load_state()
    assert_accessible(page, "the new-relative form")
    assert_keyboard_forms(page, "the new-relative form")
    page.get_by_label(words("^(person )?code")).first.fill("HV01-IV-9")
    page.get_by_label(words("sex")).first.select_option(index=1)
    page.get_by_label(words("born|birth")).first.fill("2010-03-01")
    page.get_by_label(words("mother")).first.fill("HV01-III-1") if page.get_by_label(words("mother")).count() else None
    with page.expect_navigation():
        press_submit(page.locator("form", has=page.get_by_label(words("^(person )?code"))).first)
    assert_accessible(page, "after adding a relative")
    assert any(w[3] == "HV01-IV-9" for w in writes(site, "demo.counsellor"))

    # a predictive result for the new relative
    open_page(page, site, "/person/HV01-IV-9", "the new relative's page")
    page.get_by_role("link", name=words("genetic result|record (a )?result|predictive")).first.click()
    page.wait_for_load_state()
    assert_accessible(page, "the genetic result form")
    page.get_by_label(words("date")).first.fill(dt.date.today().isoformat())
    page.get_by_label(words("result")).first.select_option(index=1)
    with page.expect_navigation():
        press_submit(page.locator("form", has=page.get_by_label(words("result"))).first)
    assert_accessible(page, "after the genetic result")

    # a reclassification: previewed, then confirmed
    open_page(page, site, "/family/HV01", "a family's page")
    page.get_by_role("link", name=words("reclassif")).first.click()
    page.wait_for_load_state()
    assert_accessible(page, "the reclassification form")
    page.get_by_label(words("new class|classification")).first.select_option(index=1)
    page.get_by_role("button", name=words("preview")).click()
    page.get_by_text(words("what changes|preview")).first.wait_for()
    assert_accessible(page, "the reclassification preview")
    n = len(writes(site, "demo.counsellor"))
    page.get_by_role("button", name=words("confirm")).click()
    page.wait_for_load_state()
    assert len(writes(site, "demo.counsellor")) > n, "confirming the reclassification wrote nothing"
    assert_accessible(page, "after confirming the reclassification")

    # a letter
    open_page(page, site, "/family/HV01", "a family's page")
    with page.expect_download() as download:
        page.get_by_role("link", name=words("letter")).first.click()
    assert download.value.suggested_filename.endswith(".pdf")


# --------------------------------------------------------------------------- the administrator


def test_admin_adds_an_account_and_reads_the_audit(page, site):
    sign_in(page, site, "admin")
    open_page(page, site, "/admin/accounts", "the accounts page")
    assert_keyboard_forms(page, "the accounts page")
    page.get_by_label(words("^(account )?name")).first.fill("new.nurse")
    page.get_by_label(words("role")).first.select_option("nurse")
    press_submit(page.locator("form", has=page.get_by_label(words("role"))).first)
    page.get_by_text("new.nurse").first.wait_for()
    shown = page.locator("main").inner_text()
    assert re.search(r"one-time password", shown, re.I), shown[:400]
    assert_accessible(page, "the accounts page after adding one")
    assert any("new.nurse" in w[4] for w in writes(site, "demo.admin"))
    open_page(page, site, "/admin/audit", "the audit page")
    assert page.get_by_text("new.nurse").count() >= 1


def test_admin_pages_refuse_other_roles(page, site):
    sign_in(page, site, "nurse")
    if not route_exists(page, site, "/admin/accounts"):
        pytest.skip("page not merged yet: the accounts page (/admin/accounts returns 404)")
    response = page.goto(site.at("/admin/accounts"))
    assert response.status == 403
    assert_accessible(page, "the refusal page")


# --------------------------------------------------------------------------- sessions


def test_a_session_ends_after_the_idle_limit(page, site_factory):
    """Idle limit 1 minute (the shortest allowed); the app's clock is moved on 2 minutes instead of waiting."""
    site = site_factory(idle_minutes=1)
    sign_in(page, site, "nurse")
    open_page(page, site, "/day", "the nurse's day")
    real_clock = site.app.state.clock
    site.app.state.clock = lambda: real_clock() + dt.timedelta(minutes=2)
    page.goto(site.at("/day"))
    assert "/signin" in page.url, f"still signed in after the idle limit: {page.url}"
    assert page.get_by_text(words("time without use")).count() == 1
    assert_accessible(page, "the sign-in page after an idle session")
    site.app.state.clock = real_clock
    page.goto(site.at("/day"))
    assert "/signin" in page.url, "the ended session came back when the clock did"


def test_a_session_within_the_idle_limit_stays(page, site_factory):
    site = site_factory(idle_minutes=1)
    sign_in(page, site, "nurse")
    real_clock = site.app.state.clock
    site.app.state.clock = lambda: real_clock() + dt.timedelta(seconds=50)
    open_page(page, site, "/day", "the nurse's day")


def test_first_sign_in_asks_for_a_new_password(page, site_factory, tmp_path):
    """An account with its one-time password is sent to change it before anything else, by keyboard alone."""
    from browser.conftest import add_accounts

    site = site_factory()
    fresh = add_accounts(site.db, ["counsellor"], keep_one_time=True, prefix="first")["counsellor"]
    page.goto(site.at("/signin"))
    page.get_by_label("Account name").fill(fresh.name)
    page.get_by_label("Password", exact=True).fill(fresh.password)
    page.get_by_label("Password", exact=True).press("Enter")
    page.wait_for_url(re.compile(r"/password"))
    assert_accessible(page, "the change-password page")
    assert_keyboard_forms(page, "the change-password page")
    new = "a-new-password-for-test"
    page.get_by_label(words("current")).fill(fresh.password)
    page.get_by_label(words("^new password \\(")).fill(new)
    page.get_by_label(words("again")).fill(new)
    with page.expect_navigation():
        page.get_by_label(words("again")).press("Enter")
    assert "/password" not in page.url or page.get_by_text(words("password changed")).count()
    page.goto(site.at("/day"))
    assert page.url.endswith("/day"), f"still asked for a new password: {page.url}"
