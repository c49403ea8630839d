"""The web interface's core: sign-in, sessions, CSRF, roles, security headers, read audit, the day page."""

from __future__ import annotations

import re

import pytest

from conftest import dump
from web.conftest import PASSWORD, add_account, audit_rows, csrf_from, sign_in

PAGES = ["/", "/day", "/day.csv", "/day.ics", "/day.pdf", "/password", "/cohort", "/import", "/admin/accounts",
         "/admin/audit"]  # fmt: skip


def _cookie_headers(response) -> list[str]:
    return response.headers.get_list("set-cookie")


# --------------------------------------------------------------------------- signed out


@pytest.mark.parametrize("path", PAGES)
def test_signed_out_pages_redirect_to_sign_in(browser, path):
    r = browser().get(path, follow_redirects=False)
    assert r.status_code == 303
    assert r.headers["location"].startswith("/signin")


def test_signed_out_htmx_request_gets_a_full_page_redirect(browser):
    r = browser().get("/day", headers={"HX-Request": "true"}, follow_redirects=False)
    assert r.status_code == 204 and r.headers["hx-redirect"].startswith("/signin")


# --------------------------------------------------------------------------- sign-in


def test_first_sign_in_with_one_time_password_forces_a_new_password(browser, web_db):
    once = add_account(web_db, "new.nurse", "nurse", ready=False)
    client = browser()
    r = sign_in(client, "new.nurse", once)
    assert r.status_code == 303 and r.headers["location"] == "/password"
    cookies = _cookie_headers(r)
    session = next(c for c in cookies if c.startswith("tracker_session="))
    assert "HttpOnly" in session and "SameSite=strict" in session.replace("Strict", "strict") and "Secure" not in session
    # every other page sends the user back to the password form
    r = client.get("/day", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"] == "/password"
    token = csrf_from(client.get("/password").text)
    r = client.post("/password", data={"current_password": once, "new_password": PASSWORD,
                                       "repeat_password": PASSWORD, "csrf_token": token}, follow_redirects=False)  # fmt: skip
    assert r.status_code == 303 and r.headers["location"] == "/day"
    r = client.get("/day")
    assert r.status_code == 200 and "new.nurse" in r.text and "nurse" in r.text
    assert [a.action for a in audit_rows(web_db) if a.actor == "new.nurse"][:2] == ["sign_in", "account"]


def test_secure_cookie_over_tls(browser, web_db, app):
    from starlette.testclient import TestClient

    add_account(web_db, "tls.nurse", "nurse")
    with TestClient(app, base_url="https://testserver") as client:
        r = sign_in(client, "tls.nurse")
    assert r.status_code == 303
    assert "Secure" in next(c for c in _cookie_headers(r) if c.startswith("tracker_session="))


def test_forwarded_proto_is_believed_only_when_trusted(browser, web_db, app):
    import dataclasses

    add_account(web_db, "proxy.nurse", "nurse")
    client = browser()
    page = client.get("/signin")
    data = {"name": "proxy.nurse", "password": PASSWORD, "csrf_token": csrf_from(page.text)}
    r = client.post("/signin", data=data, headers={"X-Forwarded-Proto": "https"}, follow_redirects=False)
    assert "Secure" not in next(c for c in _cookie_headers(r) if c.startswith("tracker_session="))
    app.state.config = dataclasses.replace(app.state.config, trust_forwarded_proto=True)
    client2 = browser()
    page = client2.get("/signin")
    data["csrf_token"] = csrf_from(page.text)
    r = client2.post("/signin", data=data, headers={"X-Forwarded-Proto": "https"}, follow_redirects=False)
    assert "Secure" in next(c for c in _cookie_headers(r) if c.startswith("tracker_session="))


def test_sign_in_field_errors_beside_the_fields_nothing_written(browser, web_db):
    client = browser()
    token = csrf_from(client.get("/signin").text)
    before = dump(web_db)
    r = client.post("/signin", data={"name": "", "password": "", "csrf_token": token})
    assert r.status_code == 400
    assert re.search(r'name="name".*?<span class="field-error"[^>]*>give your account name', r.text, re.S)
    assert re.search(r'name="password".*?<span class="field-error"[^>]*>give your password', r.text, re.S)
    assert dump(web_db) == before


def test_failed_sign_ins_slow_down_and_are_audited(browser, web_db, clock):
    from tracker.services import accounts as AC

    add_account(web_db, "slow.nurse", "nurse")
    client = browser()
    for i in range(AC.FREE_FAILURES):
        r = sign_in(client, "slow.nurse", "wrong password " + str(i))
        assert r.status_code == 400 and "not recognised" in r.text
    # now even the right password waits
    r = sign_in(client, "slow.nurse", PASSWORD)
    assert r.status_code == 400 and "try again after" in r.text
    clock.advance(seconds=AC.FIRST_WAIT_SECONDS + 1)
    r = sign_in(client, "slow.nurse", "wrong again")
    assert r.status_code == 400
    clock.advance(seconds=AC.FIRST_WAIT_SECONDS + 1)  # the wait has doubled
    r = sign_in(client, "slow.nurse", PASSWORD)
    assert r.status_code == 400 and "try again after" in r.text
    clock.advance(seconds=AC.FIRST_WAIT_SECONDS * 2)
    r = sign_in(client, "slow.nurse", PASSWORD)
    assert r.status_code == 303
    refused = [a.what for a in audit_rows(web_db, "sign_in_refused")]
    assert sum("wrong password" in w for w in refused) == AC.FREE_FAILURES + 1
    assert sum("waiting after" in w for w in refused) == 2
    unknown = sign_in(browser(), "nobody.here", "x")
    assert unknown.status_code == 400 and "not recognised" in unknown.text
    assert "unknown name" in audit_rows(web_db, "sign_in_refused")[-1].what


def test_wait_grows_and_is_capped():
    from tracker.services import accounts as AC

    waits = [AC.wait_seconds(n) for n in range(12)]
    assert waits[: AC.FREE_FAILURES] == [0] * AC.FREE_FAILURES
    assert waits[AC.FREE_FAILURES] == AC.FIRST_WAIT_SECONDS
    assert waits[AC.FREE_FAILURES + 1] == 2 * AC.FIRST_WAIT_SECONDS
    assert max(waits) == AC.MAX_WAIT_SECONDS and waits == sorted(waits)


def test_next_is_only_a_path_of_this_site(browser, web_db):
    add_account(web_db, "next.nurse", "nurse")
    client = browser()
    token = csrf_from(client.get("/signin").text)
    r = client.post("/signin", data={"name": "next.nurse", "password": PASSWORD, "csrf_token": token,
                                     "next": "//elsewhere.example/x"}, follow_redirects=False)  # fmt: skip
    assert r.headers["location"] == "/day"


# --------------------------------------------------------------------------- sessions


def test_sign_out_ends_the_session(browser, web_db):
    client = browser("nurse")
    cookie = client.cookies.get("tracker_session")
    r = client.post("/signout", data={"csrf_token": client.token}, follow_redirects=False)
    assert r.status_code == 303
    client.cookies.set("tracker_session", cookie)  # a copied cookie no longer works
    assert client.get("/day", follow_redirects=False).status_code == 303
    assert audit_rows(web_db, "sign_out")[-1].actor == client.name


def test_idle_timeout(browser, clock):
    client = browser("nurse")
    clock.advance(minutes=29)
    assert client.get("/password").status_code == 200  # used: the idle time starts again
    clock.advance(minutes=29)
    assert client.get("/password").status_code == 200
    clock.advance(minutes=30)
    r = client.get("/password", follow_redirects=False)
    assert r.status_code == 303 and "ended=idle" in r.headers["location"]


def test_absolute_limit(browser, clock):
    client = browser("nurse")
    for _ in range(12 * 3 - 1):  # used every 20 minutes, never idle
        clock.advance(minutes=20)
        assert client.get("/password").status_code == 200
    clock.advance(minutes=20)  # 12 hours after sign-in
    r = client.get("/password", follow_redirects=False)
    assert r.status_code == 303 and "ended=absolute" in r.headers["location"]


def test_session_limits_from_the_factory(web_db, clock):
    from starlette.testclient import TestClient

    from tracker.web.app import create_app

    app = create_app(web_db, idle_minutes=5, absolute_hours=1)
    app.state.clock = clock
    add_account(web_db, "short.nurse", "nurse")
    with TestClient(app) as client:
        assert sign_in(client, "short.nurse").status_code == 303
        clock.advance(minutes=6)
        assert "ended=idle" in client.get("/password", follow_redirects=False).headers["location"]
    app.state.engine.dispose()


def test_disabled_account_session_ends(browser, web_db):
    from tracker.store.database import locate, make_engine, writing
    from tracker.services import accounts as AC

    client = browser("nurse")
    engine = make_engine(locate(web_db))
    with writing(engine) as conn:
        AC.disable_account(conn, client.name, by="test")
    engine.dispose()
    assert client.get("/day", follow_redirects=False).status_code == 303


# --------------------------------------------------------------------------- CSRF


@pytest.mark.parametrize("token", [None, "", "0" * 64])
def test_post_without_a_valid_csrf_token_is_refused_and_writes_nothing(browser, web_db, token):
    client = browser("nurse")
    before = dump(web_db)
    data = {"current_password": PASSWORD, "new_password": "another-long-password", "repeat_password": "another-long-password"}
    if token is not None:
        data["csrf_token"] = token
    for path in ("/password", "/signout", "/day/contact/HV01-III-2", "/day/booking/HV01-III-2"):
        r = client.post(path, data=data, follow_redirects=False)
        assert r.status_code == 403, path
        assert "security token" in r.text
    anonymous = browser()
    anonymous.get("/signin")
    r = anonymous.post("/signin", data={"name": client.name, "password": PASSWORD, **({"csrf_token": token} if token is not None else {})})
    assert r.status_code == 403
    assert dump(web_db) == before


def test_csrf_token_in_the_htmx_header_is_accepted(browser, web_db):
    client = browser("nurse")
    r = client.post("/signout", headers={"X-CSRF-Token": client.token, "HX-Request": "true"}, follow_redirects=False)
    assert r.status_code == 303


def test_a_token_from_another_session_is_refused(browser, web_db):
    a, b = browser("nurse"), browser("nurse")
    before = dump(web_db)
    r = a.post("/signout", data={"csrf_token": b.token}, follow_redirects=False)
    assert r.status_code == 403
    assert dump(web_db) == before


# --------------------------------------------------------------------------- headers


def test_security_headers_on_every_response(browser):
    client = browser("nurse")
    for r in (client.get("/day"), client.get("/signin", follow_redirects=False), browser().get("/day", follow_redirects=False),
              client.get("/no/such/page"), client.get("/static/site.css"), client.post("/signout")):
        csp = r.headers["content-security-policy"]
        assert "default-src 'self'" in csp and "script-src 'self'" in csp and "frame-ancestors 'none'" in csp
        assert "unsafe-inline" not in csp
        assert r.headers["referrer-policy"] == "no-referrer"
        assert r.headers["x-content-type-options"] == "nosniff"
    assert client.get("/day").headers["cache-control"] == "no-store"
    assert client.get("/day.csv").headers["cache-control"] == "no-store"


def test_pages_have_no_inline_script(browser):
    from pathlib import Path

    import tracker.web

    for page in Path(tracker.web.__file__).parent.joinpath("templates").glob("*.html"):
        text = page.read_text()
        assert not re.search(r"<script(?![^>]*\bsrc=)", text), page.name
        assert not re.search(r"\son[a-z]+=", text), page.name  # no inline event handlers
        assert "style=" not in text, page.name


# --------------------------------------------------------------------------- roles


def test_role_table():
    from tracker.services.accounts import User
    from tracker.web.roles import ALLOWED, can

    for role in ("nurse", "cardiologist", "counsellor", "admin"):
        u = User("x", role, 1)
        assert {a for a in ALLOWED if can(u, a)} == {a for a, roles in ALLOWED.items() if role in roles}
    assert can(User("x", "nurse", 1), "contact") and not can(User("x", "admin", 1), "contact")
    assert not can(User("x", "admin", 1), "no_such_action") and not can(None, "contact")


@pytest.mark.parametrize("form,role", [("contact", "cardiologist"), ("contact", "admin"), ("booking", "cardiologist"),
                                       ("booking", "counsellor"), ("booking", "admin")])  # fmt: skip
def test_day_row_forms_refused_for_other_roles(browser, web_db, role, form):
    """Contacts: nurse or counsellor; bookings: nurse only (tracker/web/roles.py)."""
    client = browser(role)
    before = dump(web_db)
    r = client.post(f"/day/{form}/HV01-III-2", data={"csrf_token": client.token, "on": "2026-12-07",
                                                      "channel": "phone", "outcome": "informed", "purpose": "screening"})  # fmt: skip
    assert r.status_code == 403 and "nurse" in r.text and "Nothing was changed" in r.text
    assert dump(web_db) == before


# --------------------------------------------------------------------------- the day page


def test_day_page_lists_people_with_cautions_and_audits_the_read(browser, web_db):
    client = browser("nurse")
    r = client.get("/day")
    assert r.status_code == 200
    assert "Decision support only" in r.text and "treating clinician decides" in r.text
    assert 'id="day-list"' in r.text
    people = re.findall(r'<tr class="[^"]*" id="row-([^"]+)"', r.text)
    assert people, "the demo has people due"
    entry = audit_rows(web_db, "read")[-1]
    assert entry.actor == client.name and "day list" in entry.what and people[0] in entry.what
    # the nurse sees the row forms; a cardiologist does not
    assert "record contact" in r.text and "book visit" in r.text
    assert "record contact" not in browser("cardiologist").get("/day").text


def test_day_page_same_people_as_the_worklist_command(browser, web_db, run):
    client = browser("nurse")
    html = client.get("/day?from=2026-12-07&to=2027-01-18").text
    shown = set(re.findall(r'id="row-([^"]+)"', html))
    import json

    r = run("worklist", "--from", "2026-12-07", "--to", "2027-01-18", "--as-of", "2026-12-07", "--json", db=web_db)
    data = json.loads(r.out)
    assert shown == {x["person"] for x in data["due"] + data["affected"] + data["contact_gaps"]}


def test_day_filters(browser, web_db):
    client = browser("nurse")
    everyone = re.findall(r'id="row-([^"]+)"', client.get("/day").text)
    family = everyone[0].split("-")[0]
    one = re.findall(r'id="row-([^"]+)"', client.get(f"/day?family={family}").text)
    assert one and all(p.startswith(family + "-") for p in one)
    gaps = client.get("/day?reason=contact_gap").text
    assert all("tag" in row for row in re.findall(r'<tr class="[^"]*" id="row-[^"]+">.*?</tr>', gaps, re.S))


@pytest.mark.parametrize("query,field", [("from=2026-13-01", "from"), ("to=yesterday", "to"),
                                          ("from=2027-01-01&to=2026-01-01", "to"), ("reason=bogus", "reason"),
                                          ("family=" + "F" * 41, "family")])  # fmt: skip
def test_day_filter_errors_beside_the_field(browser, web_db, query, field):
    client = browser("nurse")
    before = dump(web_db)
    r = client.get("/day?" + query)
    assert r.status_code == 400
    labels = re.findall(r"<label>.*?</label>", r.text, re.S)
    assert [f'name="{field}"' in lab for lab in labels if "field-error" in lab] == [True]
    assert dump(web_db) == before


def test_day_downloads(browser, web_db):
    client = browser("nurse")
    csv = client.get("/day.csv")
    assert csv.status_code == 200 and csv.headers["content-type"].startswith("text/csv")
    assert "treating clinician decides" in csv.text.lower() or "clinician" in csv.text.lower()
    ics = client.get("/day.ics")
    assert ics.status_code == 200 and ics.text.startswith("BEGIN:VCALENDAR")
    pdf = client.get("/day.pdf")
    assert pdf.status_code == 200 and pdf.content.startswith(b"%PDF")
    assert 'attachment; filename="worklist-' in pdf.headers["content-disposition"]
    reads = [a.what for a in audit_rows(web_db, "read")]
    assert any("CSV download" in w for w in reads) and any("PDF download" in w for w in reads)


def _post_paths(app) -> list[str]:
    from starlette.routing import Route

    out = []
    for r in app.routes:
        if isinstance(r, Route) and "POST" in (r.methods or ()):
            out.append(r.path.replace("{person}", "HV01-III-2").replace("{name}", "t.nurse1")
                       .replace("{upload_id}", "A" * 32))  # fmt: skip
    return out


def test_every_post_route_refuses_a_missing_token_and_writes_nothing(browser, web_db, app):
    paths = _post_paths(app)
    assert {"/signin", "/signout", "/password", "/day/contact/HV01-III-2", "/import", "/admin/accounts"} <= set(paths)
    for role in ("nurse", "admin"):
        client = browser(role)
        before = dump(web_db)
        for path in paths:
            r = client.post(path, data={"name": "x.y", "role": "admin", "on": "2026-12-07", "purpose": "p"},
                            follow_redirects=False)  # fmt: skip
            assert r.status_code == 403, (role, path)
            r = client.post(path, data={"csrf_token": "f" * 64}, follow_redirects=False)
            assert r.status_code == 403, (role, path)
        assert dump(web_db) == before


@pytest.mark.parametrize("role", ["nurse", "cardiologist", "counsellor", "admin"])
def test_every_role_reads_the_lists(browser, role):
    client = browser(role)
    for path in ("/day", "/cohort", "/day.csv"):
        assert client.get(path).status_code == 200, path
    nav = client.get("/day").text
    assert ('href="/admin/accounts"' in nav) == (role == "admin")
    assert ('href="/import"' in nav) == (role == "admin")


def test_vendored_htmx_is_the_recorded_version():
    from pathlib import Path

    import tracker.web

    static = Path(tracker.web.__file__).parent / "static"
    recorded = re.search(r"\| `htmx.min.js` \| [^|]+\| ([0-9.]+) \| 0BSD", (static / "VENDORED.md").read_text()).group(1)
    assert f'version:"{recorded}"' in (static / "htmx.min.js").read_text()
