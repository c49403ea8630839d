"""`tracker import fhir`: a family's FHIR Bundle back into the store, through the CSV importer's checks.

The family here is invented and written by the tests (CSV files in a temporary folder).  Codes
checked against docs/reference/standards.md (3b: Genomics Reporting IG LOINC codes and answers;
4a: echo LOINC 79969-2 IVSd 2D) and the FHIR core extension pages (genetics parent extension,
patient-record extension).
"""

from __future__ import annotations

import copy
import hashlib
import json
from pathlib import Path

import pytest
from fhir.resources.R4B.bundle import Bundle
from sqlalchemy import text

from conftest import dump
from tracker.store.database import locate, make_engine

FAMILY = "ZQ07"
FILES = {
    "families.csv": "family,condition,notes\nZQ07,hypertrophic cardiomyopathy,Invented family for the FHIR import tests.\n",
    "people.csv": (
        "person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,"
        "mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes,"
        "death_cause,death_age,diagnosis_age,diagnosis_place,icd_date,pacemaker_date\n"
        "ZQ07-I-1,ZQ07,Osric,Pellow,male,,1950,alive,,,,no,no,,,,contactable,2020-01-10,,,,,,,\n"
        "ZQ07-I-2,ZQ07,Ysolde,Pellow,female,,1952,deceased,,,,no,no,,,,,,,sudden,47,,,,\n"
        "ZQ07-II-1,ZQ07,Tamsin,Pellow,female,,1978-05-14,alive,,ZQ07-I-2,ZQ07-I-1,no,yes,,,,,,,,,31,,,\n"
        "ZQ07-II-2,ZQ07,Corin,Pellow,male,,1981-02-02,alive,,ZQ07-I-2,ZQ07-I-1,no,no,,,,,,note kept,,,,,,\n"
        "ZQ07-II-3,ZQ07,Perrin,Pellow,male,,1981-02-02,alive,,ZQ07-I-2,ZQ07-I-1,no,no,ZQ07-II-2,dizygotic,,,,,,,40,,,\n"
        "ZQ07-III-1,ZQ07,Wren,Ashby,female,,2006-09-30,alive,,ZQ07-II-1,,no,no,,,in,,,,,,,,,\n"
    ),
    "variants.csv": (
        "family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason\n"
        "ZQ07,MYBPC3,NM_000256.3,c.1504C>T,p.(Arg502Trp),heterozygous,uncertain_significance,2010-03-01,first report\n"
        "ZQ07,MYBPC3,NM_000256.3,c.1504C>T,p.(Arg502Trp),heterozygous,likely_pathogenic,2016-08-12,segregation\n"
    ),
    "genetic_results.csv": (
        "person,test_date,test_type,variant,result,lab,report_reference\n"
        "ZQ07-II-1,2010-02-20,diagnostic_panel,NM_000256.3:c.1504C>T,carrier,Invented Genomics Lab,IGL-10-001\n"
        "ZQ07-II-2,2016-09-01,predictive,NM_000256.3:c.1504C>T,non_carrier,Invented Genomics Lab,IGL-16-014\n"
        "ZQ07-II-3,2016-09-01,predictive,NM_000256.3:c.1504C>T,carrier,Invented Genomics Lab,IGL-16-015\n"
    ),
    "assessments.csv": (
        "person,assessment_date,affected_status,symptoms,competitive_athlete,pregnant,hypertension,notes\n"
        "ZQ07-II-1,2010-02-20,affected,breathless on stairs,no,no,no,\n"
        "ZQ07-II-3,2016-09-01,unaffected,,no,no,no,\n"
        "ZQ07-II-3,2021-10-04,affected,,no,no,no,\n"
        "ZQ07-I-1,2020-01-10,unaffected,,no,no,no,\n"
    ),
    "studies.csv": (
        "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
        "ZQ07-II-1,2010-02-20,echo,Invented Clinic,165,60,ivsd,19,mm\n"
        "ZQ07-II-1,2010-02-20,echo,Invented Clinic,165,60,lavi,41,mL/m2\n"
        "ZQ07-II-3,2021-10-04,echo,,,,ivsd,15,mm\n"
    ),
}
DATA_TABLES = ("family", "person", "variant", "variant_classification", "genetic_result", "assessment", "study",
               "measurement")  # fmt: skip


