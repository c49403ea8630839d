"""Import of DICOM echocardiography measurement reports (TID 5200 and TID 5300), built here with highdicom.

All patients, identifiers and values are invented.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sqlalchemy import text

from tracker.io import dicom_sr
from tracker.store.database import locate, make_engine

pytest.importorskip("highdicom")

FAMILIES = "family,condition,notes\nFAM-DS,hypertrophic cardiomyopathy,\n"
_HEADER = ("person,family,given_name,family_name,sex_at_birth,gender_identity,birth_date,vital_status,death_date,"
           "mother,father,placeholder,proband,twin_of,twin_type,adoption,contact_status,contact_status_date,notes,"
           "external_id\n")
PEOPLE = (
    _HEADER
    + "DS-1,FAM-DS,,,female,,1970-03-02,alive,,,,no,yes,,,,,,,H100234\n"
    + "DS-2,FAM-DS,,,male,,1998-07-15,alive,,,,no,no,,,,,,,H100777\n"
    + "DS-3,FAM-DS,,,male,,2001-01-20,alive,,,,no,no,,,,,,,\n"
)


def _code(value, scheme, meaning):
    from pydicom.sr.coding import Code

    return Code(value, scheme, meaning)


def _num(code, scheme, meaning, value, unit, site=None):
    import highdicom as hd

    item = hd.sr.NumContentItem(name=_code(code, scheme, meaning), value=value,
                                unit=_code(unit, "UCUM", unit), relationship_type="CONTAINS")  # fmt: skip
    if site is not None:
        mod = hd.sr.CodeContentItem(name=_code("363698007", "SCT", "Finding Site"), value=_code(*site),
                                    relationship_type="HAS CONCEPT MOD")  # fmt: skip
        item.ContentSequence = hd.sr.ContentSequence([mod])
    return item


def _container(code, scheme, meaning, children, root=False):
    import highdicom as hd

    c = hd.sr.ContainerContentItem(name=_code(code, scheme, meaning),
                                   relationship_type=None if root else "CONTAINS")  # fmt: skip
    c.ContentSequence = hd.sr.ContentSequence(children, is_root=False)
    return c


def _write_sr(path: Path, content, patient_id="H100234", study_date="20240611", size=None, weight=None) -> Path:
    """A Comprehensive SR document holding ``content`` (the root container), for an invented patient."""
    import highdicom as hd
    from pydicom.dataset import Dataset
    from pydicom.uid import generate_uid

    evidence = Dataset()  # the header of an invented ultrasound image the report refers to
    evidence.SOPClassUID = "1.2.840.10008.5.1.4.1.1.6.1"
    evidence.SOPInstanceUID = generate_uid()
    evidence.StudyInstanceUID = generate_uid()
    evidence.SeriesInstanceUID = generate_uid()
    evidence.PatientID = patient_id
    evidence.PatientName = "Invented^Patient"
    evidence.PatientBirthDate = "19700302"
    evidence.PatientSex = "F"
    evidence.StudyDate = study_date
    evidence.StudyTime = "101500"
    evidence.StudyID = "1"
    evidence.AccessionNumber = "A1"
    evidence.ReferringPhysicianName = ""
    evidence.Modality = "US"
    sr = hd.sr.ComprehensiveSR(evidence=[evidence], content=content, series_instance_uid=generate_uid(),
                               series_number=1, sop_instance_uid=generate_uid(), instance_number=1,
                               manufacturer="tracker tests", record_evidence=False)  # fmt: skip
    if size is not None:
        sr.PatientSize = size
    if weight is not None:
        sr.PatientWeight = weight
    sr.save_as(path)
    return path


def tid5200(path: Path, ivsd=("1.3", "cm"), **kw) -> Path:
    """An Adult Echocardiography Procedure Report (TID 5200) built from generic content items.

    highdicom has no class for TID 5200, so the tree is built from ContainerContentItem,
    NumContentItem and CodeContentItem.
    """
    patient = _container("121118", "DCM", "Patient Characteristics", [
        _num("8302-2", "LN", "Body height", 168, "cm"),
        _num("29463-7", "LN", "Body weight", 64, "kg"),
    ])  # fmt: skip
    lv = _container("121070", "DCM", "Findings", [
        _num("18154-5", "LN", "Interventricular Septum Diastolic Thickness", float(ivsd[0]), ivsd[1]),
        _num("29436-3", "LN", "Left Ventricle Internal End Diastolic Dimension", 46, "mm"),
        _num("18043-0", "LN", "Left Ventricular Ejection Fraction by US", 63, "%"),
        _num("399133000", "SCT", "Left Ventricular Peak Early Diastolic Tissue Velocity", 0.07, "m/s",
             site=("399093001", "SCT", "Medial Mitral Annulus")),
        _num("18087-7", "LN", "Left Ventricle Mass", 150, "g"),
    ])  # fmt: skip
    root = _container("125200", "DCM", "Adult Echocardiography Procedure Report", [patient, lv], root=True)
    return _write_sr(path, root, **kw)


def tid5300(path: Path, **kw) -> Path:
    """A Simplified Echo Procedure Report (TID 5300): pre-coordinated codes of CID 12300."""
    pre = _container("125301", "DCM", "Pre-coordinated Measurements", [
        _num("79969-2", "LN", "Interventricular septum diastolic dimension 2D", 12, "mm"),
        _num("79968-4", "LN", "Interventricular septum diastolic dimension MM", 13, "mm"),
        _num("80054-0", "LN", "Mitral lateral e-prime Vmax", 11, "cm/s"),
        _num("130690", "DCM", "LV Peak Systolic GLS Multiview Mean (Endocardial)", -19, "%"),
        _num("79984-1", "LN", "Left atrial end systolic volume biplane (MOD) / BSA", 31, "ml/m2"),
        _num("79921-3", "LN", "Tricuspid regurgitation Vmax", 2.4, "m/s"),
    ])  # fmt: skip
    root = _container("125200", "DCM", "Adult Echocardiography Procedure Report", [pre], root=True)
    return _write_sr(path, root, **kw)


@pytest.fixture
def store(db_url, run, tmp_path):
    (tmp_path / "families.csv").write_text(FAMILIES)
    (tmp_path / "people.csv").write_text(PEOPLE)
    for args in (("init",), ("import", "families", tmp_path / "families.csv"),
                 ("import", "people", tmp_path / "people.csv")):  # fmt: skip
        r = run(*args, db=db_url)
        assert r.code == 0, r
    return db_url


def _values(url: str) -> dict:
    engine = make_engine(locate(url))
    with engine.connect() as conn:
        rows = conn.execute(text(
            "SELECT p.code, s.study_date, m.measure_code, m.value, m.entered_value, m.entered_unit, s.height_cm, "
            "s.weight_kg FROM measurement m JOIN study s ON s.id = m.study_id JOIN person p ON p.id = s.person_id"
        )).all()  # fmt: skip
    engine.dispose()
    return {r[2]: r for r in rows}


def _counts(url: str) -> tuple:
    engine = make_engine(locate(url))
    with engine.connect() as conn:
        out = tuple(conn.execute(text(f"SELECT count(*) FROM {t}")).scalar()
                    for t in ("study", "measurement", "import_run", "audit_entry"))  # fmt: skip
    engine.dispose()
    return out


def test_tid5200_values_units_finding_site_and_body_size(store, run, tmp_path):
    report = tid5200(tmp_path / "echo5200.dcm")
    r = run("import", "dicom-sr", report, "--json", db=store)
    assert r.code == 0, r
    data = json.loads(r.out)["files"][0]
    assert data["person"] == "DS-1" and data["study_date"] == "2024-06-11"
    assert data["values_taken"] == 4 and data["values_left"] == 1
    assert "18087-7" in data["left"][0]["item"]  # LV mass: not in the code map, listed
    v = _values(store)
    # 1.3 cm = 13 mm (1 cm = 10 mm, SI); entered value and unit kept beside the stored one.
    assert v["ivsd"][3] == pytest.approx(13.0) and v["ivsd"][4] == pytest.approx(1.3) and v["ivsd"][5] == "cm"
    assert v["lvidd"][3] == pytest.approx(46.0)
    assert v["lvef_echo"][3] == pytest.approx(63.0)
    # Finding site Medial Mitral Annulus -> septal e'; 0.07 m/s = 7 cm/s.
    assert v["e_prime_septal"][3] == pytest.approx(7.0)
    assert v["ivsd"][6] == pytest.approx(168.0) and v["ivsd"][7] == pytest.approx(64.0)


def test_tid5300_ranked_codes_and_reimport_adds_nothing(store, run, tmp_path):
    report = tid5300(tmp_path / "echo5300.dcm", patient_id="H100777", size=1.81, weight=77)
    r = run("import", "dicom-sr", report, db=store)
    assert r.code == 0, r
    assert "TID 5300" in r.out and "took 5 of 6" in r.out
    assert "79968-4" in r.out and "ivsd is taken from" in r.out  # M-mode IVSd left for the 2D one
    v = _values(store)
    assert v["ivsd"][3] == pytest.approx(12.0)
    assert v["gls"][3] == pytest.approx(-19.0)
    assert v["lavi"][3] == pytest.approx(31.0)
    assert v["tr_vmax"][3] == pytest.approx(2.4)
    assert v["e_prime_lateral"][3] == pytest.approx(11.0)
    assert v["ivsd"][6] == pytest.approx(181.0)  # Patient's Size 1.81 m
    before = _counts(store)
    r = run("import", "dicom-sr", report, db=store)
    assert r.code == 0, r
    assert "added 0, 5 already stored" in r.out
    after = _counts(store)
    assert after[:2] == before[:2]  # no study, no value added
    assert after[2] == before[2] + 1 and after[3] == before[3] + 1  # the import itself is recorded


def test_audit_entry_carries_the_file_hash(store, run, tmp_path):
    import hashlib

    report = tid5300(tmp_path / "echo.dcm", patient_id="H100777")
    assert run("import", "dicom-sr", report, db=store).code == 0
    engine = make_engine(locate(store))
    with engine.connect() as conn:
        after = conn.execute(text("SELECT after FROM audit_entry WHERE action = 'import' ORDER BY id DESC")).first()[0]
    engine.dispose()
    assert json.loads(after)["sha256"] == hashlib.sha256(report.read_bytes()).hexdigest()


def test_report_for_the_wrong_patient_is_refused(store, run, tmp_path):
    report = tid5200(tmp_path / "other.dcm", patient_id="H100777")  # DS-2's hospital number
    before = _counts(store)
    r = run("import", "dicom-sr", report, "--person", "DS-1", db=store)
    assert r.code == 1
    assert "other.dcm" in r.err and "Patient ID" in r.err and "another patient" in r.err
    assert "H100777" not in r.err  # identifiers are private
    # A person without a stored identifier cannot take another person's report either.
    r = run("import", "dicom-sr", report, "--person", "DS-3", db=store)
    assert r.code == 1 and "external_id of person DS-2" in r.err
    # Unknown patient ID and no --person.
    r = run("import", "dicom-sr", tid5200(tmp_path / "x.dcm", patient_id="H999999"), db=store)
    assert r.code == 1 and "matches no person's external_id" in r.err and "H999999" not in r.err
    assert _counts(store) == before


def test_person_option_for_a_person_without_identifier(store, run, tmp_path):
    report = tid5300(tmp_path / "ds3.dcm", patient_id="H555000")
    r = run("import", "dicom-sr", report, "--person", "DS-3", db=store)
    assert r.code == 0, r
    assert "person DS-3" in r.out


def test_implausible_value_names_the_content_item_and_writes_nothing(store, run, tmp_path):
    good = tid5300(tmp_path / "good.dcm", patient_id="H100777")
    bad = tid5200(tmp_path / "bad.dcm", ivsd=("13", "cm"))  # 130 mm: a unit slip
    before = _counts(store)
    r = run("import", "dicom-sr", good, bad, db=store)
    assert r.code == 1
    line = [ln for ln in r.err.splitlines() if "18154-5" in ln][0]
    assert line.startswith("error: bad.dcm: content item 1.2.1 'Interventricular Septum Diastolic Thickness'")
    assert "outside the plausible range of ivsd" in line
    assert _counts(store) == before  # the good report is not written either


def test_non_sr_and_malformed_files(store, run, tmp_path):
    from pydicom.dataset import Dataset, FileMetaDataset
    from pydicom.uid import ExplicitVRLittleEndian, generate_uid

    ds = Dataset()
    ds.file_meta = FileMetaDataset()
    ds.file_meta.TransferSyntaxUID = ExplicitVRLittleEndian
    ds.SOPClassUID = "1.2.840.10008.5.1.4.1.1.6.1"  # an ultrasound image
    ds.SOPInstanceUID = generate_uid()
    ds.PatientID = "H100234"
    image = tmp_path / "image.dcm"
    ds.save_as(image, enforce_file_format=True)
    r = run("import", "dicom-sr", image, db=store)
    assert r.code == 1 and "image.dcm: is a DICOM file but not a structured report" in r.err

    text_file = tmp_path / "notes.dcm"
    text_file.write_text("not DICOM at all")
    r = run("import", "dicom-sr", text_file, db=store)
    assert r.code == 1 and "notes.dcm: is not a DICOM file" in r.err

    # A NUM item without its measured value.
    report = tid5300(tmp_path / "broken.dcm", patient_id="H100777")
    import pydicom

    sr = pydicom.dcmread(report)
    num = sr.ContentSequence[0].ContentSequence[0]
    del num.MeasuredValueSequence
    sr.save_as(report)
    r = run("import", "dicom-sr", report, db=store)
    assert r.code == 1
    assert "broken.dcm: content item 1.1.1 'Interventricular septum diastolic dimension 2D' (LN 79969-2): " \
           "has no measured value" in r.err

    # A structured report of another kind (root concept not an echo report).
    other = _container("126000", "DCM", "Imaging Measurement Report", [], root=True)
    r = run("import", "dicom-sr", _write_sr(tmp_path / "other.dcm", other), db=store)
    assert r.code == 1 and "is not an echocardiography procedure report" in r.err
    assert len(r.err.strip().splitlines()) == 1


def test_dry_run_writes_nothing(store, run, tmp_path):
    before = _counts(store)
    r = run("import", "dicom-sr", tid5200(tmp_path / "a.dcm"), "--dry-run", db=store)
    assert r.code == 0 and "dry run" in r.out
    assert _counts(store) == before


def test_code_map_is_verified_in_pydicom_and_names_catalogue_measures(sqlite_db, run):
    """Every [V] row: the code, its meaning and each listed CID as in pydicom's copy of PS3.16."""
    import pydicom.sr._concepts_dict as concepts

    index = {}
    for scheme, by_keyword in concepts.concepts.items():
        for codes in by_keyword.values():
            for code, (meaning, cids) in codes.items():
                index.setdefault((scheme, code), []).append((meaning, set(cids)))
    scheme_of = {"LN": "LN", "SCT": "SCT", "DCM": "DCM"}
    rows = dicom_sr.load_code_map()
    assert rows and all(r.tag in ("[V]", "[M]") for r in rows)
    for r in rows:
        found = index.get((scheme_of[r.scheme], r.code), [])
        if r.tag == "[V]":
            assert any(m == r.meaning and set(r.cids) <= c for m, c in found), r
        if r.finding_site:
            sites = index.get(("SCT", r.finding_site), [])
            assert any(12235 in c for _m, c in sites), r  # CID 12235 Mitral Valve Anatomic Site
    assert run("init", db=sqlite_db).code == 0
    measures = json.loads(run("measures", "--json", db=sqlite_db).out)
    catalogue = {m["code"]: m for m in (measures if isinstance(measures, list) else measures["measures"])}
    for r in rows:
        assert r.measure in catalogue and not catalogue[r.measure]["derived"], r
        assert catalogue[r.measure]["modality"] == "echo", r


