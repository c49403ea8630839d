"""The pseudonymised research extract: keyed codes, dates as ages or shifted, no free text.

Codes are checked against HMAC-SHA256 computed here directly with the standard library's
``hmac.new`` (HMAC: RFC 2104, FIPS 198-1), never through the module under test.
"""

from __future__ import annotations

import csv
import datetime as dt
import hashlib
import hmac
import json
from pathlib import Path

import pandas as pd
import pytest

from conftest import MINI
from tracker.errors import UserError
from tracker.io import pseudonymise as ps
from tracker.io.layouts import LAYOUTS, RECORD_KINDS
from tracker.settings import parse_settings

KEY = "k3y-for-tests-only-0123456789abcdef0123456789"  # invented; 45 characters
OTHER_KEY = "another-test-key-fedcba9876543210fedcba98765"


def hmac_code(key: str, prefix: str, domain: str, code: str, n_hex: int) -> str:
    """The documented code, computed independently: prefix + hex HMAC-SHA256 (RFC 2104, FIPS 198-1)."""
    digest = hmac.new(key.encode("utf-8"), f"{domain}:{code}".encode("utf-8"), hashlib.sha256).hexdigest()
    return prefix + digest[:n_hex]


def P(code: str, key: str = KEY) -> str:
    return hmac_code(key, "P-", "person", code, 12)


def F(code: str, key: str = KEY) -> str:
    return hmac_code(key, "F-", "family", code, 10)


def _settings(tmp_path: Path, key: str | None = KEY, extra: str = "") -> Path:
    s = tmp_path / "settings.toml"
    body = ""
    if key is not None:
        (tmp_path / "pseudonym.key").write_text(key + "\n", encoding="utf-8")
        body = '[privacy]\npseudonym_key_file = "pseudonym.key"\n' + extra
    s.write_text(body, encoding="utf-8")
    return s


def _extract(run, db, tmp_path, *args, key: str | None = KEY, name: str = "ext"):
    settings = _settings(tmp_path, key)
    out = tmp_path / name
    r = run("export", "all", "--out", out, "--pseudonymise", "--settings", settings, *args, db=db)
    return r, out


