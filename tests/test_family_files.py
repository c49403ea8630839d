"""`tracker export --phenopacket FAMILY` and `tracker export --ped FAMILY` on an invented family written here.

Checks against: the phenopackets package's protobuf Family (GA4GH Phenopackets v2, parsed with
google.protobuf.json_format), HPO ids in docs/reference/standards.md 4c (HP:0001639
hypertrophic cardiomyopathy, HP:0001645 sudden cardiac death), and the six-column PED/LINKAGE
convention (family, person, father, mother, sex 1/2/0, affection 1/2/0).
"""

from __future__ import annotations

import json
import stat
from pathlib import Path

import pytest

from test_fhir_import import FAMILY, FILES

KEY = "invented-test-key-0123456789abcdef"


@pytest.fixture
def store(tmp_path, run) -> str:
    folder = tmp_path / "csv"
    folder.mkdir()
    for name, content in FILES.items():
        (folder / name).write_text(content, encoding="utf-8")
    db = str(tmp_path / "zq.sqlite")
    assert run("init", db=db).code == 0
    assert run("import", "all", folder, db=db).code == 0
    return db


def _settings(tmp_path: Path) -> Path:
    (tmp_path / "pseudonym.key").write_text(KEY + "\n", encoding="utf-8")
    s = tmp_path / "settings.toml"
    s.write_text('[privacy]\npseudonym_key_file = "pseudonym.key"\n', encoding="utf-8")
    return s


def test_ped_columns_and_affection(store, run, tmp_path):
    out = tmp_path / "zq.ped"
    r = run("export", "--ped", FAMILY, "--out", out, db=store)
    assert r.code == 0, r
    assert stat.S_IMODE(out.stat().st_mode) == 0o600  # private output file
    rows = {line.split("\t")[1]: line.split("\t") for line in out.read_text().splitlines()}
    assert all(len(r) == 6 for r in rows.values())
    assert rows["ZQ07-II-1"] == ["ZQ07", "ZQ07-II-1", "ZQ07-I-1", "ZQ07-I-2", "2", "2"]  # affected proband
    assert rows["ZQ07-II-2"][4:] == ["1", "0"]  # never assessed: unknown affection
    assert rows["ZQ07-II-3"][5] == "2"  # latest assessment affected (an earlier one unaffected)
    assert rows["ZQ07-I-1"][2:] == ["0", "0", "1", "1"]  # founder, unaffected at the latest assessment
    assert rows["ZQ07-III-1"][2:4] == ["0", "0"]  # adopted in: the recorded mother is not a genetic parent


def test_phenopacket_parses_and_carries_the_variant(store, run, tmp_path):
    from google.protobuf.json_format import ParseDict
    from phenopackets import Family

    out = tmp_path / "zq.json"
    r = run("export", "--phenopacket", FAMILY, "--out", out, db=store)
    assert r.code == 0, r
    data = json.loads(out.read_text(encoding="utf-8"))
    ParseDict(data, Family())  # the package's protobuf model accepts it
    proband = data["proband"]
    assert proband["subject"]["id"] == "ZQ07-II-1"
    assert proband["phenotypicFeatures"][0]["type"]["id"] == "HP:0001639"
    gi = proband["interpretations"][0]["diagnosis"]["genomicInterpretations"][0]
    assert gi["variantInterpretation"]["acmgPathogenicityClassification"] == "LIKELY_PATHOGENIC"  # current class
    vd = gi["variantInterpretation"]["variationDescriptor"]
    assert vd["expressions"] == [{"syntax": "hgvs.c", "value": "NM_000256.3:c.1504C>T"}]
    persons = {p["individualId"]: p for p in data["pedigree"]["persons"]}
    assert len(persons) == 6 and persons["ZQ07-II-3"]["maternalId"] == "ZQ07-I-2"
    mother = next(p for p in data["relatives"] if p["subject"]["id"] == "ZQ07-I-2")
    assert mother["phenotypicFeatures"][0]["type"]["id"] == "HP:0001645"  # recorded sudden death
    assert mother["phenotypicFeatures"][0]["onset"]["age"]["iso8601duration"] == "P47Y"


def test_pseudonymised_codes(store, run, tmp_path):
    out = tmp_path / "zq.json"
    r = run("export", "--phenopacket", FAMILY, "--out", out, "--pseudonymise", "--settings", _settings(tmp_path),
            db=store)  # fmt: skip
    assert r.code == 0, r
    text = out.read_text(encoding="utf-8")
    assert "ZQ07" not in text  # no family or person code left
    assert json.loads(text)["id"].startswith("F-")
    ped = tmp_path / "zq.ped"
    assert run("export", "--ped", FAMILY, "--out", ped, "--pseudonymise", "--settings", _settings(tmp_path),
               db=store).code == 0  # fmt: skip
    assert "ZQ07" not in ped.read_text()


@pytest.mark.parametrize("args, expected", [
    (["--ped", "NOPE"], "family NOPE is not in the database"),
    (["--ped", FAMILY, "--phenopacket", FAMILY], "give one of --phenopacket and --ped"),
    (["people", "--ped", FAMILY], "--ped writes one family's file"),
])  # fmt: skip
def test_bad_options_are_one_line_errors_and_write_nothing(store, run, tmp_path, args, expected):
    out = tmp_path / "x.out"
    r = run("export", *args, "--out", out, db=store)
    assert r.code == 1 and expected in r.err, r
    assert not out.exists()
