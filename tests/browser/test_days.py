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
from pathlib import Path

import pytest

from browser.browsing import assert_accessible, assert_keyboard_forms
from browser.steps import open_page, route_exists, sign_in, words


def audit_rows(site, actor: str) -> list[tuple]:
    """(action, table, family, person, what) of every audit entry ``actor`` wrote since the test's store was
    copied (the template's set-up entries left out), oldest first."""
    with sqlite3.connect(f"file:{site.db}?mode=ro", uri=True) as conn:
        return conn.execute("SELECT action, table_name, family_code, person_code, what FROM audit_entry "
                            "WHERE actor = ? AND id > ? ORDER BY id", (actor, site.audit_start)).fetchall()  # fmt: skip


def writes(site, actor: str) -> list[tuple]:
    """What ``actor`` wrote through the pages (sign-ins, sign-outs and reads left out)."""
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

CARRIER = "HV01-IV-1"  # demo: adult carrying the family variant, phenotype negative, on recall


def chart_points(page) -> int:
    return page.locator("figure.chart svg circle").count()


def recall_text(page) -> str:
    return " ".join(page.locator("section[aria-labelledby=recall-h]").inner_text().split())


def test_cardiologist_records_an_echo_and_sees_the_chart_and_recall_change(page, site):
    """A 19 mm maximal wall in a phenotype-negative carrier: a new point on the chart, and the recall changes."""
    sign_in(page, site, "cardiologist")
    open_page(page, site, f"/person/{CARRIER}", "a person's page")
    points, recall = chart_points(page), recall_text(page)
    assert points > 0, "no chart points on the person's page"

    with page.expect_navigation():
        page.get_by_role("link", name=words("record a study")).click()
    if "/entry/" not in page.url:
        pytest.fail(f"'Record a study' led to {page.url}")
    assert_accessible(page, "the study form")
    assert_keyboard_forms(page, "the study form")
    form = page.locator("form[method=post]", has=page.locator("#v-mwt_echo"))
    form.locator("[name=study_date]").fill(dt.date.today().isoformat())
    form.locator("#v-mwt_echo").fill("19")
    form.locator("#v-mwt_echo").press("Tab")  # the as-you-type plausibility hint answers
    assert_accessible(page, "the study form, filled")
    with page.expect_navigation():
        press_submit(form)
    assert f"/person/{CARRIER}" in page.url, f"after saving: {page.url}: {page.locator('main').inner_text()[:400]}"
    assert_accessible(page, "the person's page after the study")
    assert chart_points(page) == points + 1, "the new value is not one more point on the charts"
    assert recall_text(page) != recall, f"the recall did not change after a 19 mm wall: {recall}"
    new = writes(site, "demo.cardiologist")
    assert len(new) == 1 and new[0][3] == CARRIER, new


# --------------------------------------------------------------------------- the counsellor


def test_counsellor_adds_a_relative_records_a_result_reclassifies_and_writes_a_letter(page, site):
    sign_in(page, site, "counsellor")
    open_page(page, site, "/family/HV01", "a family's page")
    assert page.locator(".pedigree-frame svg").count() == 1, "no pedigree on the family page"

    # a new relative: the child of the proband
    open_page(page, site, "/entry/relative/HV01", "the new-relative form")
    assert_keyboard_forms(page, "the new-relative form")
    form = page.locator("form[method=post]", has=page.locator("[name=person]"))
    form.locator("[name=person]").fill("HV01-IV-9")
    form.locator("[name=sex_at_birth]").select_option("female")
    form.locator("[name=birth_date]").fill("2010-03-01")
    form.locator("[name=vital_status]").select_option("alive") if form.locator("[name=vital_status]").count() else None
    form.locator("[name=father]").select_option("HV01-III-1")
    with page.expect_navigation():
        press_submit(form)
    assert "/family/HV01" in page.url, f"after adding a relative: {page.locator('main').inner_text()[:400]}"
    assert_accessible(page, "the family page after adding a relative")
    assert page.locator(".pedigree-frame svg").get_by_text("HV01-IV-9").count() >= 1, "not on the pedigree"
    assert [w[3] for w in writes(site, "demo.counsellor")] == ["HV01-IV-9"]

    # her predictive result: a carrier of the family variant
    open_page(page, site, "/entry/genetic-result/HV01-IV-9", "the genetic result form")
    form = page.locator("form[method=post]", has=page.locator("[name=result]"))
    form.locator("[name=test_date]").fill(dt.date.today().isoformat())
    form.locator("[name=test_type]").select_option("predictive")
    form.locator("[name=variant]").select_option(index=1)
    form.locator("[name=result]").select_option("carrier")
    with page.expect_navigation():
        press_submit(form)
    assert "/person/HV01-IV-9" in page.url, f"after the result: {page.locator('main').inner_text()[:400]}"
    assert_accessible(page, "the new relative's page with her result")
    assert len(writes(site, "demo.counsellor")) == 2

    # a reclassification of the family variant: the impact first, nothing written, then confirmed
    open_page(page, site, "/family/HV01", "a family's page")
    form = page.locator("form[method=post]", has=page.locator("#new_class"))
    form.locator("#new_class").select_option("likely_pathogenic")
    form.locator("#date").fill(dt.date.today().isoformat())
    form.locator("#reason").fill("Re-review by the laboratory (test)")
    with page.expect_navigation():
        press_submit(form)
    impact = page.locator("#impact")
    assert impact.count() == 1, f"no impact shown: {page.locator('main').inner_text()[:400]}"
    assert_accessible(page, "the reclassification impact")
    assert len(writes(site, "demo.counsellor")) == 2, "the preview wrote something"
    with page.expect_navigation():
        press_submit(impact.locator("form"))
    assert page.get_by_text(words("new class written")).count() == 1
    assert_accessible(page, "the family page after the new class")
    assert len(writes(site, "demo.counsellor")) > 2, "confirming the new class wrote nothing"

    # a letter for the new relative, as a PDF
    form = page.locator("form[method=post]", has=page.get_by_role("button", name=words("letter")))
    form.locator("[name=person]").select_option("HV01-IV-9")
    with page.expect_response(lambda r: r.request.method == "POST" and "/letter" in r.url) as answer:
        try:
            with page.expect_download(timeout=20_000) as download:
                press_submit(form)
        except Exception:
            download = None
    r = answer.value
    assert r.status == 200 and download is not None, \
        f"the letter: {r.status} {r.headers.get('content-type')}: {page.locator('main').inner_text()[-600:]}"
    assert download.value.suggested_filename.endswith(".pdf")
    assert Path(download.value.path()).read_bytes()[:5] == b"%PDF-"


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