def _data(url: str) -> dict:
    d = dump(url)
    return {t: d[t] for t in DATA_TABLES}


@pytest.fixture(scope="module")
def source(tmp_path_factory) -> dict:
    """A SQLite store holding the invented family (imported from CSV) and its exported Bundle."""
    from tracker.cli.app import main

    folder = tmp_path_factory.mktemp("zq07")
    for name, content in FILES.items():
        (folder / name).write_text(content, encoding="utf-8")
    db = str(folder / "source.sqlite")
    assert main(["init", "--db", db]) == 0
    assert main(["import", "all", str(folder), "--db", db]) == 0
    out = folder / "ZQ07.fhir.json"
    assert main(["export", "--fhir", FAMILY, "--out", str(out), "--db", db]) == 0
    return {"db": db, "bundle": out, "text": out.read_text(encoding="utf-8"), "folder": folder}


def _write(tmp_path: Path, data, name: str = "bundle.json") -> Path:
    path = tmp_path / name
    path.write_text(data if isinstance(data, str) else json.dumps(data, indent=2), encoding="utf-8")
    return path


def _res(bundle: dict, kind: str, pred=lambda r: True) -> dict:
    return next(e["resource"] for e in bundle["entry"] if e["resource"]["resourceType"] == kind and pred(e["resource"]))


# --------------------------------------------------------------------------- the round trip


def test_round_trip_into_an_empty_store_gives_the_same_bundle(source, db_url, run, tmp_path):
    assert run("init", db=db_url).code == 0
    r = run("import", "fhir", source["bundle"], "--json", db=db_url)
    assert r.code == 0, r
    added = {f["kind"]: f["rows_added"] for f in json.loads(r.out)["files"]}
    assert added == {"families": 1, "people": 6, "variants": 2, "genetic-results": 3, "assessments": 4,
                     "studies": 3}  # fmt: skip
    again = tmp_path / "again.json"
    assert run("export", "--fhir", FAMILY, "--out", again, db=db_url).code == 0
    assert again.read_text(encoding="utf-8") == source["text"]  # byte for byte: the ids are uuid5 of codes


def test_round_trip_keeps_the_pedigree_links(source, sqlite_db, run):
    run("init", db=sqlite_db)
    assert run("import", "fhir", source["bundle"], db=sqlite_db).code == 0
    engine = make_engine(locate(sqlite_db))
    with engine.connect() as conn:
        rows = conn.execute(text(
            "SELECT p.code, m.code, f.code, t.code, p.twin_type, p.adoption, p.is_proband, p.death_cause, p.death_age,"
            " p.diagnosis_age FROM person p LEFT JOIN person m ON p.mother_id = m.id LEFT JOIN person f ON"
            " p.father_id = f.id LEFT JOIN person t ON p.twin_of_id = t.id")).all()  # fmt: skip
    engine.dispose()
    got = {r[0]: tuple(r[1:]) for r in rows}
    assert got["ZQ07-II-1"][:2] == ("ZQ07-I-2", "ZQ07-I-1")  # the proband's parents, from relationship MTH/FTH
    assert got["ZQ07-II-3"][:5] == ("ZQ07-I-2", "ZQ07-I-1", "ZQ07-II-2", "dizygotic", None)  # parent/sibling ext.
    assert got["ZQ07-III-1"][0] == "ZQ07-II-1" and got["ZQ07-III-1"][4] == "in"  # adopted-in child (DAUADOPT)
    assert bool(got["ZQ07-II-1"][5]) and got["ZQ07-II-3"][8] == 40  # HCM condition onsetAge
    assert got["ZQ07-II-1"][8] == 31  # the proband's HCM Condition onsetAge
    assert got["ZQ07-I-2"][6:8] == ("sudden", 47)


