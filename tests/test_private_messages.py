"""Error messages carry file names, row numbers, columns and codes, never names or dates of birth.

Every malformed people file of the corpus (tests/bad_inputs) is imported; no
given name, family name, date of birth or date of death written in the file
may appear in what the command prints.
"""

from __future__ import annotations

import csv
import io
import tomllib
from pathlib import Path

import pytest

from tracker.io.layouts import LAYOUTS

BAD = Path(__file__).parent / "bad_inputs"
CASES = [c for c in tomllib.loads((BAD / "manifest.toml").read_text(encoding="utf-8"))["case"]
         if c["kind"] == "people"]  # fmt: skip
PRIVATE = ("given_name", "family_name", "birth_date", "death_date")


def _private_cells(path: Path) -> set[str]:
    """Every name and date in the file's private columns (of 4 characters or more).

    A row 1 that names none of the private columns is a record (a file without its header row): its
    cells are read by the layout's column order.  Special files (a device) hold none.
    """
    if not path.is_file():
        return set()
    text = path.read_bytes().decode("utf-8", errors="ignore").lstrip("\ufeff")
    try:
        rows = list(csv.reader(io.StringIO(text)))
    except csv.Error:
        return set()
    if not rows:
        return set()
    header = [h.strip() for h in rows[0]]
    if not any(h in PRIVATE for h in header):
        header, rows = LAYOUTS["people"].names, [[], *rows]
    cols = [i for i, h in enumerate(header) if h in PRIVATE]
    return {r[i].strip() for r in rows[1:] for i in cols if i < len(r) and len(r[i].strip()) >= 4}


def test_the_corpus_has_people_files_with_names_and_dates():
    assert len(CASES) >= 15
    assert sum(bool(_private_cells(BAD / c["file"])) for c in CASES) >= 10


@pytest.mark.parametrize("case", CASES, ids=[c["file"] for c in CASES])
def test_refusal_never_repeats_a_name_or_date_of_birth(case, loaded_db, run):
    r = run("import", "people", BAD / case["file"], db=loaded_db)
    assert r.code == 1, r
    shown = r.out + r.err
    leaked = sorted(v for v in _private_cells(BAD / case["file"]) if v in shown)
    assert not leaked, f"{case['file']}: message repeats {leaked}: {r.err}"
