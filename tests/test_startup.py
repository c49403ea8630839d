"""Starting the command line loads no numerical or document library: `tracker --help` and each
command's --help import the CLI app in a fresh interpreter and render, and none of pandas, numpy,
scipy, statsmodels, reportlab or fhir.resources may be loaded by then (each command imports what
it uses inside its function)."""

from __future__ import annotations

import subprocess
import sys

import pytest

HEAVY = ["pandas", "numpy", "scipy", "statsmodels", "reportlab", "fhir.resources"]

SCRIPT = """
import contextlib, io, sys
from tracker.cli.app import main
with contextlib.redirect_stdout(io.StringIO()):
    code = main({argv!r})
assert code == 0, code
print(",".join(m for m in {heavy!r} if m in sys.modules))
"""


@pytest.mark.parametrize("argv", [["--help"], ["person", "--help"], ["recall", "--help"], ["trends", "--help"],
                                  ["cascade", "--help"], ["reclassify", "--help"], ["worklist", "--help"],
                                  ["families", "--help"], ["import", "--help"], ["edit", "--help"],
                                  ["report", "--help"], ["report", "trajectory", "--help"],
                                  ["report", "pedigree", "--help"], ["report", "letter", "--help"],
                                  ["user", "--help"], ["user", "add", "--help"], ["serve", "--help"],
                                  ["uptake", "--help"], ["report", "uptake", "--help"]])  # fmt: skip
def test_help_loads_no_heavy_library(argv):
    out = subprocess.run([sys.executable, "-c", SCRIPT.format(argv=argv, heavy=HEAVY)], capture_output=True,
                         text=True, check=True)  # fmt: skip
    assert out.stdout.strip() == "", f"loaded at start-up: {out.stdout.strip()}"


def test_pseudonymised_export_date_modes_match_the_extract_code():
    from tracker.cli.families import DatesMode
    from tracker.io.pseudonymise import DATE_MODES

    assert [m.value for m in DatesMode] == list(DATE_MODES)


STORE = ["sqlalchemy", "tracker.store.models", "icalendar"]

TREE_SCRIPT = """
import contextlib, io, sys
import typer.main
from tracker.cli.app import app, main

def walk(command, path, ctx):
    yield path
    for name in getattr(command, "list_commands", lambda ctx: [])(ctx):
        sub = command.get_command(ctx, name)
        yield from walk(sub, path + [name], type(ctx)(sub, parent=ctx))

root = typer.main.get_command(app)
paths = list(walk(root, [], type(root).context_class(root)))
print(len(paths))
for path in paths:
    with contextlib.redirect_stdout(io.StringIO()):
        code = main(path + ["--help"])
    assert code == 0, (path, code)
    loaded = [m for m in {modules!r} if m in sys.modules]
    if loaded:
        print(" ".join(path) or "(top)", "->", ",".join(loaded))
        break
"""


def test_help_of_every_command_loads_no_store_library():
    """`tracker --help` and `tracker COMMAND --help` for every command and subcommand of the tree, in one
    fresh interpreter: SQLAlchemy, the table models and icalendar are imported by the commands that use
    them, not at start-up (nor the numerical and document libraries)."""
    out = subprocess.run([sys.executable, "-c", TREE_SCRIPT.format(modules=STORE + HEAVY)], capture_output=True,
                         text=True, check=True)  # fmt: skip
    count, *loaded = out.stdout.strip().splitlines()
    assert int(count) >= 40, f"only {count} commands walked"
    assert loaded == [], f"loaded by --help: {loaded}"
