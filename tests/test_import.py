"""CSV import: the malformed-input corpus, idempotency, and the import -> export -> import round trip."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from conftest import MINI, dump

BAD = Path(__file__).parent / "bad_inputs"
CASES = tomllib.loads((BAD / "manifest.toml").read_text(encoding="utf-8"))["case"]


def test_corpus_is_large_enough():
    assert len(CASES) >= 50
    assert len({c["file"] for c in CASES}) == len(CASES)
    assert all((BAD / c["file"]).exists() for c in CASES)


@pytest.mark.parametrize("case", CASES, ids=[c["file"] for c in CASES])
def test_bad_input_is_refused_with_one_line_and_nothing_written(case, loaded_db, run):
    before = dump(loaded_db)
    r = run("import", case["kind"], BAD / case["file"], db=loaded_db)
    assert r.code == 1, r
    lines = r.err.strip().splitlines()
    assert len(lines) == 1, r.err
    line = lines[0]
    assert "Traceback" not in r.err
    assert line.startswith(f"error: {case['file']}"), line
    if "row" in case:
        assert line.startswith(f"error: {case['file']}:{case['row']}:"), line
    if "column" in case:
        assert f"column '{case['column']}'" in line, line
    assert case["message"] in line, line
    assert dump(loaded_db) == before


def test_dry_run_writes_nothing(db_url, run):
    assert run("init", db=db_url).code == 0
    before = dump(db_url)
    r = run("import", "all", MINI, "--dry-run", db=db_url)
    assert r.code == 0, r
    assert "would add 10" in r.out and "nothing was written" in r.out
    assert dump(db_url) == before


def test_importing_twice_adds_nothing(loaded_db, run):
    # The second import is recorded (import_run, audit_entry) but adds no record.
    logs = ("import_run", "audit_entry")
    before = {k: v for k, v in dump(loaded_db).items() if k not in logs}
    r = run("import", "all", MINI, "--json", db=loaded_db)
    assert r.code == 0, r
    import json

    files = json.loads(r.out)["files"]
    assert all(f["rows_added"] == 0 for f in files)
    assert sum(f["rows_already_stored"] for f in files) == sum(f["rows_read"] for f in files)
    after = {k: v for k, v in dump(loaded_db).items() if k not in logs}
    assert after == before


def test_round_trip_is_exact(loaded_db, run, tmp_path, db_url):
    """import -> export -> import into an empty database gives the same records and the same files."""
    first = tmp_path / "first"
    assert run("export", "all", "--out", first, db=loaded_db).code == 0
    second_db = str(tmp_path / "second.sqlite")
    assert run("init", db=second_db).code == 0
    assert run("import", "all", first, db=second_db).code == 0, run
    second = tmp_path / "second"
    assert run("export", "all", "--out", second, db=second_db).code == 0
    for f in sorted(first.iterdir()):
        assert f.read_bytes() == (second / f.name).read_bytes(), f.name

    # Row ids may differ (rows arrive in another order); every record and value must not.
    assert _content(loaded_db) == _content(second_db)


def _content(url):
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(url))
    with reading(engine) as conn:
        # When and by whom a contact-log row was entered is the import's own (the audit trail keeps it).
        frames = {kind: load(conn).drop(columns=["entered_at", "entered_by"], errors="ignore").to_dict("records")
                  for kind, load in repo.LOADERS.items()}  # fmt: skip
        frames["stored values"] = repo.load_studies(conn, entered=False).to_dict("records")
        frames["catalogue"] = repo.load_measures(conn).to_dict("records")
    engine.dispose()
    return repr(frames)


def test_exported_files_match_the_input_files(loaded_db, run, tmp_path):
    out = tmp_path / "out"
    assert run("export", "all", "--out", out, db=loaded_db).code == 0
    for name in ("families.csv", "people.csv", "variants.csv", "genetic_results.csv", "assessments.csv"):
        assert (out / name).read_text().splitlines() == (MINI / name).read_text().splitlines(), name


def test_units_are_converted_and_the_entered_value_kept(loaded_db):
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(loaded_db))
    with reading(engine) as conn:
        stored = repo.load_studies(conn, entered=False)
        entered = repo.load_studies(conn, entered=True)
    engine.dispose()
    pick = lambda f: f[(f["person"] == "T1-03") & (f["measure"] == "lvpwd")].iloc[0]  # noqa: E731
    assert pick(stored)["value"] == pytest.approx(10.0) and pick(stored)["unit"] == "mm"
    assert pick(entered)["value"] == 1.0 and pick(entered)["unit"] == "cm"
    e = stored[(stored["person"] == "T1-06") & (stored["measure"] == "e_prime_septal")].iloc[0]
    assert e["value"] == pytest.approx(12.0) and e["unit"] == "cm/s"


def test_formula_cells_are_neutralised_on_export_and_restored_on_import(db_url, run, tmp_path):
    assert run("init", db=db_url).code == 0
    src = tmp_path / "families.csv"
    src.write_text('family,condition,notes\nFAM-X,hypertrophic cardiomyopathy,"=HYPERLINK(""x"")"\n')
    assert run("import", "families", src, db=db_url).code == 0
    out = tmp_path / "out.csv"
    assert run("export", "families", "--out", out, db=db_url).code == 0
    text = out.read_text()
    assert "'=HYPERLINK" in text
    db2 = str(tmp_path / "again.sqlite")
    assert run("init", db=db2).code == 0
    assert run("import", "families", out, db=db2).code == 0
    assert dump(db2)["family"][0][3] == '=HYPERLINK("x")'


def test_a_file_with_many_mistakes_lists_each(loaded_db, run, tmp_path):
    bad = tmp_path / "studies.csv"
    bad.write_text(
        "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
        "T1-06,2025-01-10,echo,,175,65,mwt_echo,1.4,mm\n"
        "T1-06,2025-01-11,echo,,175,65,mwt_echo,14,inch\n"
    )
    r = run("import", "studies", bad, db=loaded_db)
    assert r.code == 1
    lines = r.err.strip().splitlines()
    assert lines[0].startswith("error: studies.csv:2: column 'value'")
    assert lines[1].startswith("error: studies.csv:3: column 'unit'")
    assert lines[-1] == "error: 2 problems; nothing was written"


def test_values_land_on_their_study_whether_stored_before_or_new(loaded_db, run, tmp_path):
    # A later file adds a value to a study stored by the first import (T1-06, 2022-05-03 echo)
    # and two new studies: every value must sit on the study of its own row.
    head = "person,study_date,modality,site,height_cm,weight_kg,measure,value,unit\n"
    f = tmp_path / "studies.csv"
    f.write_text(head + "T1-06,2022-05-03,echo,Invented Vale Hospital,165,52,lvpwd,9.0,mm\n"
                 "T1-06,2025-05-04,echo,,,,mwt_echo,12.5,mm\n"
                 "T1-06,2025-05-04,echo,,,,ivsd,12.5,mm\n"
                 "T1-06,2025-06-01,cmr,,,,mwt_cmr,13.0,mm\n", encoding="utf-8")  # fmt: skip
    r = run("import", "studies", f, db=loaded_db)
    assert r.code == 0, r
    from sqlalchemy import select

    from tracker.store.database import locate, make_engine
    from tracker.store.models import Measurement, Person, Study

    engine = make_engine(locate(loaded_db))
    with engine.connect() as conn:
        got = set(conn.execute(
            select(Person.code, Study.study_date, Study.modality, Measurement.measure_code, Measurement.value)
            .join(Study, Study.person_id == Person.id).join(Measurement, Measurement.study_id == Study.id)
            .where(Person.code == "T1-06")).all())  # fmt: skip
        n_studies = len(conn.execute(select(Study.id).join(Person).where(Person.code == "T1-06")).all())
    engine.dispose()
    import datetime as dt

    assert ("T1-06", dt.date(2022, 5, 3), "echo", "lvpwd", 9.0) in got
    assert ("T1-06", dt.date(2025, 5, 4), "echo", "mwt_echo", 12.5) in got
    assert ("T1-06", dt.date(2025, 5, 4), "echo", "ivsd", 12.5) in got
    assert ("T1-06", dt.date(2022, 5, 3), "echo", "mwt_echo", 9.6) in got  # stored before, untouched
    assert ("T1-06", dt.date(2025, 6, 1), "cmr", "mwt_cmr", 13.0) in got
    assert len(got) == 4 + 1 + 3  # T1-06's four stored values and the four new ones
    assert n_studies == 6  # four stored before, two new
