"""The --json output of every per-person and per-family command on the demo is unchanged.

The expected files in tests/data/expected/ were generated from the code as it was before the
commands moved onto the service layer and family-scoped reads, with
``python tests/data/expected/regenerate.py`` (the script that regenerates them). A difference
here means a change of output: regenerate only when the new output is known to be right.
"""

from __future__ import annotations

import json

import pytest
from output_cases import EXPECTED, build_demo, cases, env_clean, run_case

CASES = cases()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    env_clean()
    db = str(tmp_path_factory.mktemp("expected") / "demo.sqlite")
    build_demo(db)
    return db


def test_every_case_has_an_expected_file():
    assert sorted(p.stem for p in EXPECTED.glob("*.json")) == sorted(CASES)


@pytest.mark.parametrize("name", sorted(CASES))
def test_json_output_is_unchanged(demo, name, tmp_path):
    expected = json.loads((EXPECTED / f"{name}.json").read_text())
    assert expected["args"] == CASES[name]
    code, data = run_case(CASES[name], demo, tmp_path / "out")
    assert code == expected["exit_code"]
    assert data == expected["output"]
