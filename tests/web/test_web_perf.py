"""The web pages' cost does not grow with the cohort, and the write lock is held only for writes:
the cohort page reads a page of families (never the whole cohort), sign-in verifies the password
before taking the write lock; and the site-wide markup fixes (refusals as sentences, date formats
shown, no navigation while a first password must be chosen).  All data are the invented demo
families."""

from __future__ import annotations

import re

import pytest
from sqlalchemy import text

from web.conftest import PASSWORD, add_account, audit_rows, csrf_from, sign_in
from tracker.store.database import locate, make_engine, reading

ROW = re.compile(r'<tr class="(overdue|)" id="trend-([^"]+)"')


def _service_rows(db: str, app, families=None) -> list[dict]:
    from tracker.services import review as SR
    from tracker.web.pages.cohort import HORIZON_YEARS

    engine = make_engine(locate(db))
    try:
        with reading(engine) as conn:
            return SR.trends_of(conn, families, None, app.state.settings, HORIZON_YEARS)["rows"]
    finally:
        engine.dispose()


def _flagged(r: dict) -> bool:
    from tracker.web.pages.cohort import _flagged as flagged

    return flagged(r)


def _ids(rows: list[dict]) -> list[str]:
    return [f"{r['person']}-{r['measure']}" for r in rows]


def test_cohort_reads_a_page_of_families_never_the_whole_cohort(browser, monkeypatch):
    from tracker.services import cohort_view as CV
    from tracker.services import review as SR

    monkeypatch.setattr(CV, "PAGE_FAMILIES", 2)
    monkeypatch.setattr(CV, "FLAGGED_FAMILIES", 2)
    scopes = []
    real = SR.load

    def recording(conn, scope=None):
        scopes.append(scope)
        return real(conn, scope)

    monkeypatch.setattr(SR, "load", recording)
    client = browser("nurse")
    for query in ("", "?page=2", "?flag=any", "?flag=progressing&page=2", "?measure=mwt_echo"):
        scopes.clear()
        r = client.get("/cohort" + query)
        assert r.status_code == 200, query
        assert scopes, query
        for s in scopes:  # every read is family-scoped, at most a page of families
            assert s is not None and not s.cohort, query
            assert 1 <= len(s.family_codes) <= 2, (query, s.family_codes)


def test_cohort_pages_show_the_service_rows_of_their_families(browser, app, web_db, monkeypatch):
    """Same content as one pass over the cohort for what the page shows: page 1 lists every flagged
    row of the demo first (cohort-wide), then its families' other rows; each later page its
    families' rows; over all pages, every row of the cohort once per page it belongs to."""
    from tracker.services import cohort_view as CV

    monkeypatch.setattr(CV, "PAGE_FAMILIES", 2)
    monkeypatch.setattr(CV, "FLAGGED_FAMILIES", 50)
    whole = _service_rows(web_db, app)
    flagged_ids = [i for r, i in zip(whole, _ids(whole)) if _flagged(r)]
    client = browser("cardiologist")
    first = client.get("/cohort")
    shown = ROW.findall(first.text)
    assert [i for c, i in shown if c == "overdue"] == flagged_ids  # every flagged row, cohort order, first
    pages = int(re.search(r"page 1 of (\d+)", first.text).group(1))
    assert pages >= 2
    seen_unflagged = [i for c, i in shown if c != "overdue"]
    for p in range(2, pages + 1):
        shown = ROW.findall(client.get(f"/cohort?page={p}").text)
        seen_unflagged += [i for c, i in shown if c != "overdue"]
    assert sorted(seen_unflagged) == sorted(i for r, i in zip(whole, _ids(whole)) if not _flagged(r))
    # each row's visible figures are the service's
    by_id = dict(zip(_ids(whole), whole))
    for cls, i in ROW.findall(first.text)[:5]:
        r = by_id[i]
        row_html = first.text.split(f'id="trend-{i}"', 1)[1].split("</tr>", 1)[0]
        assert f">{r['person']}<" in row_html and f">{r['family']}<" in row_html
        if r["slope_per_year"] is not None:
            assert "%+.2f" % r["slope_per_year"] in row_html


def test_cohort_whole_demo_on_one_page_is_unchanged(browser, app, web_db):
    """The demo fits one page: the rows are the cohort's, flagged first, as one pass gives them."""
    whole = _service_rows(web_db, app)
    want = sorted(whole, key=lambda r: not _flagged(r))
    r = browser("nurse").get("/cohort")
    assert [i for _, i in ROW.findall(r.text)] == _ids(want)
    assert "page 1 of 1" in r.text


def test_cohort_family_filter_reads_that_family_only(browser, monkeypatch):
    from tracker.services import review as SR

    scopes = []
    real = SR.load
    monkeypatch.setattr(SR, "load", lambda conn, scope=None: scopes.append(scope) or real(conn, scope))
    r = browser("nurse").get("/cohort?family=HV02")
    assert r.status_code == 200
    assert [sorted(s.family_codes) for s in scopes] == [["HV02"]]


