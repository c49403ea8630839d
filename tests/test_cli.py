"""The command line: help with an example everywhere, exit codes, one-line errors, JSON output."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
import typer.main

from conftest import MINI
from tracker.cli.app import app

ROOT = Path(__file__).parent.parent


def _commands():
    group = typer.main.get_command(app)
    return sorted(group.commands)


@pytest.mark.parametrize("name", _commands())
def test_every_command_has_help_with_an_example(name, run):
    r = run(name, "--help")
    assert r.code == 0, r
    assert "Example:" in r.out, f"{name} --help shows no example"


def test_usage_error_exits_2(run):
    r = run("import", "nonsense-kind", "x.csv")
    assert r.code == 2


def test_user_error_is_one_line_without_traceback(tmp_path):
    """A real process: exit 1, one line on stderr, no traceback."""
    proc = subprocess.run(
        [sys.executable, "-m", "tracker", "families", "--db", str(tmp_path / "none.sqlite")],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 1
    assert len(proc.stderr.strip().splitlines()) == 1
    assert "Traceback" not in proc.stderr


def test_database_from_environment(tmp_path, run, monkeypatch):
    db = tmp_path / "env.sqlite"
    monkeypatch.setenv("TRACKER_DB", str(db))
    assert run("init").code == 0
    assert db.exists()


def test_reporting_commands_give_json_with_stable_keys(loaded_db, run):
    r = run("families", "--json", db=loaded_db)
    data = json.loads(r.out)
    assert set(data) == {"totals", "families"}
    assert set(data["totals"]) == {"families", "people", "placeholders", "studies", "measurements",
                                   "first_study", "last_study"}  # fmt: skip
    assert data["totals"]["people"] == 9 and data["totals"]["placeholders"] == 1
    fam = {f["family"]: f for f in data["families"]}
    assert fam["FAM-T1"]["variant"].endswith("(LP)")  # the latest of its two classifications
    assert fam["FAM-T2"]["variant"] == "no causal variant found"
    r = run("measures", "--json", db=loaded_db)
    codes = {m["code"] for m in json.loads(r.out)}
    assert {"mwt_echo", "ivsd", "lvpwd", "lvidd", "lvef_echo", "la_diam", "lavi", "lvot_rest",
            "lvot_provoked", "mv_e", "mv_a", "e_prime_septal", "e_prime_lateral", "gls", "mwt_cmr",
            "lvmi_cmr", "lge_pct", "ecv"} <= codes  # fmt: skip
    r = run("schema", "--json", db=loaded_db)
    assert json.loads(r.out)["up_to_date"] is True


def test_demo_builds_and_summarises(tmp_path, run):
    db = str(tmp_path / "demo.sqlite")
    r = run("demo", "--json", db=db)
    assert r.code == 0, r
    data = json.loads(r.out)
    t = data["totals"]
    assert t["families"] >= 4 and t["people"] >= 30 and t["studies"] >= 80
    first, last = int(t["first_study"][:4]), int(t["last_study"][:4])
    assert last - first >= 10
    variants = " ".join(f["variant"] for f in data["families"])
    assert "(VUS)" in variants and "no causal variant found" in variants
    again = run("demo", "--json", db=db)  # running it again adds nothing
    assert all(f["rows_added"] == 0 for f in json.loads(again.out)["files"])


def test_readme_test_command_is_what_ci_runs():
    readme = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```sh\n(.*?)```", readme, re.S)
    commands = [line for line in blocks[0].splitlines() if line and not line.startswith("#")]
    assert len(commands) == 2, "the quickstart has exactly two set-up commands"
    ci = (ROOT / ".ci" / "run").read_text()
    assert commands[1] in ci


def test_demo_refuses_a_database_holding_other_families(loaded_db, run):
    """The invented demo families never mix into a clinic's records: refused, one line, nothing written."""
    from conftest import dump

    before = dump(loaded_db)
    r = run("demo", db=loaded_db)
    assert r.code == 1, r
    assert len(r.err.strip().splitlines()) == 1 and "Traceback" not in r.err
    assert "not the demo" in r.err and "FAM-T1" in r.err and "--db" in r.err
    assert dump(loaded_db) == before


def test_demo_accepts_a_new_or_initialised_database_and_its_own_demo(db_url, run):
    assert run("init", db=db_url).code == 0  # initialised, no families yet: the demo goes in
    r = run("demo", "--json", db=db_url)
    assert r.code == 0, r
    again = run("demo", "--json", db=db_url)  # a database holding only the demo: accepted, nothing added
    assert again.code == 0, again
    assert all(f["rows_added"] == 0 for f in json.loads(again.out)["files"])
