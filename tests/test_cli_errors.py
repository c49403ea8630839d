"""Bad databases and bad ids: one line naming the file or argument, exit code 1, nothing changed;
with --json the error is also a JSON object on stdout. Read-only commands leave a file as found.

Uses the invented mini families of tests/data/mini.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from pathlib import Path

import pytest

from conftest import MINI, dump


def _one_line(r, *expected):
    assert r.code == 1, r
    assert r.err.startswith("error: ") and r.err.count("\n") == 1 and "Traceback" not in r.err, r.err
    for e in expected:
        assert e in r.err, r.err


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def good(sqlite_db, run):
    assert run("init", db=sqlite_db).code == 0
    assert run("import", "all", MINI, db=sqlite_db).code == 0
    return Path(sqlite_db)


def _damaged(good: Path, tmp_path: Path, kind: str) -> Path:
    """An invented damaged copy of a good database."""
    con = sqlite3.connect(good)
    con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    con.close()
    data = good.read_bytes()
    out = tmp_path / f"{kind}.sqlite"
    if kind == "text":
        out.write_text("family,condition\nFAM-T1,hypertrophic cardiomyopathy\n")
    elif kind == "truncated":
        out.write_bytes(data[: len(data) // 3])
    elif kind == "header":
        out.write_bytes(data[:50])
    elif kind == "pages":
        out.write_bytes(data[: 4096 * 3] + b"\xff" * 8192 + data[4096 * 3 + 8192:])
    elif kind == "zip":
        out.write_bytes(b"PK\x03\x04" + b"\0" * 4000)
    return out


KINDS = ["text", "truncated", "header", "pages", "zip"]


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("command", [("families",), ("families", "--json"), ("person", "T1-01"),
                                     ("audit",), ("worklist", "--from", "2026-01-01", "--to", "2026-12-31", "--json")])
def test_damaged_database_is_one_line_naming_the_file(good, tmp_path, run, kind, command):
    bad = _damaged(good, tmp_path, kind)
    digest = _digest(bad)
    r = run(*command, db=str(bad))
    if kind in ("truncated", "pages") and r.code == 0:
        assert "Traceback" not in r.err  # the damage lies in pages this command does not read
    else:
        _one_line(r, bad.name)
    assert _digest(bad) == digest
    if "--json" in command and r.code:
        assert json.loads(r.out) == {"error": r.err[len("error: "):].strip(), "exit_code": 1}


@pytest.mark.parametrize("kind", KINDS)
def test_check_reports_a_damaged_file_as_its_finding(good, tmp_path, run, kind):
    bad = _damaged(good, tmp_path, kind)
    for args in (("check", "--json"), ("check",)):
        r = run(*args, db=str(bad))
        assert r.code == 1 and "Traceback" not in r.err, r
    d = json.loads(run("check", "--json", db=str(bad)).out)
    assert d["ok"] is False and d["findings"][0]["check"] == "integrity"
    assert bad.name in d["findings"][0]["message"]


@pytest.mark.parametrize("url", ["mysql://clinic@127.0.0.1/tracker", "foo://bar", "oracle+cx://x@y/z"])
def test_unknown_database_kind_is_one_line(run, url):
    r = run("families", "--json", db=url)
    _one_line(r, "--db", "unknown database kind")
    assert json.loads(r.out)["exit_code"] == 1


@pytest.mark.parametrize("task", ["99999999999999999999999", "2147483648", "0", "-1"])
def test_out_of_range_task_id_is_refused(loaded_db, run, task):
    before = dump(loaded_db)
    argv = ["tasks", "done", "--note", "x", "--json", "--db", loaded_db, "--", task]
    r = run(*argv)
    _one_line(r, "TASK_ID")
    assert dump(loaded_db) == before


def test_json_errors_are_json_on_stdout(loaded_db, run):
    r = run("person", "NO-SUCH", "--json", db=loaded_db)
    _one_line(r)
    assert json.loads(r.out) == {"error": r.err[len("error: "):].strip(), "exit_code": 1}
    r = run("person", "NO-SUCH", db=loaded_db)
    assert r.out == ""  # without --json nothing on stdout
    bad = Path(__file__).parent / "bad_inputs" / "families_duplicate.csv"
    if True:
        r = run("import", "families", bad, "--json", db=loaded_db)
        assert r.code == 1
        d = json.loads(r.out)
        assert d["exit_code"] == 1 and d["error"] and isinstance(d["problems"], list)


def test_read_only_commands_leave_a_foreign_file_unchanged(good, tmp_path, run):
    """A file in the rollback-journal mode (as another program leaves it) is read, never switched to WAL."""
    foreign = tmp_path / "foreign.sqlite"
    src = sqlite3.connect(good)
    dst = sqlite3.connect(foreign)
    src.backup(dst)
    dst.execute("PRAGMA journal_mode = DELETE")
    src.close()
    dst.close()
    digest = _digest(foreign)
    for args in (("families", "--json"), ("schema",), ("check",), ("audit", "--json"), ("measures",)):
        r = run(*args, db=str(foreign))
        assert r.code == 0, (args, r)
    assert _digest(foreign) == digest
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith("foreign")) == ["foreign.sqlite"]
    con = sqlite3.connect(foreign)
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    con.close()
    # The first write switches it to WAL (readers then do not block the writer).
    r = run("edit", "person", "T1-07", "--set", "notes=x", "--reason", "r", db=str(foreign))
    assert r.code == 0, r
    con = sqlite3.connect(foreign)
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    con.close()
