"""The benchmark runs end to end, and its growth fit is right.

No timing is asserted here: speed targets are the benchmark's own figures
(docs/performance.md).  These tests check that every step runs and that the
figures which are results, not times, hold (statsmodels agreement, the same
reclassification tasks at both sizes, the cohort sizes of the worklist step).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from conftest import PG_ENV, PG_URL
from benchmarks import cohort as bench


def test_growth_exponent_of_an_exact_power_law_is_its_power():
    # time = 0.03 * size**0.9 exactly: log time is a straight line of slope 0.9 in log size.
    sizes = [100, 200, 500, 1000] * 2
    times = [0.03 * n**0.9 for n in sizes]
    fit = bench._growth_exponent(sizes, times)
    assert fit["growth_exponent"] == pytest.approx(0.9, abs=1e-12)
    low, high = fit["growth_exponent_ci95"]
    assert low == pytest.approx(0.9, abs=1e-9) and high == pytest.approx(0.9, abs=1e-9)
    assert fit["growth_fit_runs"] == 8


def test_growth_exponent_matches_numpy_least_squares_and_t_interval():
    # Reference: numpy.polyfit (least squares) for the slope; the interval by the textbook
    # formula slope +/- t(0.975, n-2) * s / sqrt(Sxx) with scipy's t quantile.
    from scipy import stats

    rng = np.random.default_rng(3)
    sizes = np.array([1000, 2000, 5000, 10000] * 2)
    times = 0.004 * sizes**1.02 * np.exp(rng.normal(0, 0.05, sizes.size))
    fit = bench._growth_exponent(list(sizes), list(times))
    x, y = np.log(sizes), np.log(times)
    slope, intercept = np.polyfit(x, y, 1)
    assert fit["growth_exponent"] == pytest.approx(slope, rel=1e-10)
    resid = y - (intercept + slope * x)
    se = np.sqrt(resid @ resid / (x.size - 2) / ((x - x.mean()) @ (x - x.mean())))
    half = stats.t.ppf(0.975, x.size - 2) * se
    assert fit["growth_exponent_ci95"] == pytest.approx([slope - half, slope + half], rel=1e-9)


def test_every_kth_family_keeps_whole_families(tmp_path):
    bench.main(["--families", "20", "--steps", "synth,import", "--workdir", str(tmp_path), "--keep"])
    r = bench.Run(args=bench.parse_args(["--existing-db", str(tmp_path / "bench.sqlite")]), workdir=tmp_path)
    try:
        frames, _ = bench._recall_frames(r)
    finally:
        for fn in r.cleanup:
            fn()
    half = bench._every(frames, 2)
    assert sorted(half.families["family"]) == sorted(frames.families["family"])[::2]
    kept = set(half.people["person"])
    # every member of a kept family is kept, and nobody else
    members = frames.people[frames.people["family"].isin(set(half.families["family"]))]
    assert set(members["person"]) == kept
    assert set(half.studies["person"]) <= kept and set(half.results["person"]) <= kept
    assert len(half.studies) == frames.studies["person"].isin(kept).sum()
    assert bench._every(frames, 1) is frames


def _run_whole_bench(tmp_path, *extra: str) -> dict:
    report = tmp_path / "bench.json"
    code = bench.main(["--families", "30", "--sample", "200", "--workdir", str(tmp_path / "work"),
                       "--per-person-sizes", "4,8", "--json", str(report), *extra])  # fmt: skip
    assert code == 0
    return json.loads(report.read_text(encoding="utf-8"))


def _check_report(report: dict) -> None:
    figures = report["figures"]
    assert list(figures) == [s.name for s in bench.STEPS]
    assert figures["synth"] and figures["import"]["total_s"] > 0
    assert figures["raw_insert"]["rows"] > figures["raw_insert"]["measurement_rows"] > 0
    assert figures["statsmodels"]["equal_results"] is True
    w = figures["worklist"]
    assert w["families_by_size"] == [3, 6, 15, 30]
    assert w["growth_fit_runs"] == 2 * 4
    low, high = w["growth_exponent_ci95"]
    assert low <= w["growth_exponent"] <= high
    assert figures["reclassification"]["tasks_agree"] is True
    sp = figures["proposals"]
    assert sp["families"] == 30 and sp["proposals"] > sp["listed_rows"] > 0
    assert sp["worklist_over_read"] == pytest.approx(sp["worklist_90d_s"] / sp["read_listed_s"])
    p = figures["per_person"]
    assert p["sizes"] == [4, 8]
    for name in ("person", "recall", "cascade", "reclassify_dry_run", "report_trajectory", "trends_family",
                 "report_pedigree", "report_letter"):
        assert p[f"{name}_4_s"] > 0 and p[f"{name}_8_s"] > 0
        assert p[f"{name}_ratio_8_over_4"] == pytest.approx(p[f"{name}_8_s"] / p[f"{name}_4_s"])
    assert {t["figure"] for t in report["targets"]} == {name for _s, name, *_ in bench.TARGETS}


def test_whole_benchmark_runs_on_a_tiny_cohort_on_sqlite(tmp_path):
    import sqlite3

    report = _run_whole_bench(tmp_path, "--keep")
    _check_report(report)
    # the raw baseline stored every row the import wrote, table by table
    work = tmp_path / "work"
    imported, raw = sqlite3.connect(work / "bench.sqlite"), sqlite3.connect(work / "raw_all.sqlite")
    tables = report["figures"]["raw_insert"]["tables"].split(", ")
    counts = {t: imported.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables}
    assert {t: raw.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables} == counts
    assert sum(counts.values()) == report["figures"]["raw_insert"]["rows"]
    linked = "SELECT count(*) FROM person WHERE mother_id IS NOT NULL"
    assert raw.execute(linked).fetchone()[0] == imported.execute(linked).fetchone()[0] > 0


@pytest.mark.skipif(not PG_URL, reason=f"{PG_ENV} is not set")
def test_whole_benchmark_runs_on_a_tiny_cohort_on_postgresql(tmp_path):
    report = _run_whole_bench(tmp_path, "--db", PG_URL)
    _check_report(report)
    assert report["figures"]["raw_insert"]["all_tables_copy_s"] > 0


def test_release_drops_a_frame_mid_step_only_when_no_later_step_of_the_run_reads_it():
    import argparse
    from pathlib import Path

    def run(steps):
        r = bench.Run(args=argparse.Namespace(), workdir=Path("."), wanted=tuple(steps))
        r.frames.update(studies="S", people="P", long="L", recall="R")
        return r

    # statsmodels reads "long"; nothing after trends reads "studies" or "people".
    r = run(["read", "trends", "statsmodels"])
    r.release("trends", "studies", "people", "long")
    assert sorted(r.frames) == ["long", "recall"]
    # The worklist step reads "recall": still wanted after the trend step, so it is kept.
    r = run(["read", "trends", "worklist"])
    assert "recall" in r.still_used("trends")
    r.release("trends", "recall")
    assert "recall" in r.frames
    # A later step not in this run does not keep a frame.
    r = run(["read", "trends"])
    r.release("trends", "recall")
    assert "recall" not in r.frames
