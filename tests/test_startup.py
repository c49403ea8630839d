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