def test_reimport_adds_nothing(source, db_url, run):
    assert run("init", db=db_url).code == 0
    assert run("import", "all", source["folder"], db=db_url).code == 0
    before = _data(db_url)
    r = run("import", "fhir", source["bundle"], "--json", db=db_url)  # into the store it was exported from
    assert r.code == 0, r
    assert all(f["rows_added"] == 0 for f in json.loads(r.out)["files"])
    r = run("import", "fhir", source["bundle"], "--json", db=db_url)
    assert all(f["rows_added"] == 0 for f in json.loads(r.out)["files"])
    assert _data(db_url) == before  # fields the Bundle does not carry (notes, site, reason) kept


def test_import_is_audited_with_the_file_sha256(source, sqlite_db, run):
    run("init", db=sqlite_db)
    assert run("import", "fhir", source["bundle"], db=sqlite_db).code == 0
    digest = hashlib.sha256(source["bundle"].read_bytes()).hexdigest()
    engine = make_engine(locate(sqlite_db))
    with engine.connect() as conn:
        after = conn.execute(text("SELECT after FROM audit_entry WHERE action = 'import'")).scalars().all()
        runs = conn.execute(text("SELECT sha256 FROM import_run")).scalars().all()
    engine.dispose()
    assert after and all(json.loads(a)["sha256"] == digest for a in after)
    assert runs and set(runs) == {digest}


def test_export_carries_the_genetics_extensions_and_validates(source):
    bundle = json.loads(source["text"])
    Bundle.model_validate(bundle)
    twin = _res(bundle, "FamilyMemberHistory", lambda r: r["identifier"][0]["value"] == "ZQ07-II-3")
    urls = [e["url"] for e in twin["extension"]]
    assert urls.count("http://hl7.org/fhir/StructureDefinition/family-member-history-genetics-parent") == 2
    assert "http://hl7.org/fhir/StructureDefinition/family-member-history-genetics-sibling" in urls
    assert "http://hl7.org/fhir/StructureDefinition/familymemberhistory-patient-record" in urls
    implication = _res(bundle, "Observation", lambda r: r["code"]["coding"][0]["code"] == "diagnostic-implication")
    significance = implication["component"][0]
    assert significance["code"]["coding"][0]["code"] == "53037-8"  # standards.md 3b
    assert significance["valueCodeableConcept"]["coding"][0]["code"] == "LA26332-9"  # likely pathogenic, 3b


# --------------------------------------------------------------------------- malformed Bundles


def _unknown_loinc(b):
    obs = _res(b, "Observation", lambda r: any(c.get("code") == "ivsd" for c in r["code"]["coding"]))
    obs["code"]["coding"] = [{"system": "http://loinc.org", "code": "99999-9"}]
    return "99999-9 is not a measure of the catalogue", obs["id"]


def _implausible(b):
    obs = _res(b, "Observation", lambda r: any(c.get("code") == "ivsd" for c in r["code"]["coding"]))
    obs["valueQuantity"]["value"] = 190.0  # ivsd plausible range 2-60 mm (measure catalogue)
    return "outside the plausible range of ivsd", obs["id"]


def _missing_reference(b):
    obs = _res(b, "Observation", lambda r: "valueQuantity" in r)
    obs["subject"]["reference"] = "urn:uuid:00000000-0000-0000-0000-000000000000"
    return "subject: refers to urn:uuid:00000000-0000-0000-0000-000000000000, which is not in the Bundle", obs["id"]


def _unknown_answer(b):
    imp = _res(b, "Observation", lambda r: r["code"]["coding"][0]["code"] == "diagnostic-implication")
    imp["component"][0]["valueCodeableConcept"]["coding"][0]["code"] = "LA0000-0"
    return "LA0000-0 is not a clinical-significance answer", imp["id"]


def _unknown_extension(b):
    fmh = _res(b, "FamilyMemberHistory")
    fmh.setdefault("extension", []).append({"url": "http://example.org/ext", "valueString": "x"})
    return "extension http://example.org/ext is not read by the importer", fmh["id"]


