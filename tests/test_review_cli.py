"""The `person` and `trends` commands on the invented mini families and the invented demo clinic.

Clinical expectations and their sources: ESC 2023 (Arbelo et al.) child rule z > 2 and adult
first-degree-relative rule >= 13 mm (guidelines.md section 4 [V]); PHN 2017 z-scores (Lopez et
al., normal-limits.md 5a [V]); the demo's converting carrier (demo_family/README.md, HV01 IV-2:
13.2 mm at the 2020-12 echo, first study at or above the 13 mm relative threshold).
"""

from __future__ import annotations

import csv
import json

import pytest

from tracker.services import review as review_service
from tracker.cli.app import main

PERSON_KEYS = {
    "person", "family", "sex_at_birth", "vital_status", "age_years", "age_uncertainty_years", "age_on",
    "placeholder", "genotype_status", "genotype_reason", "variant", "variant_class", "affected_status",
    "affected_status_date", "first_degree_relative_of_affected", "affected_first_degree_relatives",
    "guideline", "horizon_years", "bsa_formula", "studies", "trends", "conversion", "not_pooled", "caution", "review_flags",
    "record", "risk_scd",
}  # fmt: skip
TRENDS_KEYS = {"guideline", "horizon_years", "family", "measure", "rows", "not_pooled", "caution"}


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("demo") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


def test_help_has_an_example(run):
    for name in ("person", "trends"):
        r = run(name, "--help")
        assert r.code == 0 and "Example:" in r.out


def test_person_table_for_a_carrier_child(loaded_db, run):
    r = run("person", "T1-06", db=loaded_db)
    assert r.code == 0, r
    first = r.out.splitlines()[0]
    assert first.startswith("T1-06") and "FAM-T1" in first and "male" in first and "carrier" in first
    assert "unaffected" in first
    assert "yes (T1-03)" in r.out  # first-degree relative of the affected proband
    assert "phn2017" in r.out and "Lopez" in r.out  # children: PHN z-scores with their source
    assert "ECHO trends" in r.out and "never pooled" in r.out
    assert "esc_2023" in r.out and "clinician decides" in r.out


def test_person_json_for_a_carrier_child(loaded_db, run):
    r = run("person", "T1-06", "--json", db=loaded_db)
    d = json.loads(r.out)
    assert set(d) == PERSON_KEYS
    assert d["genotype_status"] == "carrier" and d["first_degree_relative_of_affected"] is True
    echos = [s for s in d["studies"] if s["modality"] == "echo"]
    assert [s["study_date"] for s in echos] == ["2020-05-01", "2022-05-03", "2024-05-02"]
    mwt = [v for s in echos for v in s["values"] if v["measure"] == "mwt_echo"]
    assert all(v["reference_set"] == "phn2017" and v["z"] is not None for v in mwt)
    # ESC 2023 child rule z > 2 [V]: the first echo (z below 2) does not meet it, the later ones do
    assert [v["meets_criteria"] for v in mwt] == [False, True, True]
    assert all(v["threshold_unit"] == "z" and v["threshold"] == 2.0 for v in mwt)
    assert d["conversion"]["first_met_date"] == "2022-05-03"
    trend = {t["measure"]: t for t in d["trends"]}["mwt_echo"]
    assert trend["n"] == 3 and trend["z_n"] == 3 and trend["z_model"] == "phn2017"
    assert set(trend) == set(review_service.TREND_JSON_KEYS)


def test_unknown_person_is_one_line_exit_1(loaded_db, run):
    r = run("person", "NOBODY-1", db=loaded_db)
    assert r.code == 1
    assert r.err.strip().splitlines() == ["error: unknown person code 'NOBODY-1'"]


def test_trends_json_filters_and_csv(loaded_db, run, tmp_path):
    r = run("trends", "--json", db=loaded_db)
    d = json.loads(r.out)
    assert set(d) == TRENDS_KEYS and d["guideline"]["id"] == "esc_2023"
    assert d["rows"] and all(set(row) == set(review_service.TREND_JSON_KEYS) for row in d["rows"])
    assert all(row["n"] >= 2 for row in d["rows"])
    fam = json.loads(run("trends", "--family", "FAM-T2", "--json", db=loaded_db).out)
    assert fam["family"] == "FAM-T2" and fam["rows"] == []  # FAM-T2 has no repeated measurement
    only = json.loads(run("trends", "--family", "FAM-T1", "--measure", "mwt_echo", "--json", db=loaded_db).out)
    assert [(x["person"], x["measure"]) for x in only["rows"]] == [("T1-06", "mwt_echo")]
    out = tmp_path / "trends.csv"
    r = run("trends", "--csv", out, db=loaded_db)
    assert r.code == 0 and "T1-06" in r.out
    with out.open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows and rows[0]["person"] == "T1-06" and "slope_per_year" in rows[0] and "caution" in rows[0]
    assert run("trends", "--family", "NO-SUCH", db=loaded_db).code == 1
    assert run("trends", "--measure", "no_such_measure", db=loaded_db).code == 1


def test_settings_choose_the_guideline_and_the_clinic_repeatability(loaded_db, run, tmp_path):
    settings = tmp_path / "clinic.toml"
    settings.write_text('[schedule]\nguideline = "aha_acc_2020"\n\n[repeatability]\nmwt_echo = 0.5\n')
    d = json.loads(run("trends", "--settings", settings, "--json", db=loaded_db).out)
    assert d["guideline"]["id"] == "aha_acc_2020" and "AHA/ACC" in d["guideline"]["name"]
    row = d["rows"][0]
    # LSC = 2.77 x the clinic's own Sw (Bland & Altman 1999 [V])
    assert row["lsc_status"] == "clinic" and row["lsc"] == pytest.approx(1.96 * 2**0.5 * 0.5)


def test_demo_converting_carrier_shows_as_converted(demo_db, run):
    d = json.loads(run("person", "HV01-IV-2", "--json", db=demo_db).out)
    assert d["genotype_status"] == "carrier" and d["first_degree_relative_of_affected"] is True
    c = d["conversion"]
    assert c["ever_met"] is True and c["first_met_date"] == "2020-12-23" and c["first_met_measures"] == "mwt_echo"
    assert 19 < c["first_met_age"] < 20
    trend = {t["measure"]: t for t in d["trends"]}
    assert trend["mwt_echo"]["converted"] is True and trend["mwt_echo"]["conversion_date"] == "2020-12-23"
    assert trend["mwt_echo"]["window"] == "studies from 18 y" and trend["mwt_echo"]["z_model"] == "phn2017"
    assert "mwt_cmr" in trend  # CMR is its own series, never pooled with echo
    text = run("person", "HV01-IV-2", db=demo_db).out
    assert "first met criteria on 2020-12-23" in text and "CMR values" in text and "never pooled" in text
    rows = json.loads(run("trends", "--family", "HV01", "--measure", "mwt_echo", "--json", db=demo_db).out)["rows"]
    owen = next(r for r in rows if r["person"] == "HV01-IV-2")
    assert owen["converted"] is True and owen["conversion_date"] == "2020-12-23" and owen["progressing"] is True
    concern = [r["concern"] for r in rows]
    assert concern == sorted(concern, reverse=True)  # most concerning first
