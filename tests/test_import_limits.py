"""Import limits: ASCII digits only, pedigree plausibility, the store's column lengths, regular files only,
and messages that never repeat a private cell (on SQLite and, when configured, PostgreSQL).

Every family, name and date here is invented.
"""

from __future__ import annotations

import datetime as dt
import os
import signal
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest

from conftest import dump
from tracker.domain.dates import parse_partial_date
from tracker.errors import UserError
from tracker.io.columns import MAX_TEXT, parse
from tracker.io.layouts import LAYOUTS

TODAY = dt.date(2026, 12, 1)
TEXT_KINDS = ("text", "code", "regex", "choice")  # cells held as text by the store
PEOPLE_HEADER = ",".join(LAYOUTS["people"].names)
NAME, SURNAME, BIRTH = "Ysolde", "Tremarrow", "1987-03-19"  # distinctive invented name and date

AR = str.maketrans("0123456789", "٠١٢٣٤٥٦٧٨٩")  # Arabic-Indic digits
FW = str.maketrans("0123456789", "０１２３４５６７８９")  # full-width digits
EA = str.maketrans("0123456789", "۰۱۲۳۴۵۶۷۸۹")  # Extended Arabic-Indic digits


def _person(code="T1-20", birth=BIRTH, mother="T1-03", father="T1-04", vital="alive", death="",
            contact_date="2024-01-01", adoption="", given=NAME, surname=SURNAME) -> str:  # fmt: skip
    cells = dict.fromkeys(LAYOUTS["people"].names, "")
    cells.update(person=code, family="FAM-T1", given_name=given, family_name=surname, sex_at_birth="female",
                 birth_date=birth, vital_status=vital, death_date=death, mother=mother, father=father,
                 placeholder="no", proband="no", adoption=adoption, contact_status="contactable",
                 contact_status_date=contact_date)  # fmt: skip
    return ",".join(cells.values())


def _write(tmp_path: Path, name: str, text: str) -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _people_file(tmp_path, *rows, name="people.csv") -> Path:
    return _write(tmp_path, name, PEOPLE_HEADER + "\n" + "\n".join(rows) + "\n")


def _refused(r, fragment: str, *private: str) -> str:
    """One error line holding ``fragment``, exit 1, no traceback and none of ``private``."""
    assert r.code == 1, r
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0], r.err
    shown = r.out + r.err
    assert "Traceback" not in shown
    for p in private:
        assert p not in shown, (p, shown)
    return lines[0]


# --------------------------------------------------------------------------- ASCII digits

DATE_COLUMNS = [(k, c) for k, lay in LAYOUTS.items() for c in lay.columns if c.kind in ("date", "partial_date")]
NUMBER_COLUMNS = [(k, c) for k, lay in LAYOUTS.items() for c in lay.columns if c.kind in ("number", "years")]
PATTERN_COLUMNS = [(k, c) for k, lay in LAYOUTS.items() for c in lay.columns if c.kind in ("regex", "code")]
VALID = {"transcript": "NM_000256.3", "hgvs_c": "c.1504C>T", "hgvs_p": "p.(Arg502Trp)", "gene": "MYH7",
         "variant": "NM_000256.3:c.1504C>T"}  # fmt: skip


@pytest.mark.parametrize("table", [AR, FW, EA], ids=["arabic-indic", "full-width", "extended-arabic-indic"])
@pytest.mark.parametrize("kind,col", DATE_COLUMNS, ids=[f"{k}.{c.name}" for k, c in DATE_COLUMNS])
def test_dates_take_ascii_digits_only(kind, col, table):
    for text in ("2020-01-01", "2999-01-01", "2500"):
        cells = pd.Series([text.translate(table)], index=[2], dtype=object)
        got = parse(col, cells, TODAY)
        assert got.errors[2] is not None and "not an ISO 8601 date" in got.errors[2], (col.name, text)
        assert got.values[2] is None


@pytest.mark.parametrize("table", [AR, FW], ids=["arabic-indic", "full-width"])
@pytest.mark.parametrize("kind,col", NUMBER_COLUMNS, ids=[f"{k}.{c.name}" for k, c in NUMBER_COLUMNS])
def test_numbers_take_ascii_digits_only(kind, col, table):
    cells = pd.Series(["42".translate(table), "1.5".translate(table)], index=[2, 3], dtype=object)
    got = parse(col, cells, TODAY)
    assert got.errors.notna().all(), list(got.errors)
    assert got.values.isna().all()


