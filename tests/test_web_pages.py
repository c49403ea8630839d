"""The family, person and entry pages (Starlette TestClient) on the invented demo families.

Each page and form: signed out -> redirect to sign-in; roles allowed and refused; a POST without
the CSRF token refused; a bad field shows its error beside the field (400) and leaves the records
unchanged (every table but the audit trail and the sessions, which record the page views, and the
trail holds no write entry).  SQLite always; PostgreSQL too when TRACKER_TEST_POSTGRES_URL is set.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from conftest import dump
from sqlalchemy import update
from starlette.testclient import TestClient

from tracker.cli.app import main
from tracker.services import accounts as AC
from tracker.store.database import locate, make_engine, reading, writing
from tracker.store.models import Account
from tracker.web.app import create_app
from tracker.web.auth import SESSION_COOKIE
from tracker.web.csrf import _derive

SETTINGS = Path(__file__).resolve().parents[1] / "demo_family" / "clinic.toml"
ROLES = ("nurse", "cardiologist", "counsellor", "admin")
VIEW_TABLES = ("audit_entry", "web_session")  # written by every page view (read entries, session touch)


@pytest.fixture
def site(db_url):
    """(database, app, {role: token}) on a fresh demo database with one account per role."""
    assert main(["demo", "--db", db_url, "--json"]) == 0
    engine = make_engine(locate(db_url))
    tokens = {}
    with writing(engine) as conn:
        for role in ROLES:
            AC.add_account(conn, f"t.{role}", role, by="test")
            conn.execute(update(Account).where(Account.name == f"t.{role}").values(must_change_password=False))
            aid = conn.execute(Account.__table__.select().where(Account.name == f"t.{role}")).first().id
            tokens[role] = AC.start_session(conn, AC.User(f"t.{role}", role, aid))
    engine.dispose()
    app = create_app(db_url, SETTINGS)
    yield db_url, app, tokens
    app.state.engine.dispose()


def client(app, tokens, role=None) -> TestClient:
    c = TestClient(app, follow_redirects=False)
    if role:
        c.cookies.set(SESSION_COOKIE, tokens[role])
    return c


def token(tokens, role) -> str:
    return _derive(tokens[role])


def records(url) -> dict:
    return {k: v for k, v in dump(url).items() if k not in VIEW_TABLES}


def unchanged(url, before: dict) -> bool:
    """Every table but the view tables as ``before`` (the first table that differs is named)."""
    now = records(url)
    for table in before:
        assert now[table] == before[table], table
    return True


def write_entries(url) -> list:
    engine = make_engine(locate(url))
    with reading(engine) as conn:
        from tracker.store import audit

        trail = audit.load(conn)
    engine.dispose()
    return [a for a in trail["action"] if a not in ("read", "sign_in", "account", "import")]


# --------------------------------------------------------------------------- signed out


@pytest.mark.parametrize("path", ["/family/HV01", "/person/HV01-III-3", "/entry/study/HV01-III-3",
                                  "/entry/relative/HV01", "/entry/genetic-result/HV01-IV-5",
                                  "/entry/assessment/HV01-III-3", "/entry/plausible/mwt_echo"])
def test_signed_out_is_sent_to_sign_in(site, path):
    _, app, tokens = site
    r = client(app, tokens).get(path)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")


# --------------------------------------------------------------------------- family


def test_family_page_shows_pedigree_members_variant_cascade(site):
    url, app, tokens = site
    r = client(app, tokens, "nurse").get("/family/HV01")
    assert r.status_code == 200
    html = r.text
    assert "Decision support only" in html  # the cautions
    svg = re.search(r"<svg.*?</svg>", html, re.S).group(0)
    root = ET.fromstring(svg)
    links = root.findall(".//{http://www.w3.org/2000/svg}a")
    assert len(links) == 17 and all(a.get("href").startswith("/person/HV01-") for a in links)
    assert "MYBPC3" in html and "pathogenic" in html and "Cascade plan" in html
    assert "Thornbury" not in html  # no names
    assert "Record a new class" not in html and "Family letter" not in html  # nurse: no counsellor forms
    engine = make_engine(locate(url))
    with reading(engine) as conn:
        from tracker.store import audit

        last = audit.load(conn).iloc[-1]
    engine.dispose()
    assert last["action"] == "read" and last["family"] == "HV01" and last["actor"] == "t.nurse"


def test_unknown_family_or_person_is_not_found(site):
    _, app, tokens = site
    assert client(app, tokens, "nurse").get("/family/NOPE").status_code == 404
    assert client(app, tokens, "nurse").get("/person/NOPE-1").status_code == 404


def test_letter_is_a_pdf_for_the_counsellor_only(site):
    url, app, tokens = site
    c = client(app, tokens, "counsellor")
    assert "Family letter" in c.get("/family/HV01").text
    r = c.post("/family/HV01/letter", data={"person": "HV01-IV-5", "csrf_token": token(tokens, "counsellor")})
    assert r.status_code == 200, r.text[:500]
    assert r.headers["content-type"] == "application/pdf" and r.content.startswith(b"%PDF")
    assert 'filename="letter-HV01-IV-5.pdf"' in r.headers["content-disposition"]
    for role in ("nurse", "cardiologist"):
        before = records(url)
        r = client(app, tokens, role).post("/family/HV01/letter",
                                          data={"person": "HV01-IV-5", "csrf_token": token(tokens, role)})
        assert r.status_code == 403 and unchanged(url, before)


def test_letter_without_csrf_is_refused(site):
    url, app, tokens = site
    before = dump(url)
    r = client(app, tokens, "counsellor").post("/family/HV01/letter", data={"person": "HV01-IV-5"})
    assert r.status_code == 403
    assert records(url) == {k: v for k, v in before.items() if k not in VIEW_TABLES}


def test_reclassification_shows_impact_then_writes(site):
    url, app, tokens = site
    c = client(app, tokens, "counsellor")
    form = {"new_class": "likely_pathogenic", "date": "2026-11-30", "reason": "invented re-review",
            "csrf_token": token(tokens, "counsellor")}
    before = records(url)
    r = c.post("/family/HV01/reclassify", data=form)
    assert r.status_code == 200 and "Impact if written" in r.text and "Nothing has been written yet" in r.text
    assert unchanged(url, before)  # the impact writes nothing
    r = c.post("/family/HV01/reclassify", data={**form, "confirm": "yes"})
    assert r.status_code == 200 and "New class written" in r.text
    assert "reclassify" in write_entries(url)
    assert "likely pathogenic" in c.get("/family/HV01").text


@pytest.mark.parametrize("field,value", [("new_class", "very_bad"), ("date", "2026-02-30"), ("date", "2099-01-01"),
                                         ("reason", "  ")])
def test_reclassification_bad_field_is_beside_it(site, field, value):
    url, app, tokens = site
    form = {"new_class": "likely_pathogenic", "date": "2026-11-30", "reason": "invented", "confirm": "yes",
            "csrf_token": token(tokens, "counsellor"), field: value}
    before = records(url)
    r = client(app, tokens, "counsellor").post("/family/HV01/reclassify", data=form)
    assert r.status_code == 400
    assert f'id="error-{field}"' in r.text
    assert unchanged(url, before) and write_entries(url) == []


def test_reclassification_refused_for_other_roles(site):
    url, app, tokens = site
    before = records(url)
    for role in ("nurse", "cardiologist", "admin"):
        r = client(app, tokens, role).post("/family/HV01/reclassify", data={
            "new_class": "benign", "date": "2026-11-30", "reason": "x", "confirm": "yes",
            "csrf_token": token(tokens, role)})  # fmt: skip
        assert r.status_code == 403
    assert unchanged(url, before)


# --------------------------------------------------------------------------- person


def test_person_page_shows_every_part(site):
    _, app, tokens = site
    r = client(app, tokens, "cardiologist").get("/person/HV01-III-3")
    assert r.status_code == 200
    html = r.text
    for words in ("Decision support only", "Recall proposal", "Values against their limits", "Key measures over age",
                  "HCM Risk-SCD", "Segmental strain", "Audit trail of this person", "esc23.adult.carrier.from60"):
        assert words in html, words
    charts = re.findall(r'<svg[^>]*class="trend-chart".*?</svg>', html, re.S)
    assert charts
    for svg in charts:
        ET.fromstring(svg)
    assert "Correct one field" not in html  # the cardiologist does not edit the pedigree


def test_person_page_with_a_strain_map(site):
    url, app, tokens = site
    engine = make_engine(locate(url))
    with reading(engine) as conn:
        from tracker.store import repository as repo

        s = repo.load_studies(conn, entered=False)
    engine.dispose()
    who = s.loc[s["measure"].astype(str).str.startswith("ls_seg"), "person"]
    if who.empty:
        pytest.skip("no segmental strain in the demo")
    r = client(app, tokens, "nurse").get(f"/person/{who.iloc[0]}")
    svg = re.search(r'<svg[^>]*class="strain-map".*?</svg>', r.text, re.S).group(0)
    assert len(ET.fromstring(svg).findall("{http://www.w3.org/2000/svg}polygon[@class='segment']")) == 17


def test_edit_person_needs_a_reason_and_a_valid_value(site):
    url, app, tokens = site
    c = client(app, tokens, "counsellor")
    t = token(tokens, "counsellor")
    before = records(url)
    r = c.post("/person/HV01-IV-5/edit", data={"field": "birth_date", "value": "1996-02-30", "reason": "typo",
                                               "csrf_token": t})  # fmt: skip
    assert r.status_code == 400 and 'id="error-value"' in r.text
    r = c.post("/person/HV01-IV-5/edit", data={"field": "contact_status", "value": "contactable", "reason": "",
                                               "csrf_token": t})  # fmt: skip
    assert r.status_code == 400 and 'id="error-reason"' in r.text
    assert unchanged(url, before) and write_entries(url) == []
    r = c.post("/person/HV01-IV-5/edit", data={"field": "contact_status", "value": "contactable",
                                               "reason": "reached by phone", "csrf_token": t})  # fmt: skip
    assert r.status_code == 303
    assert write_entries(url) == ["edit"]


def test_edit_and_remove_refused_for_other_roles_and_without_csrf(site):
    url, app, tokens = site
    before = records(url)
    for role in ("nurse", "cardiologist"):
        r = client(app, tokens, role).post("/person/HV01-IV-5/remove", data={"reason": "x",
                                                                            "csrf_token": token(tokens, role)})
        assert r.status_code == 403
    r = client(app, tokens, "counsellor").post("/person/HV01-IV-5/remove", data={"reason": "x"})
    assert r.status_code == 403
    assert unchanged(url, before)


def test_remove_a_parent_is_refused_beside_the_form(site):
    url, app, tokens = site
    before = records(url)
    r = client(app, tokens, "counsellor").post("/person/HV01-III-1/remove", data={
        "reason": "duplicate", "csrf_token": token(tokens, "counsellor")})  # fmt: skip
    assert r.status_code == 400 and "parent or twin" in r.text
    assert unchanged(url, before)


# --------------------------------------------------------------------------- entry forms

STUDY = {"study_date": "2026-11-20", "site": "Invented Vale Hospital", "height_cm": "170", "weight_kg": "70",
         "modality": "echo", "value.mwt_echo": "11.2"}  # fmt: skip
ASSESSMENT = {"assessment_date": "2026-11-20", "affected_status": "unaffected", "nsvt": "no"}
RESULT = {"test_date": "2026-11-02", "test_type": "predictive", "variant": "NM_000256.3:c.1504C>T",
          "result": "non_carrier", "lab": "Invented Genomics Lab"}  # fmt: skip
RELATIVE = {"person": "HV01-V-1", "sex_at_birth": "female", "birth_date": "2020", "vital_status": "alive",
            "mother": "HV01-IV-1"}  # fmt: skip

FORMS = [  # (path, allowed role, good form, (field, bad value, field the error is beside))
    ("/entry/study/HV01-III-3", "cardiologist", STUDY, ("value.mwt_echo", "112", "value.mwt_echo")),
    ("/entry/study/HV01-III-3", "cardiologist", STUDY, ("study_date", "2026-13-01", "study_date")),
    ("/entry/assessment/HV01-III-3", "cardiologist", ASSESSMENT, ("affected_status", "ill", "affected_status")),
    ("/entry/assessment/HV01-III-3", "cardiologist", ASSESSMENT, ("nsvt", "perhaps", "nsvt")),
    ("/entry/genetic-result/HV01-IV-5", "counsellor", RESULT, ("result", "positive", "result")),
    ("/entry/relative/HV01", "counsellor", RELATIVE, ("mother", "HV02-I-1", "mother")),
    ("/entry/relative/HV01", "counsellor", RELATIVE, ("sex_at_birth", "x", "sex_at_birth")),
]


@pytest.mark.parametrize("path,role,good,bad", FORMS)
def test_entry_form_bad_field_beside_it_and_nothing_written(site, path, role, good, bad):
    url, app, tokens = site
    c = client(app, tokens, role)
    assert c.get(path).status_code == 200
    field, value, beside = bad
    before = records(url)
    r = c.post(path, data={**good, field: value, "csrf_token": token(tokens, role)})
    assert r.status_code == 400
    assert f'id="error-{beside}"' in r.text, r.text[-3000:]
    assert unchanged(url, before) and write_entries(url) == []


@pytest.mark.parametrize("path,role,good", sorted({(p, r, tuple(g.items())) for p, r, g, _ in FORMS}))
def test_entry_form_stores_for_its_role_only(site, path, role, good):
    url, app, tokens = site
    good = dict(good)
    others = [x for x in ROLES if x != role]
    before = records(url)
    for other in others:
        assert client(app, tokens, other).get(path).status_code == 403
        r = client(app, tokens, other).post(path, data={**good, "csrf_token": token(tokens, other)})
        assert r.status_code == 403
    r = client(app, tokens, role).post(path, data=good)  # no CSRF token
    assert r.status_code == 403
    assert unchanged(url, before)
    r = client(app, tokens, role).post(path, data={**good, "csrf_token": token(tokens, role)})
    assert r.status_code == 303, r.text[-2000:]
    assert write_entries(url) == ["entry"]


def test_plausible_as_you_type(site):
    _, app, tokens = site
    c = client(app, tokens, "cardiologist")
    assert c.get("/entry/plausible/mwt_echo", params={"value.mwt_echo": "12"}).text == ""
    msg = c.get("/entry/plausible/mwt_echo", params={"value.mwt_echo": "1.2"}).text
    assert "outside the plausible range" in msg and "centimetres" in msg
    assert c.get("/entry/plausible/mwt_echo", params={"value.mwt_echo": "1.2", "unit.mwt_echo": "cm"}).text == ""
    assert "&lt;" in c.get("/entry/plausible/<b>", params={"value.<b>": "1"}).text  # escaped
    assert client(app, tokens, "nurse").get("/entry/plausible/mwt_echo").status_code == 403