def test_external_id_is_one_person_each_and_private(store, run, tmp_path):
    # Another person with a stored identifier, and two rows of one file with one identifier.
    extra = tmp_path / "more.csv"
    extra.write_text(_HEADER + "DS-4,FAM-DS,,,female,,2003-05-05,alive,,,,no,no,,,,,,,H100234\n"
                     + "DS-5,FAM-DS,,,female,,2004-05-05,alive,,,,no,no,,,,,,,H200200\n"
                     + "DS-6,FAM-DS,,,female,,2005-05-05,alive,,,,no,no,,,,,,,H200200\n")  # fmt: skip
    r = run("import", "people", extra, db=store)
    assert r.code == 1
    assert "more.csv:2: column 'external_id': belongs to another person in the database" in r.err
    assert "more.csv:4: column 'external_id': is given to another row of this file" in r.err
    assert "H100234" not in r.err and "H200200" not in r.err
    # Exported in the people layout (import -> export -> import is exact).
    out = tmp_path / "people-out.csv"
    assert run("export", "people", "--out", out, db=store).code == 0
    import csv

    exported = {r["person"]: r["external_id"] for r in csv.DictReader(out.open())}
    assert exported == {"DS-1": "H100234", "DS-2": "H100777", "DS-3": ""}


def test_csv_kinds_take_one_file_and_no_person_option(store, run, tmp_path):
    (tmp_path / "f2.csv").write_text(FAMILIES)
    r = run("import", "families", tmp_path / "f2.csv", tmp_path / "f2.csv", db=store)
    assert r.code == 1 and "give one CSV file" in r.err
    r = run("import", "families", tmp_path / "f2.csv", "--person", "DS-1", db=store)
    assert r.code == 1 and "option --person" in r.err