@pytest.mark.parametrize("table", [AR, FW], ids=["arabic-indic", "full-width"])
@pytest.mark.parametrize("kind,col", PATTERN_COLUMNS, ids=[f"{k}.{c.name}" for k, c in PATTERN_COLUMNS])
def test_codes_and_hgvs_take_ascii_digits_only(kind, col, table):
    good = VALID.get(col.name, "T1-01")
    assert parse(col, pd.Series([good], index=[2], dtype=object), TODAY).errors[2] is None
    other = good.translate(table)
    assert other != good
    assert parse(col, pd.Series([other], index=[2], dtype=object), TODAY).errors[2] is not None


@pytest.mark.parametrize("text", ["٢٩٩٩", "２５００-０１-０１", "2020-０１-01"])
def test_partial_dates_of_the_domain_take_ascii_digits_only(text):
    with pytest.raises(ValueError):
        parse_partial_date(text)


def test_an_hgvs_position_longer_than_any_chromosome_is_refused():
    col = next(c for c in LAYOUTS["variants"].columns if c.name == "hgvs_c")
    # 248,956,422 bp (chromosome 1, GRCh38): nine digits at most.
    ok = parse(col, pd.Series(["c.248956422C>T"], index=[2], dtype=object), TODAY)
    bad = parse(col, pd.Series(["c.1234567890C>T"], index=[2], dtype=object), TODAY)
    assert ok.errors[2] is None and bad.errors[2] is not None


# --------------------------------------------------------------------------- pedigree plausibility
# The mini families: T1-03 born 1968-04-12 (mother), T1-04 born 1966-09-30 (father), T1-02 born 1942 and
# died 2015-06-01, T1-01 born 1940 and died in 2001 (year-only).


@pytest.mark.parametrize("row,column,fragment", [
    (_person(birth="1972-06-01", father=""), "mother", "under 5 years old"),
    (_person(birth="1968-12-01", mother=""), "father", "under 9 years old"),
    (_person(birth="2020-01-01", mother="T1-02", father=""), "birth_date", "after the death of the mother"),
    (_person(birth="2003-06-01", mother="", father="T1-01"), "birth_date", "after the death of the father"),
    (_person(birth="2003", mother="", father="T1-01"), "birth_date", "after the death of the father"),
    (_person(contact_date="1986-01-01"), "contact_status_date", "before the date of birth"),
    (_person(birth="1987", contact_date="1986-12-31"), "contact_status_date", "before the date of birth"),
    (_person(birth="1972", father=""), "mother", "under 5 years old"),
], ids=["mother-4", "father-2", "after-mother-death", "after-father-death", "year-after-father-death",
        "contact-before-birth", "contact-before-birth-year", "mother-4-year"])  # fmt: skip
def test_impossible_pedigree_dates_are_refused(row, column, fragment, loaded_db, run, tmp_path):
    before = dump(loaded_db)
    line = _refused(run("import", "people", _people_file(tmp_path, row), db=loaded_db), fragment, NAME, SURNAME,
                    BIRTH)  # fmt: skip
    assert f"people.csv:2: column '{column}'" in line, line
    assert dump(loaded_db) == before


def test_a_mother_over_80_is_refused(sqlite_db, run, tmp_path):
    assert run("init", db=sqlite_db).code == 0
    fam = _write(tmp_path, "families.csv", "family,condition,notes\nFAM-T1,hypertrophic cardiomyopathy,\n")
    assert run("import", "families", fam, db=sqlite_db).code == 0
    rows = [_person(code="T1-31", birth="1990", mother="T1-30", father=""),
            _person(code="T1-30", birth="1908", mother="", father="")]  # 81 on every day  # fmt: skip
    _refused(run("import", "people", _people_file(tmp_path, *rows), db=sqlite_db), "over 80 years old", NAME)


@pytest.mark.parametrize("row", [
    _person(birth="2002-09-01", mother="", father="T1-01"),  # within one pregnancy of the end of 2001
    _person(birth="2002", mother="", father="T1-01"),  # some day of 2002 is within the window
    _person(birth="2015-12-01", mother="T1-02", father=""),  # after the mother's death, within the window
    _person(birth="1973", father=""),  # the mother is 5 on some day of 1973
    _person(birth="1975-09-30", mother=""),  # the father is 9 on the day
    _person(birth="1987", contact_date="1987-01-01"),  # the same year: possible
    _person(birth="1970-01-01", father="", adoption="in"),  # adopted in: the links may be adoptive parents
], ids=["window-day", "window-year", "mother-window", "mother-5-year", "father-9-day", "contact-same-year",
        "adopted-in"])  # fmt: skip