# --------------------------------------------------------------------------- the cohort and the import

def new_person_csv(birth_date: str) -> str:
    """One invented new child in the demo family HV05, in the people layout (the demo file's own header)."""
    header = (Path(__file__).parents[2] / "demo_family" / "people.csv").read_text().splitlines()[0].split(",")
    row = {"person": "HV05-IV-7", "family": "HV05", "sex_at_birth": "female", "birth_date": birth_date,
           "vital_status": "alive", "father": "HV05-III-1", "placeholder": "no", "proband": "no"}  # fmt: skip
    return ",".join(header) + "\n" + ",".join(row.get(c, "") for c in header) + "\n"


def test_cardiologist_opens_the_cohort(page, site):
    sign_in(page, site, "cardiologist")
    open_page(page, site, "/cohort", "the cohort page")
    if page.locator("form").count():
        assert_keyboard_forms(page, "the cohort page")


def test_admin_checks_then_stores_a_file_and_a_bad_file_stores_nothing(page, site, tmp_path):
    good = tmp_path / "new_person.csv"
    good.write_text(new_person_csv("2012-06-30"))
    bad = tmp_path / "bad_person.csv"
    bad.write_text(new_person_csv("2012-02-31"))  # no such day
    sign_in(page, site, "admin")
    open_page(page, site, "/import", "the import page")
    assert_keyboard_forms(page, "the import page")
    form = page.locator("form[enctype='multipart/form-data']")
    people = next(v for v in form.locator("#kind option").evaluate_all("os => os.map(o => o.value)")
                  if "people" in v or "person" in v)  # fmt: skip
    before = len(writes(site, "demo.admin"))

    # a bad file: refused with the row and column, nothing stored
    form.locator("#kind").select_option(people)
    form.locator("#file").set_input_files(str(bad))
    with page.expect_navigation():
        press_submit(form)
    report = page.locator("#import-report")
    assert report.count() == 1 and "Nothing was stored" in report.inner_text(), page.locator("main").inner_text()[:500]
    assert "birth_date" in report.inner_text()
    assert_accessible(page, "the import page with a refused file")
    assert len(writes(site, "demo.admin")) == before

    # a good file: checked, then stored on confirmation
    form = page.locator("form[enctype='multipart/form-data']")
    form.locator("#kind").select_option(people)
    form.locator("#file").set_input_files(str(good))
    with page.expect_navigation():
        press_submit(form)
    assert page.get_by_text(words("would add 1")).count() == 1, page.locator("main").inner_text()[:500]
    assert_accessible(page, "the import page with a checked file")
    assert len(writes(site, "demo.admin")) == before, "checking a file wrote something"
    with page.expect_navigation():
        press_submit(page.locator("form", has=page.get_by_role("button", name="Store this file")))
    assert page.locator("#import-stored").get_by_text(words("1 added")).count() == 1
    assert_accessible(page, "the import page after storing")
    assert len(writes(site, "demo.admin")) == before + 1