def _rows(folder: Path, file: str) -> list[dict]:
    with (folder / file).open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def _mini(name: str) -> list[dict]:
    with (MINI / name).open(encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


# --------------------------------------------------------------------------- codes


def test_codes_are_the_documented_hmac(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 0, r
    people = {row["person"]: row for row in _rows(out, "people.csv")}
    expected = {P(p["person"]) for p in _mini("people.csv")}
    assert set(people) == expected
    # A hand-picked case, the proband of FAM-T1.
    assert people[P("T1-03")]["family"] == F("FAM-T1")
    assert {row["family"] for row in _rows(out, "families.csv")} == {F("FAM-T1"), F("FAM-T2")}
    study_people = {row["person"] for row in _rows(out, "studies.csv")}
    assert study_people == {P("T1-03"), P("T1-06"), P("T2-01"), P("T1-02")}


def test_parent_and_twin_links_use_the_same_pseudonyms(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 0, r
    people = {row["person"]: row for row in _rows(out, "people.csv")}
    # mini/people.csv: T1-05's parents are T1-03 and T1-04; T1-06 and T1-07 are twins.
    assert people[P("T1-05")]["mother"] == P("T1-03")
    assert people[P("T1-05")]["father"] == P("T1-04")
    assert people[P("T1-03")]["mother"] == P("T1-02")
    assert people[P("T1-06")]["twin_of"] == P("T1-07")
    assert people[P("T1-07")]["twin_of"] == P("T1-06")
    # Every reference points at a person of the extract.
    for row in people.values():
        for col in ("mother", "father", "twin_of"):
            assert row[col] == "" or row[col] in people


def test_same_key_same_files_other_key_other_codes(loaded_db, run, tmp_path):
    r1, a = _extract(run, loaded_db, tmp_path, name="a")
    r2, b = _extract(run, loaded_db, tmp_path, name="b")
    assert r1.code == 0 and r2.code == 0
    for name in ("people.csv", "studies.csv", "variants.csv", "genetic_results.csv", "assessments.csv"):
        assert (a / name).read_text() == (b / name).read_text(), name
    other = tmp_path / "other"
    other.mkdir()
    r3, c = _extract(run, loaded_db, other, key=OTHER_KEY)
    assert r3.code == 0, r3
    codes_a = {row["person"] for row in _rows(a, "people.csv")}
    codes_c = {row["person"] for row in _rows(c, "people.csv")}
    assert codes_c == {P(p["person"], OTHER_KEY) for p in _mini("people.csv")}
    assert not codes_a & codes_c


def test_code_collision_is_an_error():
    with pytest.raises(UserError, match="collision"):
        ps.code_map(["A1", "B2", "C3"], lambda c: "P-same", "person")
    assert ps.code_map(["A1", "B2", None], lambda c: "P-" + c, "person") == {"A1": "P-A1", "B2": "P-B2"}


def test_collision_in_a_real_extract_writes_nothing(loaded_db, run, tmp_path, monkeypatch):
    monkeypatch.setattr(ps, "PERSON_HEX", 0)  # every person code becomes "P-"
    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 1
    assert "collision" in r.err and len(r.err.strip().splitlines()) == 1
    assert not out.exists()


# --------------------------------------------------------------------------- nothing identifying


def _original_values(url: str) -> dict[str, set[str]]:
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(url))
    with reading(engine) as conn:
        frames = {k: repo.LOADERS[k](conn) for k in LAYOUTS}
    engine.dispose()
    people = frames["people"]
    free = set()
    for kind, layout in LAYOUTS.items():
        for c in layout.columns:
            if c.kind == "text" and c.name != "unit":  # unit: checked against the catalogue
                free |= {v for v in frames[kind][c.name] if isinstance(v, str) and v}
    dates = set()
    for kind, layout in LAYOUTS.items():
        for c in layout.columns:
            if c.kind in ("date", "partial_date"):
                dates |= {v for v in frames[kind][c.name] if isinstance(v, str)}
    return {
        "codes": set(people["person"]) | set(frames["families"]["family"]),
        "free": free,
        "births": {b for b in people["birth_date"] if isinstance(b, str)},
        "dates": dates,
    }


def _all_output(folder: Path) -> tuple[str, set[str]]:
    text = "".join(p.read_text(encoding="utf-8") for p in sorted(folder.iterdir()))
    cells = set()
    for p in folder.glob("*.csv"):
        with p.open(encoding="utf-8", newline="") as fh:
            for row in csv.reader(fh):
                cells |= set(row)
    return text, cells


@pytest.fixture
def demo_db(run, tmp_path):
    db = str(tmp_path / "demo.sqlite")
    r = run("demo", db=db)
    assert r.code == 0, r
    return db


def test_no_code_name_date_or_free_text_in_any_output_file(demo_db, run, tmp_path):
    """The invented demo families: names, notes, sites, labs and every date of the store."""
    r, out = _extract(run, demo_db, tmp_path)
    assert r.code == 0, r
    original = _original_values(demo_db)
    assert len(original["free"]) > 50 and len(original["dates"]) > 100  # the scan has material
    text, cells = _all_output(out)
    for value in original["codes"] | original["free"]:
        assert value not in text, value
    for value in original["dates"]:  # ages mode: no date at all
        if len(value) == 10:
            assert value not in text, value
        else:  # a year-only date: as a whole cell (four digits also occur inside hex codes)
            assert value not in cells, value


def test_shift_mode_writes_no_original_day_date(demo_db, run, tmp_path):
    r, out = _extract(run, demo_db, tmp_path, "--dates", "shift")
    assert r.code == 0, r
    original = _original_values(demo_db)
    text, _ = _all_output(out)
    for value in original["codes"] | original["free"]:
        assert value not in text, value
    people = {row["person"]: row for row in _rows(out, "people.csv")}
    for p in _original_people(demo_db):
        b = p["birth_date"]
        shifted = people[P(p["person"])]["birth_date"]
        if b and len(b) == 10:
            assert shifted != b
        elif b:  # year-only: the year, unchanged (documented)
            assert shifted == b


def _original_people(url: str) -> list[dict]:
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(url))
    with reading(engine) as conn:
        df = repo.load_people(conn)
    engine.dispose()
    return df.to_dict("records")


def test_key_never_in_output_or_json(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path, "--json")
    assert r.code == 0, r
    data = json.loads(r.out)
    assert data["pseudonymised"] is True and data["dates"] == "ages"
    text, _ = _all_output(out)
    for where in (text, r.out, r.err):
        assert KEY not in where
        assert KEY[:16] not in where
    readme = (out / ps.MANIFEST).read_text()
    assert "The key is not in this folder" in readme
    assert "ages" in readme and "given_name" in readme  # mode and dropped columns are stated


def test_settings_never_show_the_key(tmp_path):
    s = parse_settings({"privacy": {"pseudonym_key": KEY}})
    assert KEY not in repr(s)
    assert s.privacy.key() == KEY
    f = parse_settings({"privacy": {"pseudonym_key_file": "k.key"}}, base=tmp_path)
    assert f.privacy.pseudonym_key_file == str(tmp_path / "k.key")  # relative to the settings file
    with pytest.raises(UserError, match="not both"):
        parse_settings({"privacy": {"pseudonym_key": KEY, "pseudonym_key_file": "k.key"}})
    with pytest.raises(UserError) as short:
        parse_settings({"privacy": {"pseudonym_key": "short-key"}}).privacy.key()
    assert "short-key" not in str(short.value)


# --------------------------------------------------------------------------- missing key, options


def test_missing_key_exits_1_with_one_line_and_writes_nothing(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path, key=None)
    assert r.code == 1
    lines = r.err.strip().splitlines()
    assert len(lines) == 1 and "pseudonym_key_file" in lines[0] and "Traceback" not in r.err
    assert not out.exists()


def test_short_key_is_refused(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path, key="too-short")
    assert r.code == 1 and "32 characters" in r.err and "too-short" not in r.err
    assert not out.exists()


def test_options_need_pseudonymise_and_a_folder_for_all(loaded_db, run, tmp_path):
    settings = _settings(tmp_path)
    r = run("export", "people", "--out", tmp_path / "p", "--pseudonymise", "--settings", settings, db=loaded_db)
    assert r.code == 1 and "export all" in r.err
    r = run("export", "people", "--out", tmp_path / "p.csv", "--dates", "shift", db=loaded_db)
    assert r.code == 1 and "--pseudonymise" in r.err
    assert not (tmp_path / "p.csv").exists()
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "people.csv").write_text("not an extract")
    r = run("export", "all", "--out", busy, "--pseudonymise", "--settings", settings, db=loaded_db)
    assert r.code == 1 and "not empty" in r.err
    assert (busy / "people.csv").read_text() == "not an extract"