def test_possible_pedigree_dates_are_accepted(row, loaded_db, run, tmp_path):
    r = run("import", "people", _people_file(tmp_path, row), db=loaded_db)
    assert r.code == 0, r


# --------------------------------------------------------------------------- the store's column lengths


def test_every_text_column_of_every_layout_is_limited_by_its_store_column():
    from tracker.io.layouts import STORED_AS, stored_length

    for kind, layout in LAYOUTS.items():
        for col in layout.columns:
            if col.kind not in TEXT_KINDS:
                continue
            where = STORED_AS[kind][col.name]
            limit = stored_length(where)
            assert col.max_length == min(limit or MAX_TEXT, MAX_TEXT), (kind, col.name)
            for choice in col.choices:
                assert len(choice) <= col.max_length, (kind, col.name, choice)


LIMITED = [(k, c) for k, lay in LAYOUTS.items() for c in lay.columns if c.kind in TEXT_KINDS]


@pytest.mark.parametrize("kind,col", LIMITED, ids=[f"{k}.{c.name}" for k, c in LIMITED])
def test_a_cell_longer_than_its_store_column_is_refused(kind, col):
    good = VALID.get(col.name, "T1-01" if col.kind == "code" else (col.choices or ("x",))[0])
    long = good + "1" * (col.max_length + 1 - len(good))
    got = parse(col, pd.Series([long, good], index=[2, 3], dtype=object), TODAY)
    assert got.errors[2] is not None, (kind, col.name)
    if col.kind in ("text", "regex"):
        assert got.errors[2] == f"is longer than {col.max_length} characters"
    assert got.errors[3] is None


@pytest.mark.parametrize("name,text,column,limit", [
    ("variants.csv", "family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason\n"
     "FAM-T1,MYBPC3,NM_" + "0" * 4995 + ".3,c.1504C>T,,heterozygous,pathogenic,2023-01-01,\n", "transcript", 40),
    ("variants.csv", "family,gene,transcript,hgvs_c,hgvs_p,zygosity,acmg_class,classified_on,reason\n"
     "FAM-T1,MYBPC3,NM_000256.3,c." + "1" * 300 + "C>T,,heterozygous,pathogenic,2023-01-01,\n", "hgvs_c", 200),
    ("people.csv", PEOPLE_HEADER + "\n" + _person(given=NAME * 40) + "\n", "given_name", 200),
], ids=["transcript", "hgvs-position", "given-name"])  # fmt: skip
def test_too_long_cells_are_refused_the_same_on_every_backend(name, text, column, limit, loaded_db, run, tmp_path):
    kind = "variants" if name == "variants.csv" else "people"
    before = dump(loaded_db)
    line = _refused(run("import", kind, _write(tmp_path, name, text), db=loaded_db),
                    f"column '{column}': is longer than {limit} characters", NAME, BIRTH)  # fmt: skip
    assert line.startswith(f"error: {name}:2:"), line
    assert dump(loaded_db) == before


def test_a_user_name_longer_than_the_store_holds_is_refused(loaded_db, run, tmp_path):
    before = dump(loaded_db)
    fam = _write(tmp_path, "families.csv", "family,condition,notes\nFAM-T9,hypertrophic cardiomyopathy,\n")
    _refused(run("import", "families", fam, "--user", "u" * 101, db=loaded_db), "--user: longer than 100")
    assert dump(loaded_db) == before


# --------------------------------------------------------------------------- regular files only


@contextmanager
def _no_hang(seconds: int = 20):
    """A safety net: a read that blocks fails the test instead of hanging the run (no timing is checked)."""

    def stop(signum, frame):
        raise AssertionError("the read blocked")

    old = signal.signal(signal.SIGALRM, stop)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


@pytest.fixture
def fifo(tmp_path) -> Path:
    p = tmp_path / "people.csv"
    os.mkfifo(p)
    return p


def test_a_pipe_is_refused_unread(fifo, loaded_db, run):
    with _no_hang():
        _refused(run("import", "people", fifo, db=loaded_db), "people.csv: is a pipe (FIFO), not a regular file")


