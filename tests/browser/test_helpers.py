"""The browser-test helpers themselves: each check must be able to fail (pages made up here, no app)."""

from __future__ import annotations

import pytest

from browser import browsing
from browser.browsing import assert_accessible, assert_keyboard_forms, axe_violations, keyboard_check

POLICY = "default-src 'self'; script-src 'self'; style-src 'self'"
GOOD_HEAD = "<!doctype html><html lang='en'><head><meta charset='utf-8'><title>A page</title></head>"


def show(page, body: str, *, head: str = GOOD_HEAD, sent: list | None = None):
    """Serve ``body`` at http://app.test/ with the app's kind of policy; record any other request in ``sent``."""

    def handle(route):
        if route.request.url == "http://app.test/":
            route.fulfill(status=200, headers={"Content-Type": "text/html; charset=utf-8",
                                               "Content-Security-Policy": POLICY}, body=head + body + "</html>")  # fmt: skip
        else:
            if sent is not None:
                sent.append(route.request.method + " " + route.request.url)
            route.fulfill(status=204, body="")

    page.route("http://app.test/**", handle)
    page.goto("http://app.test/")


GOOD_FORM = """<body><main><h1>Contacts</h1>
<form method="post" action="/contact" aria-label="Record a contact">
  <label for="who">Relative</label><input id="who" name="who" required>
  <label for="how">How</label><select id="how" name="how"><option>phone</option><option>letter</option></select>
  <fieldset><legend>Outcome</legend>
    <input type="radio" id="o1" name="outcome" value="reached"><label for="o1">reached</label>
    <input type="radio" id="o2" name="outcome" value="no answer"><label for="o2">no answer</label>
  </fieldset>
  <label for="note">Note</label><textarea id="note" name="note"></textarea>
  <button type="submit">Record</button>
</form>
<form method="get" action="/search" aria-label="Search"><label for="q">Find</label><input id="q" name="q">
  <button>Find</button></form>
</main></body>"""


def test_axe_finds_serious_and_critical_violations(page):
    show(page, "<body><main><h1>x</h1><img src='/p.png'><input type='text'></main></body>", head="<head></head>")
    ids = {v["id"]: v["impact"] for v in axe_violations(page)}
    assert ids.get("image-alt") == "critical" and ids.get("html-has-lang") == "serious"
    with pytest.raises(AssertionError, match="image-alt"):
        assert_accessible(page)


def test_axe_passes_a_plain_accessible_page(page):
    show(page, GOOD_FORM)
    assert_accessible(page)


def test_axe_runs_while_the_page_policy_stays_in_force(page):
    """An inline script of the page is refused (policy kept), an injected tag too; axe still runs."""
    show(page, "<body><main><h1>x</h1><script>window.inlineRan = true</script></main></body>")
    assert page.evaluate("window.inlineRan === undefined")
    with pytest.raises(Exception, match="Content Security Policy"):
        page.add_script_tag(content="window.tagRan = true")
    assert axe_violations(page) == []
    page.problems.clear()  # the two refusals above were the point of this test


def test_keyboard_check_passes_forms_reachable_and_submitted_by_keyboard(page):
    sent: list[str] = []
    show(page, GOOD_FORM, sent=sent)
    report = assert_keyboard_forms(page)
    assert [f["label"] for f in report.forms] == ["Record a contact", "Search"]
    assert sent == [] and page.url == "http://app.test/"  # a dry run: nothing was sent


def test_forms_submit_normally_after_the_keyboard_check(page):
    sent: list[str] = []
    show(page, GOOD_FORM, sent=sent)
    assert_keyboard_forms(page)
    assert page.evaluate("document.querySelectorAll('[data-kbd]').length") == 0  # markers removed
    page.get_by_label("Find").fill("HV01")
    with page.expect_request("http://app.test/search?q=HV01"):
        page.get_by_label("Find").press("Enter")
    assert sent == ["GET http://app.test/search?q=HV01"]


def test_keyboard_check_needs_the_summary_of_a_folded_form(page):
    folded = GOOD_FORM.replace('<form method="post"', '<details><summary>record contact</summary><form method="post"')
    folded = folded.replace("</form>\n<form", "</form></details>\n<form", 1)
    show(page, folded)
    report = assert_keyboard_forms(page)
    assert [f["label"] for f in report.forms] == ["Search"]  # the folded form is not shown, so not checked
    page.get_by_text("record contact").press("Enter")  # opened from the keyboard: now checked too
    assert [f["label"] for f in assert_keyboard_forms(page).forms] == ["Record a contact", "Search"]
    show(page, folded.replace("<summary>", '<summary tabindex="-1">'))
    assert keyboard_check(page).unreached == ["closed form behind 'record contact': its summary"]


def test_keyboard_check_reports_a_control_out_of_the_tab_order(page):
    show(page, GOOD_FORM.replace('<textarea id="note"', '<textarea tabindex="-1" id="note"'))
    report = keyboard_check(page)
    assert report.unreached == ["Record a contact: note"] and not report.ok
    with pytest.raises(AssertionError, match="note"):
        assert_keyboard_forms(page)


def test_keyboard_check_reports_a_form_without_a_keyboard_submit(page):
    show(page, GOOD_FORM.replace('<button type="submit">Record</button>',
                                 '<span class="btn" role="button">Record</span>'))  # fmt: skip
    report = keyboard_check(page)
    assert report.not_submitted == ["Record a contact: no submit button reachable by Tab"]


def test_keyboard_check_reports_enter_that_does_not_submit(page):
    show(page, GOOD_FORM)
    page.evaluate("""() => document.querySelector('form button').addEventListener('keydown', e => {
                       if (e.key === 'Enter') e.preventDefault(); })""")  # a page script swallowing Enter
    assert keyboard_check(page).not_submitted == ["Record a contact: Enter on its submit button did not submit it"]


def test_keyboard_check_reports_a_page_without_forms(page):
    show(page, "<body><main><h1>Nothing to fill</h1></main></body>")
    with pytest.raises(AssertionError, match="no form"):
        assert_keyboard_forms(page)


def test_missing_browser_skips_outside_ci_and_fails_in_ci(monkeypatch, tmp_path):
    monkeypatch.setattr(browsing, "CHROMIUM", tmp_path / "no-chromium")
    monkeypatch.delenv("CI", raising=False)
    with pytest.raises(pytest.skip.Exception, match="no-chromium is absent"):
        browsing.require_chromium()
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception, match="must run in CI"):
        browsing.require_chromium()


def test_serve_starts_and_stops_an_app():
    import httpx

    from browser.conftest import serve

    async def app(scope, receive, send):
        if scope["type"] != "http":
            return
        await send({"type": "http.response.start", "status": 200, "headers": [(b"content-type", b"text/plain")]})
        await send({"type": "http.response.body", "body": b"up"})

    with serve(app) as url:
        assert url.startswith("http://127.0.0.1:")
        assert httpx.get(url + "/").text == "up"
    with pytest.raises(httpx.ConnectError):
        httpx.get(url + "/", timeout=2)