def test_plain_export_is_unchanged(loaded_db, run, tmp_path):
    r = run("export", "people", "--out", tmp_path / "people.csv", db=loaded_db)
    assert r.code == 0, r
    assert (tmp_path / "people.csv").read_text() == (MINI / "people.csv").read_text()


# --------------------------------------------------------------------------- dates


def test_ages_mode_against_hand_computed_ages(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 0, r
    studies = [row for row in _rows(out, "studies.csv") if row["person"] == P("T1-03")]
    # T1-03 born 1968-04-12, echo on 2014-01-10. By hand: 1968-04-12 -> 2014-04-12 is 46 years
    # = 46 x 365 + 11 leap days (1972 ... 2012) = 16801 days; 2014-01-10 is 92 days earlier
    # (21 + 28 + 31 + 12), so 16709 days; 16709 / 365.2425 = 45.748 years.
    assert {row["age_at_study"] for row in studies if row["modality"] == "echo"} == {"45.748"}
    # T1-02 born "1942" (year only: counted from 1942-07-01), echo on 2012-03-03. By hand:
    # 1942-07-01 -> 2012-07-01 = 70 x 365 + 18 leap days (1944 ... 2012) = 25568 days, less 120
    # (28 + 30 + 31 + 30 + 1) = 25448 days; / 365.2425 = 69.674 years.
    t102 = [row for row in _rows(out, "studies.csv") if row["person"] == P("T1-02")]
    assert [row["age_at_study"] for row in t102] == ["69.674"]
    people = {row["person"]: row for row in _rows(out, "people.csv")}
    assert people[P("T1-02")]["birth_date_precision"] == "year"
    assert people[P("T1-03")]["birth_date_precision"] == "day"
    # T1-01: 1940 to 2001, both year-only: 1 July to 1 July = 61 x 365 + 15 leap days = 22280 days;
    # / 365.2425 = 61.0006 -> 61.001 years.
    assert people[P("T1-01")]["age_at_death"] == "61.001"
    assert "birth_date" not in people[P("T1-01")] and "death_date" not in people[P("T1-01")]
    # The variant's two classifications, 2014-03-01 and 2018-06-15: 1567 days = 4.290 years.
    years = sorted(row["years_since_first_classification"] for row in _rows(out, "variants.csv"))
    assert years == ["0", "4.29"]


def _dates_by_family(rows_by_kind: dict[str, list[dict]], family_of: dict[str, str]) -> dict[str, list]:
    """(kind, person-or-family, column) -> sorted day dates, per family."""
    date_cols = {kind: [c for c, rule in ps.KEPT[kind].items() if rule == ps.DATE] for kind in ps.KEPT}
    out: dict[str, list] = {}
    for kind, rows in rows_by_kind.items():
        for row in rows:
            fam = row.get("family") or family_of[row["person"]]
            for c in date_cols[kind]:
                if len(row[c]) == 10:
                    out.setdefault(fam, []).append(((kind, row.get("person", ""), c), dt.date.fromisoformat(row[c])))
    return {f: sorted(v) for f, v in out.items()}


def test_shift_mode_keeps_intervals_within_a_family(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path, "--dates", "shift")
    assert r.code == 0, r
    files = {kind: LAYOUTS[kind].file_name for kind in ps.KEPT if kind in RECORD_KINDS}  # the files of mini
    original = {kind: _mini(f) for kind, f in files.items()}
    shifted = {kind: _rows(out, f) for kind, f in files.items()}
    fam_orig = {p["person"]: p["family"] for p in original["people"]}
    fam_out = {p["person"]: p["family"] for p in shifted["people"]}
    # Rename the original rows' codes to pseudonyms, then compare per family.
    for kind, rows in original.items():
        for row in rows:
            if "person" in row:
                row["person"] = P(row["person"])
            if "family" in row:
                row["family"] = F(row["family"])
    fam_orig = {P(p): F(f) for p, f in fam_orig.items()}
    before = _dates_by_family(original, fam_orig)
    after = _dates_by_family(shifted, fam_out)
    assert set(before) == set(after) == {F("FAM-T1"), F("FAM-T2")}
    for fam in before:
        a, b = before[fam], after[fam]
        assert [k for k, _ in a] == [k for k, _ in b] and len(a) > 3
        shifts = {(d2 - d1).days for (_, d1), (_, d2) in zip(a, b)}
        assert len(shifts) == 1, shifts  # one shift per family: every interval kept exactly
        (days,) = shifts
        assert 1 <= abs(days) <= ps.MAX_SHIFT_DAYS
    # Year-only birth dates stay years.
    people = {row["person"]: row for row in shifted["people"]}
    assert people[P("T1-01")]["birth_date"] == "1940" and people[P("T1-01")]["death_date"] == "2001"


def test_family_shift_stays_within_bounds_and_is_never_zero():
    key = ps.key_bytes(KEY)
    days = [ps.family_shift_days(key, f"FAM-{i}") for i in range(3000)]
    assert all(1 <= abs(d) <= ps.MAX_SHIFT_DAYS for d in days)
    assert min(days) <= -170 and max(days) >= 170  # the whole range is used
    assert days == [ps.family_shift_days(key, f"FAM-{i}") for i in range(3000)]  # deterministic
    other = ps.key_bytes(OTHER_KEY)
    assert days != [ps.family_shift_days(other, f"FAM-{i}") for i in range(3000)]


# --------------------------------------------------------------------------- free-text rule


def _mini_frames() -> dict[str, pd.DataFrame]:
    frames = {}
    for kind in RECORD_KINDS:  # the files of tests/data/mini (it holds no contact log)
        df = pd.read_csv(MINI / LAYOUTS[kind].file_name, dtype=str, keep_default_na=False)
        frames[kind] = df.replace({"": None}).astype(object)
    return frames


def test_allow_list_drops_a_new_column_by_default():
    frames = _mini_frames()
    frames["people"]["nickname"] = "Bunny"
    frames["studies"]["comment"] = "seen by Dr Invented"
    ex = ps.pseudonymise(frames, KEY, today=dt.date(2025, 1, 1))
    assert "nickname" in ex.dropped["people"] and "nickname" not in ex.frames["people"].columns
    assert "comment" in ex.dropped["studies"] and "comment" not in ex.frames["studies"].columns
    text = "".join(ps.csv_text(f) for f in ex.frames.values())
    assert "Bunny" not in text and "Invented" not in text


def test_only_controlled_text_columns_are_kept():
    """A text column may be kept only when it is checked against a list (unit) or is hashed (site)."""
    for kind, layout in LAYOUTS.items():
        for c in layout.columns:
            rule = ps.KEPT[kind].get(c.name)
            if c.kind == "text" and rule is not None:
                assert (kind, c.name, rule) in {("studies", "unit", ps.KEEP), ("studies", "site", ps.SITE)}
        assert set(ps.KEPT[kind]) <= set(layout.names)  # the allow-list names real columns


def test_formula_cells_are_neutralised():
    frame = pd.DataFrame({"unit": ["=1+1", "mm", "@SUM(A1)"], "value": [-14.2, 1.0, 2.0]}, dtype=object)
    text = ps.csv_text(frame)
    assert text.splitlines() == ["unit,value", "'=1+1,-14.2", "mm,1", "'@SUM(A1),2"]  # numbers untouched


# --------------------------------------------------------------------------- small cells


def test_small_cells_hand_counted():
    """mini, on 2025-01-01: 10 people in 9 cells of sex x 10-year band x gene (hand-counted).

    FAM-T1 (MYBPC3): T1-01 m 60-69 (1940 to 2001), T1-02 f 70-79 (1942 to 2015), T1-03 f 50-59,
    T1-04 m 50-59, T1-05 m 20-29, T1-06 m 10-19, T1-07 f 10-19, T1-08 f 50-59.
    FAM-T2 (no variant): T2-01 f 40-49, T2-02 m 20-29.  Only (f, 50-59, MYBPC3) holds 2.
    """
    frames = _mini_frames()
    s = ps.small_cells(frames["people"], frames["variants"], dt.date(2025, 1, 1), 5)
    assert (s.cells, s.below, s.people_in_below) == (9, 9, 10)
    s2 = ps.small_cells(frames["people"], frames["variants"], dt.date(2025, 1, 1), 2)
    assert (s2.cells, s2.below, s2.people_in_below) == (9, 8, 8)
    s1 = ps.small_cells(frames["people"], frames["variants"], dt.date(2025, 1, 1), 1)
    assert s1.below == 0
    assert ps.age_band(34.2) == "30-39" and ps.age_band(None) == "unknown" and ps.age_band(0.1) == "0-9"


def test_small_count_warning_fires_for_a_tiny_cohort(loaded_db, run, tmp_path):
    r, out = _extract(run, loaded_db, tmp_path, "--json")
    assert r.code == 0, r
    data = json.loads(r.out)
    assert data["small_cells"]["threshold"] == 5
    assert data["small_cells"]["cells_below_threshold"] == data["small_cells"]["cells"] > 0
    assert data["warnings"] == 1
    assert r.err.startswith("warning: ") and "fewer than 5" in r.err
    # No identifying values in the warning: no gene, sex or age band.
    for value in ("MYBPC3", "female", "male ", "50-59", "none"):
        assert value not in r.err
    assert (out / "people.csv").exists()  # a warning, not a refusal


def test_no_warning_when_threshold_is_1(loaded_db, run, tmp_path):
    r, _ = _extract(run, loaded_db, tmp_path, "--json", "--min-cell", "1")
    assert r.code == 0, r
    data = json.loads(r.out)
    assert data["small_cells"]["cells_below_threshold"] == 0 and data["warnings"] == 0
    assert "warning" not in r.err


def test_threshold_from_settings(loaded_db, run, tmp_path):
    settings = _settings(tmp_path, extra="small_cell_threshold = 1\n")
    r = run("export", "all", "--out", tmp_path / "e", "--pseudonymise", "--settings", settings, "--json",
            db=loaded_db)
    assert r.code == 0, r
    assert json.loads(r.out)["small_cells"]["threshold"] == 1


def test_every_exported_file_is_readable_by_its_owner_only(loaded_db, run, tmp_path):
    import os

    r, out = _extract(run, loaded_db, tmp_path)
    assert r.code == 0, r
    plain = tmp_path / "plain"
    assert run("export", "all", "--out", plain, db=loaded_db).code == 0
    files = list(out.iterdir()) + list(plain.iterdir())
    assert len(files) >= 12
    assert {oct(os.stat(f).st_mode & 0o777) for f in files} == {"0o600"}