def test_downgrade_sets_external_ids_aside_and_upgrade_puts_them_back(store):
    from tracker.store import migrate

    engine = make_engine(locate(store))
    migrate.downgrade(engine, "0008")
    with engine.connect() as conn:
        assert "external_id" not in {c["name"] for c in __import__("sqlalchemy").inspect(conn).get_columns("person")}
        kept = conn.execute(text("SELECT count(*) FROM person_external_id_kept")).scalar()
    assert kept == 2
    migrate.upgrade(engine)
    with engine.connect() as conn:
        ids = dict(conn.execute(text("SELECT code, external_id FROM person")).all())
    engine.dispose()
    assert ids == {"DS-1": "H100234", "DS-2": "H100777", "DS-3": None}


def test_two_reports_of_one_study_with_different_values_are_refused_before_writing(store, run, tmp_path):
    a = tid5200(tmp_path / "first.dcm", ivsd=("1.3", "cm"))
    b = tid5200(tmp_path / "second.dcm", ivsd=("14", "mm"))
    before = _counts(store)
    r = run("import", "dicom-sr", a, b, db=store)
    assert r.code == 1
    assert "second.dcm: content item 1.2.1 'Interventricular Septum Diastolic Thickness' (LN 18154-5) -> ivsd: " \
           "differs from content item 1.2.1" in r.err and "of first.dcm" in r.err
    assert _counts(store) == before
    # The same values twice in one import: taken once.
    r = run("import", "dicom-sr", a, tid5200(tmp_path / "copy.dcm"), db=store)
    assert r.code == 0, r
    assert "copy.dcm" in r.out and "added 0, 4 already stored" in r.out