@pytest.mark.parametrize("page", ["0", "x", "-1", "99999999"])
def test_cohort_bad_page_number_beside_the_field(browser, web_db, page):
    r = browser("nurse").get(f"/cohort?page={page}")
    assert r.status_code == 400
    assert re.search(r'<label>Page <input name="page"[^>]*><span class="field-error"', r.text)


def test_cohort_page_past_the_end_lists_nothing(browser):
    r = browser("nurse").get("/cohort?page=500")
    assert r.status_code == 200 and not ROW.findall(r.text)


# --------------------------------------------------------------------------- sign-in and the write lock


def _write_lock_free(db: str) -> bool:
    """Whether another writer could take the write lock right now (without waiting)."""
    if "://" not in db:
        import sqlite3

        con = sqlite3.connect(db, timeout=0, isolation_level=None)
        try:
            con.execute("BEGIN IMMEDIATE")
            con.execute("ROLLBACK")
            return True
        except sqlite3.OperationalError:
            return False
        finally:
            con.close()
    from tracker.store.database import WRITE_LOCK_KEY_SQL

    engine = make_engine(locate(db))
    try:
        with engine.connect() as conn:
            with conn.begin():
                return bool(conn.execute(text(f"SELECT pg_try_advisory_xact_lock({WRITE_LOCK_KEY_SQL})")).scalar())
    finally:
        engine.dispose()


def test_sign_in_verifies_the_password_outside_the_write_lock(app, web_db, monkeypatch):
    from starlette.testclient import TestClient

    from tracker.services import accounts as AC

    add_account(web_db, "t.lock", "nurse")
    seen = []
    real = AC._verify

    def checking(password_hash, password):
        seen.append(_write_lock_free(web_db))
        return real(password_hash, password)

    monkeypatch.setattr(AC, "_verify", checking)
    with TestClient(app, base_url="http://testserver") as client:
        assert sign_in(client, "t.lock").status_code == 303
        assert sign_in(client, "t.lock", "wrong-password-1").status_code in (303, 400)
    with TestClient(app, base_url="http://testserver") as other:
        assert sign_in(other, "t.lock", "wrong-password-1").status_code == 400
    assert seen and all(seen)


def test_cohort_renders_after_its_read_entry_is_committed(browser, web_db, monkeypatch):
    """The page view's read entry is one short write transaction before rendering: no lock while rendering."""
    from tracker.web.pages import cohort

    seen = []
    real = cohort.render

    def checking(request, name, ctx, **kw):
        seen.append(_write_lock_free(web_db))
        return real(request, name, ctx, **kw)

    client = browser("nurse")
    monkeypatch.setattr(cohort, "render", checking)
    before = len(audit_rows(web_db, "read"))
    assert client.get("/cohort").status_code == 200
    assert seen == [True] and len(audit_rows(web_db, "read")) == before + 1


# --------------------------------------------------------------------------- markup


def test_refusals_start_with_a_capital_letter(browser):
    r = browser("nurse").get("/admin/accounts")
    assert r.status_code == 403
    reason = re.search(r'<section class="panel refused">\s*<h1>[^<]*</h1>\s*<p>([^<]+)</p>', r.text).group(1)
    assert reason[0].isupper(), reason


def test_forced_password_change_shows_no_navigation(app, web_db):
    from starlette.testclient import TestClient

    once = add_account(web_db, "t.first", "nurse", ready=False)
    with TestClient(app, base_url="http://testserver") as client:
        r = sign_in(client, "t.first", once)
        assert r.status_code == 303 and r.headers["location"] == "/password"
        page = client.get("/password")
        assert page.status_code == 200 and 'class="mainnav"' not in page.text
        assert 'href="/day"' not in page.text.split("<main", 1)[0].replace('class="brand" href="/day"', "")
        assert "sign out" in page.text
    with TestClient(app, base_url="http://testserver") as ready:
        add_account(web_db, "t.ready", "nurse")
        assert sign_in(ready, "t.ready").status_code == 303
        assert 'class="mainnav"' in ready.get("/password").text


def test_date_fields_show_the_iso_format_and_codes_do_not_wrap(browser):
    r = browser("admin").get("/admin/audit")
    for name in ("since", "until"):
        assert re.search(rf'<input type="date" name="{name}"[^>]*aria-describedby="fmt-{name}"><span class="fmt" '
                         rf'id="fmt-{name}">YYYY-MM-DD</span>', r.text), name
    from pathlib import Path

    import tracker.web

    css = (Path(tracker.web.__file__).parent / "static" / "site.css").read_text()
    assert re.search(r"\.code, \.date, time \{ white-space: nowrap; \}", css)
    js = (Path(tracker.web.__file__).parent / "static" / "tracker.js").read_text()
    assert 'input[type="date"]' in js and "YYYY-MM-DD" in js
