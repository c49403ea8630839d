"""FHIR R4B export of one family: validity, codes against the reference notes, counts, stable ids.

Reference for every code checked here: docs/reference/standards.md, sections 3a (FHIR mapping),
3b (Genomics Reporting IG LOINC codes), 4a (echo LOINC), 4b (CMR LOINC), 4c (HPO), 4d (SNOMED).
The tables below are written out again from those sections (not imported from the code under
test) so that a wrong code in the code tables fails here.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
import typer
from fhir.resources.R4B.bundle import Bundle
from fhir.resources.R4B.condition import Condition
from fhir.resources.R4B.familymemberhistory import FamilyMemberHistory
from fhir.resources.R4B.observation import Observation
from fhir.resources.R4B.patient import Patient
from sqlalchemy import text
from typer.testing import CliRunner

from tracker.cli.app import main
from tracker.cli.common import dispose_engines
from tracker.cli.export_fhir import export_fhir, export_fhir_command
from tracker.outputs import fhir
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading

DEMO_FAMILIES = ["HV01", "HV02", "HV03", "HV04", "HV05"]
LOINC = "http://loinc.org"
LOCAL_MEASURE = "urn:tracker:measure"
ROLE = "http://terminology.hl7.org/CodeSystem/v3-RoleCode"

# standards.md 3b: Genomics Reporting IG codes (all [V]).
LOINC_3B = {
    "69548-6", "48018-6", "81252-9", "48004-6", "48005-3", "81290-9", "51958-7", "48002-0",
    "53034-5", "53037-8", "79742-3", "81259-4",
}  # fmt: skip
# standards.md 3b answers: LA9633-4 Present, LA6706-1 Heterozygous, LL4034-6 classes.
ANSWERS_3B = {"LA9633-4", "LA6706-1", "LA6668-3", "LA26332-9", "LA26333-7", "LA26334-5", "LA6675-8"}
# Not in the reference notes: LA9634-2 Absent, [V2] (secondary copies), accepted by the brief.
ANSWERS_V2 = {"LA9634-2"}
# standards.md 4a (echo) and 4b (CMR), every LOINC code listed (all [V]).
LOINC_4A = {
    "18154-5", "79969-2", "79968-4", "18158-6", "79971-8", "79970-0", "18152-9", "80031-8",
    "80032-6", "18156-0", "80033-4", "80034-2", "18155-2", "29436-3", "80007-8", "80008-6",
    "29438-9", "80011-0", "80012-8", "10230-1", "18043-0", "79991-6", "79990-8", "77891-0",
    "18049-7", "29469-4", "79975-9", "79977-5", "79984-1", "79982-5", "80054-0", "79911-4",
    "18037-2", "17978-8", "18038-0", "80070-6", "80066-4", "20247-3", "80029-2", "18087-7",
    "80019-3", "18026-5", "18148-7", "79996-5", "80001-1",
}  # fmt: skip
LOINC_4B = {"8811-2", "8818-7"}
REFERENCE_LOINC = LOINC_3B | LOINC_4A | LOINC_4B
SNOMED_HCM = "233873004"  # standards.md 4d
HPO_HCM = "HP:0001639"  # standards.md 4c
# ACMG/AMP class -> LL4034-6 answer (standards.md 3b)
CLASS_ANSWER = {"P": "LA6668-3", "LP": "LA26332-9", "VUS": "LA26333-7"}


# ---------------------------------------------------------------------------
# fixtures
# ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory) -> str:
    path = str(tmp_path_factory.mktemp("fhir") / "demo.sqlite")
    assert main(["demo", "--db", path, "--json"]) == 0
    return path


@pytest.fixture(scope="module")
def engine(demo_db):
    eng = make_engine(locate(demo_db))
    yield eng
    eng.dispose()


@pytest.fixture(scope="module")
def frames(engine) -> dict[str, pd.DataFrame]:
    with reading(engine) as conn:
        return {
            "families": repo.load_families(conn),
            "people": repo.load_people(conn),
            "variants": repo.load_variants(conn),
            "results": repo.load_genetic_results(conn),
            "assessments": repo.load_assessments(conn),
            "studies": repo.load_studies(conn, entered=False),
            "measures": repo.load_measures(conn),
        }


@pytest.fixture(scope="module")
def exported(engine, tmp_path_factory) -> dict[str, dict]:
    """Each demo family exported through export_fhir; family -> {"summary", "text", "bundle"}."""
    folder = tmp_path_factory.mktemp("out")
    out = {}
    with reading(engine) as conn:
        for fam in DEMO_FAMILIES:
            path = folder / f"{fam}.json"
            summary = export_fhir(conn, fam, path)
            text_ = path.read_text(encoding="utf-8")
            out[fam] = {"summary": summary, "text": text_, "bundle": Bundle.model_validate_json(text_)}
    return out


def _resources(bundle: Bundle, kind: str) -> list:
    return [e.resource for e in bundle.entry if e.resource.get_resource_type() == kind]


def _codes(cc, system: str) -> list[str]:
    return [c.code for c in (cc.coding or []) if c.system == system] if cc is not None else []


def _measurements(bundle: Bundle) -> list[Observation]:
    return [o for o in _resources(bundle, "Observation") if _codes(o.code, LOCAL_MEASURE)]


def _genetic(bundle: Bundle, code: str) -> list[Observation]:
    return [o for o in _resources(bundle, "Observation") if code in [c.code for c in o.code.coding or []]]


def _by_url(bundle: Bundle) -> dict[str, object]:
    return {e.fullUrl: e.resource for e in bundle.entry}


def _person_of(bundle: Bundle, ref: str) -> str:
    patient = _by_url(bundle)[ref]
    return patient.identifier[0].value


# ---------------------------------------------------------------------------
# validity and shape
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("fam", DEMO_FAMILIES)
def test_bundle_parses_back_with_the_r4b_models(exported, fam):
    bundle = exported[fam]["bundle"]  # parsed with Bundle.model_validate_json in the fixture
    assert bundle.type == "collection"
    assert bundle.identifier.value == fam
    kinds = {type(e.resource) for e in bundle.entry}
    assert kinds <= {Patient, FamilyMemberHistory, Observation, Condition}  # Condition: the proband's own
    # a second round trip gives the same JSON
    assert json.loads(bundle.model_dump_json()) == json.loads(exported[fam]["text"])


@pytest.mark.parametrize("fam", DEMO_FAMILIES)
def test_full_urls_are_uuid_urns_and_every_reference_resolves(exported, fam):
    bundle = exported[fam]["bundle"]
    urls = [e.fullUrl for e in bundle.entry]
    assert len(urls) == len(set(urls))
    for e in bundle.entry:
        assert e.fullUrl == f"urn:uuid:{e.resource.id}"
    known = set(urls)
    refs = []
    for res in _resources(bundle, "Observation"):
        refs.append(res.subject.reference)
        refs += [d.reference for d in res.derivedFrom or []]
    for res in _resources(bundle, "FamilyMemberHistory"):
        refs.append(res.patient.reference)
    assert refs and set(refs) <= known


# ---------------------------------------------------------------------------
# codes against the reference notes
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("fam", DEMO_FAMILIES)
def test_every_loinc_code_is_one_listed_in_the_reference_notes(exported, fam):
    bundle = exported[fam]["bundle"]
    for obs in _resources(bundle, "Observation"):
        for code in _codes(obs.code, LOINC):
            assert code in REFERENCE_LOINC, f"Observation.code {code} is not in standards.md 3b/4a/4b"
        for comp in obs.component or []:
            for code in _codes(comp.code, LOINC):
                assert code in LOINC_3B, f"component code {code} is not in standards.md 3b"
            for code in _codes(comp.valueCodeableConcept, LOINC):
                assert code in ANSWERS_3B, f"component answer {code} is not in standards.md 3b"
        for code in _codes(obs.valueCodeableConcept, LOINC):
            assert code in ANSWERS_3B | ANSWERS_V2


def test_measurements_use_the_catalogue_loinc_and_always_the_local_code(exported, frames):
    catalogue = frames["measures"].set_index("code")["loinc"].to_dict()
    with_loinc = without = 0
    for fam in DEMO_FAMILIES:
        for obs in _measurements(exported[fam]["bundle"]):
            (local,) = _codes(obs.code, LOCAL_MEASURE)
            assert local in catalogue
            expected = catalogue[local]
            if expected:
                assert _codes(obs.code, LOINC) == [expected]
                with_loinc += 1
            else:
                assert _codes(obs.code, LOINC) == [], f"{local} has no LOINC in the catalogue"
                without += 1
    assert with_loinc > 0 and without > 0  # both paths exercised by the demo data


def test_one_known_echo_value_and_one_local_only_value(exported):
    """HV01-III-1, echo of 2012-04-23: IVSd 22.3 mm (LOINC 79969-2, standards.md 4a) and
    LVOT gradient at rest 53 mmHg (no LOINC found, standards.md 4a: local code only)."""
    bundle = exported["HV01"]["bundle"]
    found = {}
    for obs in _measurements(bundle):
        if _person_of(bundle, obs.subject.reference) == "HV01-III-1" and str(obs.effectiveDateTime) == "2012-04-23":
            found[_codes(obs.code, LOCAL_MEASURE)[0]] = obs
    ivsd, lvot = found["ivsd"], found["lvot_rest"]
    assert _codes(ivsd.code, LOINC) == ["79969-2"]
    assert (float(ivsd.valueQuantity.value), ivsd.valueQuantity.code) == (22.3, "mm")
    assert ivsd.valueQuantity.system == "http://unitsofmeasure.org"
    assert ivsd.status == "final"
    assert _codes(ivsd.category[0], "http://terminology.hl7.org/CodeSystem/observation-category") == ["imaging"]
    assert _codes(lvot.code, LOINC) == []
    assert (float(lvot.valueQuantity.value), lvot.valueQuantity.code) == (53.0, "mm[Hg]")


# ---------------------------------------------------------------------------
# counts
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("fam", DEMO_FAMILIES)
def test_counts_patients_and_measurement_observations(exported, engine, fam):
    bundle = exported[fam]["bundle"]
    with engine.connect() as conn:  # counted with SQL of its own, not through the repository
        stored_values = conn.execute(
            text(
                "SELECT COUNT(*) FROM measurement m JOIN study s ON m.study_id = s.id "
                "JOIN person p ON s.person_id = p.id JOIN family f ON p.family_id = f.id "
                "WHERE f.code = :fam"
            ),
            {"fam": fam},
        ).scalar_one()
        seen = conn.execute(
            text(
                "SELECT COUNT(*) FROM person p JOIN family f ON p.family_id = f.id WHERE f.code = :fam AND ("
                " p.is_proband"
                " OR EXISTS (SELECT 1 FROM study s WHERE s.person_id = p.id)"
                " OR EXISTS (SELECT 1 FROM assessment a WHERE a.person_id = p.id)"
                " OR EXISTS (SELECT 1 FROM genetic_result g WHERE g.person_id = p.id))"
            ),
            {"fam": fam},
        ).scalar_one()
        members = conn.execute(
            text("SELECT COUNT(*) FROM person p JOIN family f ON p.family_id = f.id WHERE f.code = :fam"),
            {"fam": fam},
        ).scalar_one()
    assert stored_values > 0
    assert len(_measurements(bundle)) == stored_values
    assert len(_resources(bundle, "Patient")) == seen
    assert len(_resources(bundle, "FamilyMemberHistory")) == members - 1  # everyone but the proband
    summary = exported[fam]["summary"]
    assert summary["resources"]["Observation (measurement)"] == stored_values
    assert summary["entries"] == len(bundle.entry)


# ---------------------------------------------------------------------------
# genetic findings (Genomics Reporting IG shape, standards.md 3a/3b)
# ---------------------------------------------------------------------------


def _component(obs: Observation, loinc: str):
    (comp,) = [c for c in obs.component if loinc in _codes(c.code, LOINC)]
    return comp.valueCodeableConcept


def test_hv01_variant_and_implication_observations(exported):
    """HV01: MYBPC3 NM_000256.3:c.1504C>T, class P; carriers III-1, III-3, IV-1, IV-2;
    predictive non-carriers II-2 and IV-3 (demo_family/genetic_results.csv)."""
    bundle = exported["HV01"]["bundle"]
    variants = _genetic(bundle, "69548-6")
    by_person = {_person_of(bundle, o.subject.reference): o for o in variants}
    assert set(by_person) == {"HV01-II-2", "HV01-III-1", "HV01-III-3", "HV01-IV-1", "HV01-IV-2", "HV01-IV-3"}
    for person, obs in by_person.items():
        assert obs.status == "final"
        assert _component(obs, "48004-6").coding[0].code == "NM_000256.3:c.1504C>T"
        assert _component(obs, "51958-7").coding[0].code == "NM_000256.3"
        assert _component(obs, "48005-3").coding[0].code == "p.(Arg502Trp)"
        assert _component(obs, "48018-6").text == "MYBPC3"
        answer = _codes(obs.valueCodeableConcept, LOINC)
        if person in ("HV01-II-2", "HV01-IV-3"):
            assert answer == ["LA9634-2"]  # Absent
            assert not [c for c in obs.component if "53034-5" in _codes(c.code, LOINC)]
        else:
            assert answer == ["LA9633-4"]  # Present
            assert _component(obs, "53034-5").coding[0].code == "LA6706-1"  # heterozygous
    implications = _genetic(bundle, "diagnostic-implication")
    assert len(implications) == 4
    urls = {o.id: f"urn:uuid:{o.id}" for o in variants}
    for imp in implications:
        (source,) = imp.derivedFrom
        derived = _by_url(bundle)[source.reference]
        assert source.reference in urls.values()
        assert derived.subject.reference == imp.subject.reference
        assert _codes(_component(imp, "53037-8"), LOINC) == [CLASS_ANSWER["P"]]
        phen = _component(imp, "81259-4")
        assert SNOMED_HCM in _codes(phen, "http://snomed.info/sct")
        assert HPO_HCM in _codes(phen, "http://human-phenotype-ontology.org")
        assert str(imp.effectiveDateTime) == "2012-06-18"


def test_implication_carries_the_current_class_after_reclassification(exported):
    """HV04: TNNT2 c.311G>A, VUS 2014-02-10, reclassified LP 2018-09-05 (demo_family/variants.csv)."""
    bundle = exported["HV04"]["bundle"]
    implications = _genetic(bundle, "diagnostic-implication")
    assert implications
    for imp in implications:
        assert _codes(_component(imp, "53037-8"), LOINC) == [CLASS_ANSWER["LP"]]
        assert str(imp.effectiveDateTime) == "2018-09-05"
        assert "VUS (2014-02-10)" in imp.note[0].text
    hv03 = _genetic(exported["HV03"]["bundle"], "diagnostic-implication")
    assert hv03 and all(_codes(_component(i, "53037-8"), LOINC) == [CLASS_ANSWER["VUS"]] for i in hv03)


def test_results_that_are_not_exported_are_reported(exported):
    """HV02-III-3 inconclusive and HV05-II-1 no variant found are left out, with a reason."""
    hv02 = exported["HV02"]["summary"]["not_exported"]
    assert [(r["person"], r["result"]) for r in hv02] == [("HV02-III-3", "inconclusive")]
    hv05 = exported["HV05"]["summary"]["not_exported"]
    assert [(r["person"], r["result"]) for r in hv05] == [("HV05-II-1", "no_variant_found")]
    assert _genetic(exported["HV05"]["bundle"], "69548-6") == []


# ---------------------------------------------------------------------------
# family history
# ---------------------------------------------------------------------------


def _histories(bundle: Bundle) -> dict[str, FamilyMemberHistory]:
    return {h.identifier[0].value: h for h in _resources(bundle, "FamilyMemberHistory")}


def test_relationships_to_the_proband_use_v3_role_codes(exported):
    """HV01 proband III-1 (demo_family/people.csv); RoleCode meanings per the v3 FamilyMember
    value set (standards.md 3a: v3 RoleCode MTH/FTH/SIS...)."""
    h = _histories(exported["HV01"]["bundle"])
    expected = {
        "HV01-I-1": "GRFTH", "HV01-I-2": "GRMTH", "HV01-II-1": "FTH", "HV01-II-2": "MTH",
        "HV01-II-4": "AUNT", "HV01-III-3": "SIS", "HV01-III-5": "BRO", "HV01-III-6": "HBRO",
        "HV01-IV-1": "DAU", "HV01-IV-2": "SON", "HV01-IV-3": "NEPHEW", "HV01-IV-4": "NIECE", "HV01-IV-5": "NIECE",
        "HV01-II-3": "FAMMEMB", "HV01-III-2": "FAMMEMB", "HV01-III-4": "FAMMEMB",
    }  # fmt: skip
    assert "HV01-III-1" not in h  # the proband is the Patient, not a relative
    assert {p: _codes(x.relationship, ROLE) for p, x in h.items()} == {p: [c] for p, c in expected.items()}
    assert h["HV01-IV-3"].relationship.text == "niece/nephew, 2nd-degree relative"
    assert h["HV01-III-2"].relationship.text.startswith("co-parent of the proband's child")
    twins = _histories(exported["HV02"]["bundle"])
    assert _codes(twins["HV02-III-2"].relationship, ROLE) == ["ITWINSIS"]  # monozygotic co-twin


def test_hcm_condition_only_where_the_latest_assessment_is_affected(exported, frames):
    h = _histories(exported["HV01"]["bundle"])
    a = frames["assessments"].sort_values("assessment_date").groupby("person").tail(1)
    affected = set(a.loc[a["affected_status"] == "affected", "person"])
    assert "HV01-IV-2" in affected and "HV01-IV-1" not in affected  # demo data, see assessments.csv
    for person, hist in h.items():
        hcm = [c for c in hist.condition or [] if _codes(c.code, "http://snomed.info/sct") == [SNOMED_HCM]]
        if person in affected:
            (cond,) = hcm
            assert _codes(cond.code, "http://human-phenotype-ontology.org") == [HPO_HCM]
        else:
            assert not hcm


def test_recorded_sudden_death_and_diagnosis_age_are_conditions_with_their_onset():
    """Invented rows: a father with a recorded sudden death at 41 (cause and age of death as fields), a mother
    diagnosed with HCM at 52 elsewhere and never assessed here.  HPO HP:0001645 Sudden cardiac death
    (standards.md 4c [V]); FHIR R4 FamilyMemberHistory.condition.onsetAge and contributedToDeath."""
    people = pd.DataFrame(
        [
            {"person": "Y-1", "family": "Y", "sex_at_birth": "male", "birth_date": "1938",
             "vital_status": "deceased", "death_date": None, "death_cause": "sudden", "death_age": 41.0,
             "proband": False, "placeholder": False, "mother": None, "father": None},
            {"person": "Y-2", "family": "Y", "sex_at_birth": "female", "birth_date": "1940",
             "vital_status": "alive", "death_date": None, "diagnosis_age": 52.0, "proband": False,
             "placeholder": False, "mother": None, "father": None},
            {"person": "Y-3", "family": "Y", "sex_at_birth": "male", "birth_date": "1965",
             "vital_status": "alive", "death_date": None, "proband": True, "placeholder": False,
             "mother": "Y-2", "father": "Y-1"},
        ]
    )  # fmt: skip
    empty = {
        "variants": pd.DataFrame(columns=["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity",
                                          "acmg_class", "classified_on", "reason"]),
        "results": pd.DataFrame(columns=["person", "test_date", "test_type", "variant", "result", "lab",
                                         "report_reference"]),
        "assessments": pd.DataFrame(columns=["person", "assessment_date", "affected_status"]),
        "studies": pd.DataFrame(columns=["person", "study_date", "modality", "measure", "value", "unit"]),
        "measures": pd.DataFrame(columns=["code", "label", "unit", "loinc"]),
    }
    families = pd.DataFrame([{"family": "Y", "condition": "hypertrophic cardiomyopathy"}])
    parsed = Bundle.model_validate_json(fhir.bundle_json(fhir.build_family_bundle("Y", families, people, **empty)))
    h = _histories(parsed)
    (scd,) = h["Y-1"].condition
    assert _codes(scd.code, "http://human-phenotype-ontology.org") == ["HP:0001645"]
    assert scd.contributedToDeath is True and scd.onsetAge.value == 41 and scd.onsetAge.code == "a"
    assert h["Y-1"].deceasedAge.value == 41  # no date of death recorded: the age at death
    (hcm,) = h["Y-2"].condition
    assert _codes(hcm.code, "http://snomed.info/sct") == [SNOMED_HCM] and hcm.onsetAge.value == 52


def test_year_only_dates_and_vital_status():
    """Pure function on invented rows: year-precision birth date, death known to the day or not."""
    people = pd.DataFrame(
        [
            {"person": "X-1", "family": "X", "sex_at_birth": "male", "birth_date": "1938",
             "vital_status": "deceased", "death_date": "1979-06-02", "proband": False, "placeholder": False,
             "mother": None, "father": None, "given_name": "Invented", "family_name": "Person"},
            {"person": "X-2", "family": "X", "sex_at_birth": "female", "birth_date": "1940-02-01",
             "vital_status": "deceased", "death_date": None, "proband": False, "placeholder": False,
             "mother": None, "father": None, "given_name": None, "family_name": None},
            {"person": "X-3", "family": "X", "sex_at_birth": "unknown", "birth_date": "1965",
             "vital_status": "alive", "death_date": None, "proband": True, "placeholder": False,
             "mother": "X-2", "father": "X-1", "given_name": None, "family_name": None},
        ]
    )  # fmt: skip
    empty = {
        "variants": pd.DataFrame(columns=["family", "gene", "transcript", "hgvs_c", "hgvs_p", "zygosity",
                                          "acmg_class", "classified_on", "reason"]),
        "results": pd.DataFrame(columns=["person", "test_date", "test_type", "variant", "result", "lab",
                                         "report_reference"]),
        "assessments": pd.DataFrame(columns=["person", "assessment_date", "affected_status"]),
        "studies": pd.DataFrame(columns=["person", "study_date", "modality", "measure", "value", "unit"]),
        "measures": pd.DataFrame(columns=["code", "label", "unit", "loinc"]),
    }
    families = pd.DataFrame([{"family": "X", "condition": "hypertrophic cardiomyopathy"}])
    bundle = fhir.build_family_bundle("X", families, people, **empty)
    parsed = Bundle.model_validate_json(fhir.bundle_json(bundle))
    (patient,) = _resources(parsed, "Patient")  # only the proband is seen
    assert str(patient.birthDate) == "1965" and patient.gender == "unknown"
    assert patient.deceasedBoolean is False
    h = _histories(parsed)
    assert str(h["X-1"].bornDate) == "1938" and str(h["X-1"].deceasedDate) == "1979-06-02"
    assert _codes(h["X-1"].relationship, ROLE) == ["FTH"]
    assert h["X-2"].deceasedBoolean is True and _codes(h["X-2"].relationship, ROLE) == ["MTH"]
    assert "Invented" not in fhir.bundle_json(bundle)
    named = fhir.bundle_json(fhir.build_family_bundle("X", families, people, **empty, include_names=True))
    assert "Invented Person" in named


# ---------------------------------------------------------------------------
# stability and privacy
# ---------------------------------------------------------------------------


def test_ids_are_stable_across_two_exports(engine, exported, tmp_path):
    with reading(engine) as conn:
        export_fhir(conn, "HV02", tmp_path / "again.json")
    again = (tmp_path / "again.json").read_text(encoding="utf-8")
    assert again == exported["HV02"]["text"]
    first = [e.fullUrl for e in exported["HV02"]["bundle"].entry]
    assert [e.fullUrl for e in Bundle.model_validate_json(again).entry] == first
    # the id of a Patient depends on the person code only
    assert fhir.resource_id("Patient", "HV02-III-1") == fhir.resource_id("Patient", "HV02-III-1")
    assert fhir.resource_id("Patient", "HV02-III-1") != fhir.resource_id("Patient", "HV02-III-2")


@pytest.mark.parametrize("fam", DEMO_FAMILIES)
def test_no_names_in_the_output_by_default(exported, frames, fam):
    text_ = exported[fam]["text"]
    people = frames["people"][frames["people"]["family"] == fam]
    names = {n for col in ("given_name", "family_name") for n in people[col].dropna() if n}
    assert names
    for name in names:
        assert f'"{name}' not in text_ and f" {name}" not in text_, f"a name of family {fam} is in the file"
    for p in _resources(exported[fam]["bundle"], "Patient"):
        assert not p.name


def test_names_only_on_request(engine, tmp_path):
    with reading(engine) as conn:
        summary = export_fhir(conn, "HV01", tmp_path / "named.json", include_names=True)
    bundle = Bundle.model_validate_json((tmp_path / "named.json").read_text(encoding="utf-8"))
    assert summary["names_included"] is True
    assert all(p.name for p in _resources(bundle, "Patient"))


def test_profiles_are_claimed_only_on_request(engine, exported, tmp_path):
    assert all(o.meta is None for o in _resources(exported["HV01"]["bundle"], "Observation"))
    with reading(engine) as conn:
        export_fhir(conn, "HV01", tmp_path / "p.json", claim_profiles=True)
    bundle = Bundle.model_validate_json((tmp_path / "p.json").read_text(encoding="utf-8"))
    base = "http://hl7.org/fhir/uv/genomics-reporting/StructureDefinition/"
    assert [o.meta.profile for o in _genetic(bundle, "69548-6")][0] == [base + "variant"]
    assert _genetic(bundle, "diagnostic-implication")[0].meta.profile == [base + "diagnostic-implication"]


# ---------------------------------------------------------------------------
# the command function
# ---------------------------------------------------------------------------


def _cli() -> typer.Typer:
    app = typer.Typer()
    app.command("export-fhir")(export_fhir_command)

    @app.callback()
    def _root() -> None:
        """Test app."""

    return app


def test_command_writes_the_file_and_reports(demo_db, tmp_path):
    out = tmp_path / "HV03.json"
    try:
        r = CliRunner().invoke(_cli(), ["export-fhir", "HV03", "--out", str(out), "--db", demo_db, "--json"])
    finally:
        dispose_engines()
    assert r.exit_code == 0, r.output
    summary = json.loads(r.output)
    assert summary["family"] == "HV03" and summary["entries"] == len(Bundle.model_validate_json(out.read_text()).entry)


def test_command_help_has_an_example():
    r = CliRunner().invoke(_cli(), ["export-fhir", "--help"])
    assert r.exit_code == 0 and "Example:" in r.output


def test_unknown_family_is_a_user_error(engine, tmp_path):
    from tracker.errors import UserError

    with reading(engine) as conn, pytest.raises(UserError, match="XX99"):
        export_fhir(conn, "XX99", tmp_path / "x.json")
    assert not (tmp_path / "x.json").exists()


def test_export_with_fhir_writes_the_same_bundle_as_export_fhir(demo_db, tmp_path, capsys):
    # `tracker export --fhir FAMILY` is the same command as `tracker export-fhir FAMILY`:
    # the two files are byte-identical (resource ids are stable across exports).
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert main(["export", "--fhir", "HV02", "--out", str(a), "--db", demo_db, "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    assert main(["export-fhir", "HV02", "--out", str(b), "--db", demo_db]) == 0
    assert a.read_bytes() == b.read_bytes()
    assert summary["family"] == "HV02" and summary["entries"] == len(Bundle.model_validate_json(a.read_text()).entry)
    assert not summary["names_included"]


@pytest.mark.parametrize("extra", [["people"], ["--pseudonymise"], ["--min-cell", "3"]])
def test_export_with_fhir_refuses_csv_options_and_writes_nothing(demo_db, tmp_path, capsys, extra):
    out = tmp_path / "x.json"
    assert main(["export", *extra, "--fhir", "HV02", "--out", str(out), "--db", demo_db]) == 1
    err = capsys.readouterr().err
    assert err.startswith("error: --fhir") and err.count("\n") == 1
    assert not out.exists()


def test_export_names_option_without_fhir_is_refused(demo_db, tmp_path, capsys):
    out = tmp_path / "people.csv"
    assert main(["export", "people", "--include-names", "--out", str(out), "--db", demo_db]) == 1
    assert "need --fhir" in capsys.readouterr().err and not out.exists()
    assert main(["export", "--out", str(out), "--db", demo_db]) == 1
    assert "--fhir FAMILY" in capsys.readouterr().err