def test_edit_external_id_is_private_and_unique(store, run):
    r = run("edit", "person", "DS-3", "--set", "external_id=H300300", "--reason", "hospital number added", db=store)
    assert r.code == 0, r
    assert "H300300" not in r.out and "external_id changed" in r.out
    r = run("edit", "person", "DS-3", "--set", "external_id=H100234", "--reason", "typo", db=store)
    assert r.code == 1 and "external_id: belongs to another person" in r.err and "H100234" not in r.err


def test_pseudonymised_extract_leaves_external_id_out():
    import datetime as dt

    import pandas as pd

    from conftest import MINI
    from tracker.io import pseudonymise as ps
    from tracker.io.layouts import LAYOUTS, RECORD_KINDS

    frames = {}
    for kind in RECORD_KINDS:  # the files of tests/data/mini (it holds no contact log)
        df = pd.read_csv(MINI / LAYOUTS[kind].file_name, dtype=str, keep_default_na=False)
        frames[kind] = df.replace({"": None}).astype(object)
    assert "external_id" in frames["people"].columns
    frames["people"]["external_id"] = [f"H9{i:05d}" for i in range(len(frames["people"]))]
    ex = ps.pseudonymise(frames, "k3y-for-tests-only-0123456789abcdef0123456789", today=dt.date(2025, 1, 1))
    assert "external_id" in ex.dropped["people"] and "external_id" not in ex.frames["people"].columns
    assert "H900001" not in "".join(ps.csv_text(f) for f in ex.frames.values())


def test_study_date_before_birth_names_the_attribute(store, run, tmp_path):
    report = tid5300(tmp_path / "early.dcm", patient_id="H100777", study_date="19950101")  # DS-2 born 1998
    r = run("import", "dicom-sr", report, db=store)
    assert r.code == 1
    assert r.err.strip() == ("error: early.dcm: attribute Study Date (0008,0020): "
                             "is before the person's date of birth")
