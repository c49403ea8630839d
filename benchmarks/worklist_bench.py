"""Benchmark of the stored recall proposals: the worklist read from the store, and `recall --refresh`.

Figures, for synthetic cohorts of N families (``tracker synth --families N --seed 1``, imported
into a new SQLite file; the import itself stores every proposal):

refresh_s               ``tracker recall --refresh``: every proposal recomputed and stored
                        (:func:`tracker.services.proposals.refresh_all`), one transaction
trend_engine_s          the trend step of ``tracker.bench`` on the same cohort (per-person OLS,
                        consecutive changes, projected crossings, progression flags), and
refresh_over_trends     their ratio (target: within 3x)
worklist_90d_s          the worklist for a 90-day window from the stored rows
                        (:func:`tracker.services.worklist.nurse_worklist`, nothing to recompute:
                        the rows are that day's), best of three
read_listed_s           the indexed query alone that reads the stored proposals the worklist
                        lists (:func:`tracker.services.proposals.worklist_rows`), best of three, and
worklist_over_read      their ratio (target: within 3x)
worklist_recomputed_s   the worklist computed from every family's records (the code path before
                        the proposals were stored), for comparison, and
speedup                 its ratio to ``worklist_90d_s``
next_day_worklist_s     the same worklist read the next day: rows tied to the day they were
                        computed (due now, triggers...) and rows past ``valid_until`` are recomputed
                        and stored (the first read of a day); ``next_day_recomputed_families``

Run::

    .venv/bin/python benchmarks/worklist_bench.py --families 100 1000 10000

Every figure is measured in the run; nothing here is asserted (docs/performance.md).
"""

from __future__ import annotations

import argparse
import datetime as dt
import gc
import json
import sys
import tempfile
import time
from pathlib import Path


def _best(n: int, fn, *a, **kw) -> tuple[object, float]:
    best, out = float("inf"), None
    for _ in range(n):
        t0 = time.perf_counter()
        out = fn(*a, **kw)
        best = min(best, time.perf_counter() - t0)
    return out, best


def trend_step_s(engine) -> float:
    """The trend step of ``tracker.bench`` (its engine time) on the cohort of ``engine``."""
    from tracker import bench
    from tracker.engines import trends
    from tracker.store import repository as repo
    from tracker.store.database import reading

    with reading(engine) as conn:
        studies, people = repo.load_studies(conn, entered=False), repo.load_people(conn)
    df = bench._long_frame(studies, people)
    del studies
    gc.collect()
    t0 = time.perf_counter()
    ols = trends.per_person_ols(df)
    changes = trends.consecutive_changes(df)
    proj = trends.project_crossings(ols, {"mwt_echo": 13.0, "mwt_cmr": 13.0})
    trends.progression_flags(ols, changes, proj)
    return time.perf_counter() - t0


def measure_proposals(engine, on: dt.date, conf, rule_set, policy, trend_engine_s: float | None = None) -> dict:
    """The figures of the module docstring on the store of ``engine`` (services only)."""
    from tracker.services.worklist import worklist_lists
    from tracker.services import proposals as SP
    from tracker.services import worklist as SW
    from tracker.services.recall import load
    from tracker.store.database import reading, writing

    end = on + dt.timedelta(days=89)  # a 90-day window, first and last day included
    t0 = time.perf_counter()
    with writing(engine) as conn:
        refreshed = SP.refresh_all(conn, on, conf, rule_set, policy)
    refresh_s = time.perf_counter() - t0
    if trend_engine_s is None:
        trend_engine_s = trend_step_s(engine)
    got, worklist_s = _best(3, SW.nurse_worklist, engine, on, end, on, conf, rule_set, policy, None, today=on)

    def read_listed():
        with reading(engine) as conn:
            return SP.worklist_rows(conn, end)

    rows, read_s = _best(3, read_listed)

    def recomputed():
        with reading(engine) as conn:
            frames = load(conn)
        return worklist_lists(frames, conf, rule_set, policy, on, end, on, None)

    _, recomputed_s = _best(1, recomputed)
    nxt = on + dt.timedelta(days=1)
    t0 = time.perf_counter()
    nd = SW.nurse_worklist(engine, nxt, nxt + dt.timedelta(days=89), nxt, conf, rule_set, policy, None, today=nxt)
    next_day_s = time.perf_counter() - t0
    return {
        "families": refreshed["families"], "proposals": refreshed["proposals"], "listed_rows": len(rows),
        "worklist_due": len(got["due"]) + len(got["affected"]),
        "refresh_s": refresh_s, "trend_engine_s": trend_engine_s, "refresh_over_trends": refresh_s / trend_engine_s,
        "worklist_90d_s": worklist_s, "read_listed_s": read_s, "worklist_over_read": worklist_s / read_s,
        "worklist_recomputed_s": recomputed_s, "speedup": recomputed_s / worklist_s,
        "next_day_worklist_s": next_day_s, "next_day_recomputed_families": nd["read"]["stored_families"],
    }  # fmt: skip


def run_size(n: int, seed: int, workdir: Path, on: dt.date) -> dict:
    """Synthesise ``n`` families, import them into a new SQLite store, and measure."""
    from tracker import synth
    from tracker.io import csv_import
    from tracker.services.recall import recall_rules
    from tracker.store import migrate
    from tracker.store.database import locate, make_engine, writing

    folder = workdir / f"synth{n}"
    synth.write(synth.generate(n, seed), folder)  # as `tracker synth --families N --seed SEED`
    engine = make_engine(locate(str(workdir / f"store{n}.sqlite")), create=True)
    migrate.upgrade(engine)
    t0 = time.perf_counter()
    with writing(engine) as conn:
        csv_import.import_folder(conn, folder, user="bench", today=on)
    import_s = time.perf_counter() - t0
    conf, rule_set, policy = recall_rules(None, None)
    out = {"import_with_proposals_s": import_s, **measure_proposals(engine, on, conf, rule_set, policy)}
    engine.dispose()
    return out


TARGETS = (("worklist_over_read", 3.0, "worklist for a 90-day window within 3x reading the stored rows it lists"),
           ("refresh_over_trends", 3.0, "full recall --refresh within 3x the trend step"))  # fmt: skip


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--families", type=int, nargs="+", default=[100, 1000])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--json", type=Path, help="also write the figures to this file")
    args = ap.parse_args(argv)
    on = dt.date.today()
    results = {}
    with tempfile.TemporaryDirectory(prefix="worklist_bench_") as tmp:
        for n in args.families:
            results[n] = run_size(n, args.seed, Path(tmp), on)
            fig = results[n]
            print(f"{n} families ({fig['proposals']} proposals, {fig['listed_rows']} rows listed):")
            for k, v in fig.items():
                print(f"  {k:32s} {v:.4f}" if isinstance(v, float) else f"  {k:32s} {v}")
            for key, target, what in TARGETS:
                print(f"  target {what}: {fig[key]:.2f} <= {target} {'met' if fig[key] <= target else 'NOT met'}")
            sys.stdout.flush()
    if args.json:
        args.json.write_text(json.dumps(results, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
