"""The web load benchmark runs end to end on a tiny cohort (figures are never asserted, only that every
step works, nothing failed, and each page still has its service call to compare with)."""

from __future__ import annotations

import json

from benchmarks import web_load


def test_web_load_runs_on_a_tiny_cohort(tmp_path):
    out = tmp_path / "web.json"
    code = web_load.main(["--families", "4", "--seconds", "1", "--warmup", "0", "--clients", "2", "--alone", "1",
                          "--work", str(tmp_path), "--json", str(out)])  # fmt: skip
    result = json.loads(out.read_text())
    run = result["runs"][0]
    assert code == 0 and run["errors"] == [], run["errors"]
    assert {"day", "cohort", "family", "person"} <= set(run["alone"]), run["absent"]
    for page, row in run["alone"].items():
        if not page.endswith("(write)"):
            assert "service" in row, f"{page}: its service call is no longer mirrored in benchmarks/web_load.py"
    assert run["load"]["all"]["n"] >= 1
