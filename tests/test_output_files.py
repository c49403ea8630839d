"""Every file the tool writes: mode 0600 whatever the umask, written whole (temporary file then
rename), never through a symbolic link; `export` replaces an existing file only with --force.

Uses the invented demo families (tracker demo).
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from tracker.cli.app import main

ROOT = Path(__file__).resolve().parents[1]
SETTINGS = ROOT / "demo_family" / "clinic.toml"


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("outputs") / "demo.sqlite")
    assert main(["demo", "--db", path]) == 0
    return path


@pytest.fixture(autouse=True)
def usual_umask():
    old = os.umask(0o022)
    yield
    os.umask(old)


# (name, arguments given the target file or folder, the file written inside a folder target or None)
WRITERS = [
    ("export csv", lambda p: ("export", "people", "--out", p), None),
    ("export fhir", lambda p: ("export", "--fhir", "HV01", "--out", p), None),
    ("export-fhir", lambda p: ("export-fhir", "HV01", "--out", p), None),
    ("worklist csv", lambda p: ("worklist", "--from", "2026-01-01", "--to", "2026-12-31", "--csv", p), None),
    ("worklist ics", lambda p: ("worklist", "--from", "2026-01-01", "--to", "2026-12-31", "--ics", p), None),
    ("trends csv", lambda p: ("trends", "--family", "HV01", "--csv", p), None),
    ("letter pdf", lambda p: ("report", "letter", "HV01-IV-5", "--out", p, "--settings", SETTINGS, "--date",
                              "2026-12-01", "--names"), "letter-HV01-IV-5.pdf"),  # fmt: skip
    ("pedigree pdf", lambda p: ("report", "pedigree", "HV01", "--out", p, "--names"), "pedigree-HV01.pdf"),
    ("trajectory pdf", lambda p: ("report", "trajectory", "HV02-III-2", "--out", p, "--as-of", "2026-12-01"),
     "trajectory-HV02-III-2.pdf"),
    ("worklist pdf", lambda p: ("report", "worklist", "--from", "2026-01-01", "--to", "2026-12-31", "--out", p),
     "worklist-2026-01-01-2026-12-31.pdf"),
    ("uptake csv", lambda p: ("uptake", "--to", "2026-12-01", "--csv", p), None),
    ("uptake pdf", lambda p: ("report", "uptake", "--from", "2012-01-01", "--to", "2026-12-01", "--out", p),
     "uptake-2012-01-01-2026-12-01.pdf"),
]
IDS = [w[0] for w in WRITERS]


def _target(tmp_path: Path, inner: str | None) -> tuple[Path, Path]:
    """(what to give the command, the file it writes)."""
    if inner is None:
        f = tmp_path / "out.file"
        return f, f
    folder = tmp_path / "folder"
    return folder, folder / inner


def _run(run, db, args):
    return run(*args, db=db)


@pytest.mark.parametrize("name,args,inner", WRITERS, ids=IDS)
def test_written_files_are_private_and_whole(demo_db, run, tmp_path, name, args, inner):
    given, written = _target(tmp_path, inner)
    r = _run(run, demo_db, args(given))
    assert r.code == 0, r
    assert oct(os.stat(written).st_mode & 0o777) == "0o600", name
    assert written.stat().st_size > 0
    leftovers = [p.name for p in written.parent.iterdir() if p != written]
    assert leftovers == [], leftovers


@pytest.mark.parametrize("name,args,inner", WRITERS, ids=IDS)
def test_a_symbolic_link_is_never_written_through(demo_db, run, tmp_path, name, args, inner):
    given, written = _target(tmp_path, inner)
    written.parent.mkdir(exist_ok=True)
    victim = tmp_path / "elsewhere.txt"
    victim.write_text("kept")
    written.symlink_to(victim)
    r = _run(run, demo_db, args(given))
    assert r.code == 1 and "symbolic link" in r.err and r.err.count("\n") == 1, r
    assert victim.read_text() == "kept" and written.is_symlink()
    assert not [p for p in written.parent.iterdir() if p.name.endswith(".partial")]


def test_export_replaces_a_file_only_with_force(demo_db, run, tmp_path):
    out = tmp_path / "people.csv"
    out.write_text("precious")
    for args in (("export", "people", "--out", out), ("export", "--fhir", "HV01", "--out", out)):
        r = run(*args, db=demo_db)
        assert r.code == 1 and "--force" in r.err and r.err.count("\n") == 1, r
        assert out.read_text() == "precious"
    r = run("export", "people", "--out", out, "--force", db=demo_db)
    assert r.code == 0, r
    assert out.read_text().startswith("person,") or "," in out.read_text().splitlines()[0]
    folder = tmp_path / "all"
    assert run("export", "all", "--out", folder, db=demo_db).code == 0
    first = {p.name: p.read_bytes() for p in folder.iterdir()}
    r = run("export", "all", "--out", folder, db=demo_db)
    assert r.code == 1 and "--force" in r.err, r
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == first
    assert run("export", "all", "--out", folder, "--force", db=demo_db).code == 0