def _other_resource(b):
    b["entry"].append({"fullUrl": "urn:uuid:11111111-1111-1111-1111-111111111111",
                       "resource": {"resourceType": "Procedure", "id": "pr1", "status": "completed",
                                    "subject": {"reference": "urn:uuid:x"}}})  # fmt: skip
    return "Procedure/pr1 resourceType: this resource type is not imported", "pr1"


def _duplicate_patient(b):
    patient = copy.deepcopy(_res(b, "Patient"))
    patient["id"] = "copy-1"
    b["entry"].append({"fullUrl": "urn:uuid:22222222-2222-2222-2222-222222222222", "resource": patient})
    return f"Patient/copy-1 identifier: person {patient['identifier'][0]['value']} is also in Patient/", "copy-1"


def _no_family(b):
    del b["identifier"]
    return "Bundle identifier: no family code", "Bundle"


@pytest.mark.parametrize("mutate", [_unknown_loinc, _implausible, _missing_reference, _unknown_answer,
                                    _unknown_extension, _other_resource, _duplicate_patient, _no_family])  # fmt: skip
def test_malformed_bundle_is_refused_and_nothing_is_written(source, db_url, run, tmp_path, mutate):
    assert run("init", db=db_url).code == 0
    before = dump(db_url)
    bundle = copy.deepcopy(json.loads(source["text"]))
    expected, rid = mutate(bundle)
    r = run("import", "fhir", _write(tmp_path, bundle), db=db_url)
    assert r.code == 1, r
    assert expected in r.err and rid in r.err, r.err
    assert dump(db_url) == before


@pytest.mark.parametrize("content, expected", [
    ('{"resourceType": "Bundle", "type": "collection", "entry": [', "is not valid JSON (line 1"),
    ('{"resourceType": "Patient", "id": "p1"}', "resourceType is 'Patient', not 'Bundle'"),
    ('[1, 2]', "is not a FHIR resource"),
    ('{"resourceType": "Bundle", "type": "collection", "entry": [{"resource": {"resourceType": "Patient", '
     '"id": "p1", "gender": 5}}]}', "Patient/p1 gender"),
])  # fmt: skip
def test_unreadable_file_is_one_line_error(db_url, run, tmp_path, content, expected):
    assert run("init", db=db_url).code == 0
    before = dump(db_url)
    r = run("import", "fhir", _write(tmp_path, content), db=db_url)
    assert r.code == 1 and expected in r.err, r
    assert dump(db_url) == before


def test_stored_record_with_other_values_is_refused(source, sqlite_db, run, tmp_path):
    run("init", db=sqlite_db)
    assert run("import", "fhir", source["bundle"], db=sqlite_db).code == 0
    bundle = json.loads(source["text"])
    patient = _res(bundle, "Patient", lambda r: r["identifier"][0]["value"] == "ZQ07-II-1")
    patient["birthDate"] = "1979-05-14"
    r = run("import", "fhir", _write(tmp_path, bundle), db=sqlite_db)
    assert r.code == 1
    assert f"Patient/{patient['id']} birthDate: differs from the stored record" in r.err, r.err


def test_round_trip_with_claimed_profiles_and_dry_run(source, sqlite_db, run, tmp_path):
    claimed = tmp_path / "claimed.json"
    assert run("export", "--fhir", FAMILY, "--out", claimed, "--claim-profiles", db=source["db"]).code == 0
    run("init", db=sqlite_db)
    before = dump(sqlite_db)
    r = run("import", "fhir", claimed, "--dry-run", db=sqlite_db)
    assert r.code == 0 and "dry run: nothing was written" in r.out, r
    assert dump(sqlite_db) == before
    assert run("import", "fhir", claimed, db=sqlite_db).code == 0
    again = tmp_path / "again.json"
    r = run("export", "--fhir", FAMILY, "--out", again, "--claim-profiles", "--json", db=sqlite_db)
    assert again.read_bytes() == claimed.read_bytes()
    assert json.loads(r.out)["profiles"] == {
        "Observation (variant)": ["http://hl7.org/fhir/uv/genomics-reporting/StructureDefinition/variant"],
        "Observation (diagnostic implication)": [
            "http://hl7.org/fhir/uv/genomics-reporting/StructureDefinition/diagnostic-implication"],
    }
