"""Every number in the normal-limit data files carries its provenance (source, year,
table, confidence tag), and the catalogue units agree with the store's measure
catalogue (migrations/versions/0001_initial.py)."""

import importlib.util
from pathlib import Path

import pytest

from tracker.normals import adult, cmr, diastolic
from tracker.normals.assess import DEFAULT_ADULT_SET
from tracker.normals.criteria import RULE_SETS
from tracker.normals.tables import CATALOGUE_UNITS, TAGS, read_rows

FILES = ["adult_echo.csv", "diastolic.csv", "cmr.csv", "paediatric_sets.csv", "paediatric_coefficients.csv"]


@pytest.mark.parametrize("name", FILES)
def test_every_row_has_provenance(name):
    rows = read_rows(name)
    assert rows
    for r in rows:
        assert r["source"].strip() and r["table"].strip()
        assert 1900 < int(r["year"]) < 2100
        assert r["tag"] in TAGS


def test_memory_rows_say_so():
    for r in adult.rows() + diastolic.rows() + cmr.rows():
        assert ("from memory, verify" in r.source_text) == (r.tag == "M")


def test_criteria_rules_are_tagged():
    for rs in RULE_SETS.values():
        for rule in rs.rules.values():
            assert rule.tag in TAGS and rule.text


def test_one_default_set_per_measure_and_units_known():
    rows = adult.rows() + diastolic.rows() + cmr.rows()
    assert {r.measure for r in rows} <= set(CATALOGUE_UNITS)
    assert "ecv" not in DEFAULT_ADULT_SET  # site/sequence specific: no default


def test_units_match_store_catalogue():
    path = Path(__file__).resolve().parents[1] / "migrations" / "versions" / "0001_initial.py"
    spec = importlib.util.spec_from_file_location("migration_0001", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    for code, _label, _modality, unit, *_rest in mod.CATALOGUE:
        assert CATALOGUE_UNITS[code] == unit, code
