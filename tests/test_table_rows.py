"""Terminal tables show the first rows and a count of the rest; --all shows every row; --json and
--csv always hold every row; the number of rows is the settings' [display] table_rows (50 unless set)."""

from __future__ import annotations

import csv
import json

import pytest

from tracker.cli.app import main
from tracker.settings import DEFAULT_TABLE_ROWS


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    db = str(tmp_path_factory.mktemp("rows") / "demo.sqlite")
    assert main(["demo", "--db", db]) == 0
    return db


@pytest.fixture
def small(tmp_path):
    p = tmp_path / "clinic.toml"
    p.write_text("[display]\ntable_rows = 2\n")
    return str(p)


def _trend_rows(out: str) -> int:
    """Rows of the trends table: lines holding a demo person code in the first column."""
    return sum(1 for line in out.splitlines() if line.startswith("│ HV"))


def test_trends_table_shows_the_first_rows_and_counts_the_rest(demo, run, monkeypatch):
    monkeypatch.delenv("TRACKER_SETTINGS", raising=False)
    total = len(json.loads(run("trends", "--json", db=demo).out)["rows"])
    assert total > DEFAULT_TABLE_ROWS  # the demo holds more series than one screen
    r = run("trends", db=demo)
    assert r.code == 0
    assert _trend_rows(r.out) == DEFAULT_TABLE_ROWS
    assert f"... and {total - DEFAULT_TABLE_ROWS} more; --all for every row" in r.out
    everything = run("trends", "--all", db=demo)
    assert _trend_rows(everything.out) == total
    assert "... and" not in everything.out


def test_csv_and_json_hold_every_row(demo, run, tmp_path, small):
    out = tmp_path / "trends.csv"
    r = run("trends", "--csv", out, "--settings", small, db=demo)
    assert r.code == 0 and "... and" in r.out
    with out.open(newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == len(json.loads(run("trends", "--json", "--settings", small, db=demo).out)["rows"])


def test_families_table_follows_the_setting(demo, run, small):
    r = run("families", "--settings", small, db=demo)
    assert r.code == 0
    assert sum(1 for line in r.out.splitlines() if line.startswith("│ HV0")) == 2
    assert "... and 3 more; --all for every row, --json for the data" in r.out
    assert "... and" not in run("families", "--settings", small, "--all", db=demo).out
    assert len(json.loads(run("families", "--settings", small, "--json", db=demo).out)["families"]) == 5


def test_audit_table_shows_the_latest_entries(demo, run, small):
    entries = json.loads(run("audit", "--json", db=demo).out)
    r = run("audit", "--settings", small, db=demo)
    assert f"... and {len(entries) - 2} earlier" in r.out
    shown = [int(line.split("│")[1]) for line in r.out.splitlines() if line.startswith("│ ") and line.split("│")[1].strip().isdigit()]
    assert shown == [e["id"] for e in entries][-2:]


def test_worklist_tables_follow_the_setting(demo, run, small):
    args = ("worklist", "--from", "2026-01-01", "--to", "2027-12-31", "--as-of", "2026-12-01", "--settings", small)
    data = json.loads(run(*args, "--json", db=demo).out)
    assert len(data["due"]) > 2
    r = run(*args, db=demo)
    assert f"... and {len(data['due']) - 2} more; --all for every row, --json or --csv FILE for the data" in r.out
    assert "... and" not in run(*args, "--all", db=demo).out


def test_tasks_all_lists_every_task(demo, run, small):
    r = run("reclassify", "HV03", "--to", "likely_pathogenic", "--date", "2026-11-30", "--reason", "re-review", db=demo)
    assert r.code == 0, r
    tasks = json.loads(run("tasks", "--json", db=demo).out)["tasks"]
    assert len(tasks) > 2
    assert f"... and {len(tasks) - 2} more" in run("tasks", "--settings", small, db=demo).out
    assert "... and" not in run("tasks", "--all", "--settings", small, db=demo).out


@pytest.mark.parametrize("value", ["0", "-3", '"many"', "true"])
def test_a_bad_table_rows_setting_is_one_line(demo, run, tmp_path, value):
    p = tmp_path / "bad.toml"
    p.write_text(f"[display]\ntable_rows = {value}\n")
    r = run("families", "--settings", p, db=demo)
    assert r.code == 1
    assert r.err.strip().splitlines() == ["error: bad.toml: [display] table_rows must be a whole number of at least 1"]
