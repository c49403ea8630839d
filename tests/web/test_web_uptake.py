"""The cascade uptake page (/uptake) on the invented demo families."""

from __future__ import annotations

import re

import pytest

from web.conftest import audit_rows


def test_signed_out_redirects(browser):
    r = browser().get("/uptake", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"].startswith("/signin")
    assert browser().get("/uptake.pdf", follow_redirects=False).status_code == 303


@pytest.mark.parametrize("role", ["nurse", "cardiologist", "counsellor", "admin"])
def test_everyone_reads_the_figures_with_n_definitions_and_cautions(browser, web_db, role):
    client = browser(role)
    r = client.get("/uptake")
    assert r.status_code == 200
    assert "Decision support only" in r.text and "Small numbers" in r.text
    # each percentage with its count and denominator; the denominators shown
    assert re.search(r"<strong>\d+</strong> of \d+ <span class=\"pct\">\d+%</span>", r.text)
    assert "at risk (n)" in r.text and "first degree" in r.text and "median days to first contact" in r.text
    assert "What each figure means" in r.text and "At-risk relative (the denominator" in r.text
    assert "not recorded" in r.text  # counselling is not recorded in the demo store: never shown as 0
    entry = audit_rows(web_db, "read")[-1]
    assert entry.actor == client.name and "cascade uptake" in entry.what and "HV01" in entry.what


def test_family_filter_and_pdf(browser, web_db):
    client = browser("nurse")
    r = client.get("/uptake?family=HV01&from=2010-01-01&to=2026-12-07")
    assert r.status_code == 200 and 'href="/uptake?family=HV01"' in r.text and "HV02" not in r.text
    assert audit_rows(web_db, "read")[-1].family_code == "HV01"
    r = client.get("/uptake.pdf?family=HV01&to=2026-12-07")
    assert r.status_code == 200 and r.content.startswith(b"%PDF") and r.headers["content-type"] == "application/pdf"
    assert "HV01" in audit_rows(web_db, "read")[-1].what


@pytest.mark.parametrize("query,field", [("from=2026-13-01", "from"), ("to=yesterday", "to"),
                                         ("from=2026-12-01&to=2026-01-01", "to"), ("family=" + "X" * 41, "family"),
                                         ("family=NOPE1", "family")])  # fmt: skip
def test_filter_errors_beside_the_field(browser, query, field):
    r = browser("nurse").get(f"/uptake?{query}")
    assert r.status_code == 400
    assert re.search(rf'name="{field}"[^>]*><span class="field-error" id="error-{field}"', r.text)