def test_a_pipe_in_a_folder_is_refused_unread(fifo, loaded_db, run):
    before = dump(loaded_db)
    with _no_hang():
        _refused(run("import", "all", fifo.parent, db=loaded_db), "is a pipe (FIFO)")
    assert dump(loaded_db) == before


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
def test_a_device_is_refused_unread(loaded_db, run, tmp_path):
    link = tmp_path / "studies.csv"
    link.symlink_to("/dev/zero")
    with _no_hang():
        _refused(run("import", "studies", Path("/dev/zero"), db=loaded_db), "zero: is a device")
        _refused(run("import", "studies", link, db=loaded_db), "studies.csv: is a device")


def test_settings_key_files_templates_and_rule_sets_refuse_special_files(fifo, tmp_path):
    from tracker.outputs.letter import read_template
    from tracker.rules import RuleSetError, load_rule_set_file
    from tracker.settings import Privacy, load_settings

    with _no_hang():
        for special in (fifo, Path("/dev/zero")):
            with pytest.raises(UserError, match="not a regular file"):
                load_settings(special)
            with pytest.raises(UserError, match="not a regular file"):
                read_template(special)
            with pytest.raises(UserError, match="not a regular file"):
                Privacy(pseudonym_key_file=str(special)).key()
            with pytest.raises(RuleSetError, match="not a regular file"):
                load_rule_set_file(special)


def test_a_file_replaced_by_a_pipe_after_the_check_is_refused(fifo, monkeypatch):
    from tracker.regular_file import NotReadable, open_regular, read_regular

    regular = os.stat(__file__)
    real_stat = os.stat
    monkeypatch.setattr(os, "stat", lambda p, *a, **k: regular if str(p) == str(fifo) else real_stat(p, *a, **k))
    with _no_hang():
        with pytest.raises(NotReadable, match="pipe"):
            open_regular(fifo)
    monkeypatch.undo()
    assert read_regular(__file__).startswith(b'"""')


# --------------------------------------------------------------------------- private cells in every message


def test_a_file_without_its_header_never_shows_its_cells(loaded_db, run, tmp_path):
    p = _write(tmp_path, "people.csv", _person() + "\n" + _person(code="T1-21") + "\n")
    line = _refused(run("import", "people", p, db=loaded_db), "is not a header row for people", NAME, SURNAME,
                    BIRTH)  # fmt: skip
    assert line.startswith("error: people.csv:1:"), line


@pytest.mark.parametrize("cell", [NAME, BIRTH, f"{NAME} {SURNAME}"])
def test_an_unknown_header_cell_that_is_no_column_name_is_shown_by_position(cell, loaded_db, run, tmp_path):
    p = _write(tmp_path, "people.csv", PEOPLE_HEADER + f",{cell}\n" + _person() + ",x\n")
    n = len(LAYOUTS["people"].names) + 1
    _refused(run("import", "people", p, db=loaded_db), f"column 'header cell {n}': unknown column", NAME, BIRTH)


def test_a_database_error_never_shows_the_row(loaded_db, run, tmp_path, monkeypatch):
    """Whatever the store says about a refused row (it may quote names and dates), only its kind is shown."""
    from sqlalchemy.exc import IntegrityError

    from tracker.io import csv_import

    def refuse(conn, table, columns, rows):
        raise IntegrityError("INSERT INTO person ...", rows[0],
                             Exception(f"Failing row contains ({NAME}, {SURNAME}, {BIRTH})\nDETAIL: {NAME}"))

    monkeypatch.setattr(csv_import, "_bulk_insert", refuse)
    before = dump(loaded_db)
    _refused(run("import", "people", _people_file(tmp_path, _person()), db=loaded_db),
             "the database refused the data", NAME, SURNAME, BIRTH)  # fmt: skip
    assert dump(loaded_db) == before


def test_a_server_length_error_never_shows_the_row(loaded_db, run, tmp_path, monkeypatch):
    """PostgreSQL refuses an over-long value itself (with the check switched off here): still one line."""
    if "postgresql" not in loaded_db:
        pytest.skip("SQLite does not enforce column lengths")
    people = LAYOUTS["people"]
    loose = replace(people, columns=tuple(replace(c, max_length=MAX_TEXT) for c in people.columns))
    monkeypatch.setitem(LAYOUTS, "people", loose)
    before = dump(loaded_db)
    _refused(run("import", "people", _people_file(tmp_path, _person(given=NAME * 40)), db=loaded_db),
             "the database refused the data", NAME, SURNAME, BIRTH)  # fmt: skip
    assert dump(loaded_db) == before
