"""Benchmark on a synthetic cohort: generation, import, whole-cohort trends, memory.

Run by hand (from the repository root; the test suite runs it once on a 30-family cohort to check that
every step works, and never asserts a time)::

    .venv/bin/python -m benchmarks.cohort --families 1000
    .venv/bin/python -m benchmarks.cohort --families 10000 --json bench.json
    .venv/bin/python -m benchmarks.cohort --db postgresql+psycopg://root@127.0.0.1:5432/test

Every figure and ratio printed is measured in the one run.  The benchmark is
a list of :class:`Step` objects (``STEPS``) run in order on one shared
:class:`Run`; a new measurement is added by appending a step.  Each step
returns a dict of figures; ``TARGETS`` compares some of them with the
project's goals.

Steps:

synth       generate the cohort and write its CSV files (tracker.synth)
import      ``tracker import all`` of the whole cohort into a new database, one
            transaction, timed file by file (tracker.io.csv_import)
raw_insert  every row the import wrote, read back and inserted table by table
            with a plain DB-API ``executemany`` into a new database of the
            store's own schema (made by the migrations; foreign keys on, as the
            store connects), in one transaction: sqlite3, or psycopg when
            ``--db`` is a PostgreSQL URL (and then psycopg ``COPY`` too).  The
            import's target is against this.  For comparison with earlier runs,
            also the measurement rows alone into an equivalent table without
            foreign keys (same columns, primary key, unique constraint and index)
read        the measurement table read alone (``SELECT *``), and the studies in
            long form through the repository (``load_studies``)
trends      per_person_ols, consecutive_changes, project_crossings and
            progression_flags on every (person, measure) series, and
            empirical_bayes_slopes on mwt_echo
statsmodels statsmodels OLS fitted series by series on a random sample of
            ``--sample`` series; per-series speed ratio and a check that both
            give the same slope, standard error and interval
worklist    what ``tracker worklist`` computes for a one-year window (due and
            overdue people, booking into weekly slots) on frames loaded from the
            store as the command loads them, on every tenth, fifth and second
            family (1x, 2x, 5x) and on the whole cohort (10x; at most
            ``--worklist-max-families`` if given), in two rounds over the sizes;
            growth ratio (best times at 10x and 1x) and growth exponent (slope of
            log time on log size over every run, with its 95% interval)
reclassification
            what ``tracker reclassify --dry-run`` computes for the variant of the
            largest single-variant family (impact on each relative, tasks), with
            a 1x store (every tenth family, plus that family) and the whole one
proposals   the stored recall proposals (``benchmarks/worklist_bench.py``): ``recall --refresh``
            against the trend step, the worklist for a 90-day window read from the store
            against the query that reads the rows it lists, and the worklist recomputed
per_person  ``tracker person``, ``recall``, ``cascade``, ``reclassify --dry-run``,
            ``report trajectory``, ``trends --family``, ``report pedigree`` and
            ``report letter`` (in-process, ``--json``, best of three after one
            untimed run) on the largest single-variant family and its member with the
            most studies, in new stores of ``--per-person-sizes`` families (default 100
            and 1,000; synthetic, same seed); each time, and each size's time over the
            smallest's (the stores are made first, then timed in rounds over the sizes)
families_sql
            ``tracker families --json`` against one aggregate SQL query over the same
            tables, on each ``--per-person-sizes`` store
check_sql   ``tracker check --json`` against SQLite's integrity and foreign-key checks
            and the orphan-row queries, on each store
help        ``tracker --help`` (a new process) against a bare typer app with the same
            command tree
trends_memory
            peak memory and time of ``tracker trends --json`` on the whole cohort, in
            its own process, on each store
memory      peak resident memory of this process (getrusage ru_maxrss)

The database is a new SQLite file in a temporary folder unless ``--db`` says
otherwise; a PostgreSQL URL gets a new schema, dropped at the end.
"""

from __future__ import annotations

import argparse
import gc
import cProfile
import datetime as dt
import io
import json
import os
import platform
import pstats
import resource
import sqlite3
import sys
import tempfile
import time
import uuid
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from tracker import synth
from tracker.io import csv_import
from tracker.io.layouts import LAYOUTS
from tracker.io.layouts import RECORD_KINDS as IMPORT_ORDER  # the six record files tracker synth writes

# --------------------------------------------------------------------------- run state


@dataclass
class Run:
    """What the steps share: options, where things are, and every figure measured so far."""

    args: argparse.Namespace
    workdir: Path
    cohort_dir: Path | None = None
    db_url: str | None = None
    is_postgres: bool = False
    engine: object = None
    figures: dict[str, dict] = field(default_factory=dict)
    frames: dict[str, pd.DataFrame] = field(default_factory=dict)
    cleanup: list[Callable[[], None]] = field(default_factory=list)
    wanted: tuple[str, ...] = ()  # the steps of this run, in order

    def fig(self, step: str, name: str):
        return self.figures.get(step, {}).get(name)

    def still_used(self, after: str) -> set[str]:
        """The shared frames that a step of this run after ``after`` reads."""
        names = [s.name for s in STEPS]
        later = names[names.index(after) + 1 :]
        return {u for s in STEPS if s.name in later and s.name in self.wanted for u in s.uses}

    def release(self, step: str, *names: str) -> None:
        """Drop the frames ``names`` now, mid-step, unless a later step of the run reads them."""
        keep = self.still_used(step)
        for name in names:
            if name not in keep:
                self.frames.pop(name, None)


@dataclass(frozen=True)
class Step:
    """One measurement. ``uses``: the shared frames (``Run.frames``) it reads; a frame that no
    step still to run uses is dropped, so the memory figures are the tool's, not leftovers."""

    name: str
    description: str
    run: Callable[[Run], dict]
    uses: tuple[str, ...] = ()


def _timed(fn, *a, **kw):
    t0 = time.perf_counter()
    out = fn(*a, **kw)
    return out, time.perf_counter() - t0


def _rss_mb() -> float:
    """Peak resident set size of this process so far, MB (Linux reports ru_maxrss in KiB)."""
    kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return kib / 1024.0 if sys.platform != "darwin" else kib / 1024.0**2


# --------------------------------------------------------------------------- steps


def step_synth(r: Run) -> dict:
    if r.args.cohort:
        r.cohort_dir = Path(r.args.cohort)
        if not (r.cohort_dir / "studies.csv").exists():
            raise SystemExit(f"--cohort {r.cohort_dir}: no studies.csv there")
        return {"reused_folder": str(r.cohort_dir), **_file_rows(r.cohort_dir)}
    r.cohort_dir = r.workdir / "cohort"
    cohort, t_gen = _timed(synth.generate, r.args.families, r.args.seed)
    _, t_write = _timed(synth.write, cohort, r.cohort_dir)
    counts = cohort.counts()
    del cohort
    return {
        "families": counts["families"], "people": counts["people"], "studies": counts["studies"],
        "values": counts["values"], "csv_rows": _total_rows(r.cohort_dir),
        "generate_s": t_gen, "write_s": t_write, "total_s": t_gen + t_write,
        "studies_csv_mb": (r.cohort_dir / "studies.csv").stat().st_size / 1e6,
    }  # fmt: skip


def _file_rows(folder: Path) -> dict:
    return {LAYOUTS[k].file_name: _count_lines(folder / LAYOUTS[k].file_name) for k in IMPORT_ORDER}


def _count_lines(path: Path) -> int:
    with open(path, "rb") as fh:
        return max(sum(1 for _ in fh) - 1, 0)


def _total_rows(folder: Path) -> int:
    return sum(_file_rows(folder).values())


def _new_postgres_schema(r: Run, prefix: str, keep: bool = False) -> str:
    """A new schema on the ``--db`` server, dropped at the end unless ``keep``: a URL with it as search_path."""
    from sqlalchemy import create_engine, text

    base = r.args.db
    schema = f"{prefix}_{uuid.uuid4().hex[:10]}"
    admin = create_engine(base)
    with admin.begin() as conn:
        conn.execute(text(f'CREATE SCHEMA "{schema}"'))

    def _drop():
        with admin.begin() as conn:
            conn.execute(text(f'DROP SCHEMA "{schema}" CASCADE'))
        admin.dispose()

    r.cleanup.append(_drop if not keep else admin.dispose)
    sep = "&" if "?" in base else "?"
    return f"{base}{sep}options=-csearch_path%3D{schema}"


def _open_database(r: Run) -> None:
    from tracker.store import migrate
    from tracker.store.database import locate, make_engine

    if r.args.db and "://" in r.args.db and r.args.db.startswith("postgresql"):
        r.is_postgres = True
        r.db_url = _new_postgres_schema(r, "bench", keep=r.args.keep)
    else:
        path = Path(r.args.db) if r.args.db else r.workdir / "bench.sqlite"
        if path.exists():
            raise SystemExit(f"--db {path} exists; the benchmark needs a new database file")
        r.db_url = str(path)
    r.engine = make_engine(locate(r.db_url), create=True)
    r.cleanup.insert(0, r.engine.dispose)
    migrate.upgrade(r.engine)


def step_import(r: Run) -> dict:
    from tracker.store.database import writing

    _open_database(r)
    out: dict = {"database": "postgresql" if r.is_postgres else "sqlite"}
    prof = cProfile.Profile() if r.args.profile_import else None
    t_all = time.perf_counter()
    with writing(r.engine) as conn:
        # As `tracker import all` does: the store's frames loaded once for the six files.
        ctx, out["context_s"] = _timed(csv_import.context, conn, dt.date.today())
        for kind in IMPORT_ORDER:
            path = r.cohort_dir / LAYOUTS[kind].file_name
            if prof:
                prof.enable()
            s, t = _timed(csv_import.import_file, conn, kind, path, user="bench", ctx=ctx)
            if prof:
                prof.disable()
            out[f"{kind}_rows"] = s.rows_read
            out[f"{kind}_s"] = t
            print(f"    import {kind}: {s.rows_read} rows in {t:.1f} s", flush=True)
        t_commit = time.perf_counter()
    out["commit_s"] = time.perf_counter() - t_commit
    total = time.perf_counter() - t_all
    rows = sum(v for k, v in out.items() if k.endswith("_rows"))
    out.update(total_s=total, rows=rows, rows_per_s=rows / total)
    out["studies_rows_per_s"] = out["studies_rows"] / out["studies_s"]
    if prof:
        prof.dump_stats(r.args.profile_import)
        buf = io.StringIO()
        pstats.Stats(prof, stream=buf).sort_stats("cumulative").print_stats(40)
        print(buf.getvalue())
        out["profile"] = str(r.args.profile_import)
    return out


_MEASUREMENT_DDL = (
    "CREATE TABLE measurement (id INTEGER NOT NULL PRIMARY KEY, study_id INTEGER NOT NULL, "
    "measure_code VARCHAR(40) NOT NULL, value FLOAT NOT NULL, unit VARCHAR(20) NOT NULL, "
    "entered_value FLOAT NOT NULL, entered_unit VARCHAR(20) NOT NULL, "
    "CONSTRAINT uq_measurement_study_id UNIQUE (study_id, measure_code))"
)
_MEASUREMENT_INDEX = "CREATE INDEX ix_measurement_study_id ON measurement (study_id)"
_INSERT = (
    "INSERT INTO measurement (id, study_id, measure_code, value, unit, entered_value, entered_unit) "
    "VALUES ({p}, {p}, {p}, {p}, {p}, {p}, {p})"
)


_LINKS = ("mother_id", "father_id", "twin_of_id")  # person -> person links, set after all people are in


def _written_tables(r: Run) -> list[tuple[str, list[str]]]:
    """(table, columns) of every table the import wrote rows to, parents before children.

    Tables that a new database already fills (the measure catalogue the migrations seed)
    are left out: the import does not write them.
    """
    from tracker.store.models import Base

    out = []
    with r.engine.connect() as conn:
        for t in Base.metadata.sorted_tables:
            if t.name == "measure" or conn.exec_driver_sql(f"SELECT 1 FROM {t.name} LIMIT 1").first() is None:
                continue
            out.append((t.name, [c.name for c in t.columns]))
    return out


RAW_CHUNK_ROWS = 200_000  # rows fetched from the imported database per chunk of the raw insert (memory only)


def _chunks(r: Run, table: str, columns: list[str]):
    """Every row of ``table`` in id order, as lists of the driver's plain tuples, a chunk at a time.

    On PostgreSQL through a server-side (named) cursor, so the client holds one chunk, not the
    whole table.
    """
    source = r.engine.raw_connection()
    try:
        driver = source.driver_connection
        cur = driver.cursor(name=f"bench_{table}") if r.is_postgres else driver.cursor()
        cur.execute(f"SELECT {', '.join(columns)} FROM {table} ORDER BY id")
        while rows := cur.fetchmany(RAW_CHUNK_ROWS):
            yield rows
        cur.close()
    finally:
        source.rollback()
        source.close()


def _insert_all(r: Run, cur, mark: str, tables, copy: bool = False) -> tuple[float, int]:
    """Insert every written table's rows through ``cur``: executemany, or psycopg COPY.

    Returns (seconds spent inserting, rows inserted). The rows are fetched from the imported
    database a chunk at a time, between the timed inserts (the fetching is not timed), so that
    only one chunk is held; an ``executemany`` per chunk in the one transaction stores the same
    as one over every row. Person rows go in with their links empty and get them in one
    executemany UPDATE after, as the importer does (a parent may come after a child in id order).
    """
    spent, count = 0.0, 0
    for table, columns in tables:
        names = ", ".join(columns)
        links = []
        at = [columns.index(c) for c in _LINKS] if table == "person" else []
        pid = columns.index("id")
        for rows in _chunks(r, table, columns):
            if at:
                links += [(*(row[i] for i in at), row[pid]) for row in rows if any(row[i] is not None for i in at)]
                rows = [tuple(None if i in at else v for i, v in enumerate(row)) for row in rows]
            t0 = time.perf_counter()
            if copy:
                with cur.copy(f"COPY {table} ({names}) FROM STDIN") as cp:
                    for row in rows:
                        cp.write_row(row)
            else:
                cur.executemany(f"INSERT INTO {table} ({names}) VALUES ({', '.join([mark] * len(columns))})", rows)
            spent += time.perf_counter() - t0
            count += len(rows)
        if links:
            sets = ", ".join(f"{c} = {mark}" for c in _LINKS)
            t0 = time.perf_counter()
            cur.executemany(f"UPDATE person SET {sets} WHERE id = {mark}", links)
            spent += time.perf_counter() - t0
    return spent, count


def _insert_measurements_only(r: Run, cur, mark: str, columns: list[str]) -> tuple[float, int]:
    """The measurement rows alone into the FK-less equivalent table (the earlier yardstick)."""
    spent, count = 0.0, 0
    for rows in _chunks(r, "measurement", columns):
        t0 = time.perf_counter()
        cur.executemany(_INSERT.format(p=mark), rows)
        spent += time.perf_counter() - t0
        count += len(rows)
    return spent, count


def _new_store(r: Run, name: str) -> str:
    """A new, empty database of the store's schema, same backend as the run: its URL or file path."""
    from tracker.store import migrate
    from tracker.store.database import locate, make_engine

    if r.is_postgres:
        url = _new_postgres_schema(r, name)
    else:
        url = str(r.workdir / f"{name}.sqlite")
        for suffix in ("", "-wal", "-shm"):
            Path(url + suffix).unlink(missing_ok=True)
    engine = make_engine(locate(url), create=True)
    migrate.upgrade(engine)
    engine.dispose()
    return url


def _psycopg(url: str):
    """A plain psycopg connection to a run's PostgreSQL URL (schema in its search_path)."""
    import psycopg
    from sqlalchemy.engine import make_url

    u = make_url(url)
    return psycopg.connect(host=u.host, port=u.port, user=u.username, password=u.password, dbname=u.database,
                           options=u.query.get("options", "").replace("%3D", "="))  # fmt: skip


def _timed_commit(conn) -> float:
    t0 = time.perf_counter()
    conn.commit()
    return time.perf_counter() - t0


def step_raw_insert(r: Run) -> dict:
    tables = _written_tables(r)
    m_columns = dict(tables)["measurement"]
    out: dict = {"tables": ", ".join(t for t, _ in tables)}

    # 1. Every row the import wrote, into a new database of the store's schema, in one transaction.
    if r.is_postgres:
        with _psycopg(_new_store(r, "raw_all")) as pg, pg.cursor() as cur:
            spent, out["rows"] = _insert_all(r, cur, "%s", tables)
            out["all_tables_psycopg_s"] = spent + _timed_commit(pg)
        with _psycopg(_new_store(r, "raw_copy")) as pg, pg.cursor() as cur:
            spent, _ = _insert_all(r, cur, "%s", tables, copy=True)
            out["all_tables_copy_s"] = spent + _timed_commit(pg)
        base = out["all_tables_psycopg_s"]
    else:
        db = sqlite3.connect(_new_store(r, "raw_all"), isolation_level=None)  # the store made it WAL
        db.execute("PRAGMA foreign_keys = ON")  # as the store connects
        db.execute("BEGIN IMMEDIATE")
        spent, out["rows"] = _insert_all(r, db.cursor(), "?", tables)
        out["all_tables_sqlite3_s"] = base = spent + _timed_commit(db)
        db.close()
    out["rows_per_s"] = out["rows"] / base
    out["import_over_raw"] = r.fig("import", "total_s") / base
    if r.is_postgres:
        out["import_over_copy"] = r.fig("import", "total_s") / out["all_tables_copy_s"]

    # 2. The measurement rows alone, ids included, into an equivalent table without foreign keys
    #    (the yardstick of the earlier runs in docs/performance.md).
    path = r.workdir / "raw.sqlite"
    path.unlink(missing_ok=True)
    db = sqlite3.connect(path, isolation_level=None)
    db.execute("PRAGMA journal_mode = WAL")
    db.execute("PRAGMA foreign_keys = ON")
    db.execute(_MEASUREMENT_DDL)
    db.execute(_MEASUREMENT_INDEX)
    db.execute("BEGIN IMMEDIATE")
    spent, out["measurement_rows"] = _insert_measurements_only(r, db.cursor(), "?", m_columns)
    out["measurement_only_sqlite3_s"] = spent + _timed_commit(db)
    db.close()
    if r.is_postgres:
        with _psycopg(_new_postgres_schema(r, "raw_m")) as pg:
            with pg.cursor() as cur:
                cur.execute(_MEASUREMENT_DDL)
                cur.execute(_MEASUREMENT_INDEX)
            pg.commit()
            with pg.cursor() as cur:
                spent, _ = _insert_measurements_only(r, cur, "%s", m_columns)
            out["measurement_only_psycopg_s"] = spent + _timed_commit(pg)
    single = out["measurement_only_psycopg_s"] if r.is_postgres else out["measurement_only_sqlite3_s"]
    out["import_over_measurement_only"] = r.fig("import", "total_s") / single
    out["studies_file_over_measurement_only"] = r.fig("import", "studies_s") / single
    return out


def _existing_engine(r: Run):
    """The engine of the run, or of ``--existing-db`` when the import step was not run."""
    if r.engine is None:
        from tracker.store.database import locate, make_engine

        if not r.args.existing_db:
            raise SystemExit("the read step needs the import step first, or --existing-db")
        r.db_url = r.args.existing_db
        r.is_postgres = r.db_url.startswith("postgresql")
        r.engine = make_engine(locate(r.db_url))
        r.cleanup.insert(0, r.engine.dispose)
    return r.engine


def step_read(r: Run) -> dict:
    from tracker.store import repository as repo
    from tracker.store.database import reading

    with reading(_existing_engine(r)) as conn:
        # Every row fetched, streamed in batches (not kept: the read alone, no frame built).
        t0 = time.perf_counter()
        n = 0
        for batch in conn.exec_driver_sql("SELECT * FROM measurement").partitions(50_000):
            n += len(batch)
        t_raw = time.perf_counter() - t0
        rss_before = _rss_mb()
        studies, t_studies = _timed(repo.load_studies, conn, entered=False)
        people, t_people = _timed(repo.load_people, conn)
    r.frames["studies"], r.frames["people"] = studies, people
    return {"measurement_rows": n, "measurement_table_s": t_raw, "load_studies_s": t_studies,
            "load_people_s": t_people, "peak_rss_mb_before_load_studies": rss_before,
            "studies_frame_mb": float(studies.memory_usage(deep=True).sum() / 1e6),
            # deep counts a shared string once per row; the arrays alone (strings are shared):
            "studies_frame_arrays_mb": float(studies.memory_usage(deep=False).sum() / 1e6),
            "peak_rss_mb_after_load_studies": _rss_mb()}  # fmt: skip


def _long_frame(studies: pd.DataFrame, people: pd.DataFrame) -> pd.DataFrame:
    """The trend engine's long frame: one row per value with age at the study (days / 365.2425)."""
    s = studies[studies["measure"].notna()]
    birth = people.set_index("person")["birth_date"]
    b = s["person"].map(birth).astype(object)
    b = b.where(b.str.len() != 4, b + "-07-01")  # a year-only birth date stands for 1 July
    bd = pd.to_datetime(b, format="%Y-%m-%d").to_numpy(dtype="datetime64[D]")
    sd = pd.to_datetime(s["study_date"], format="%Y-%m-%d").to_numpy(dtype="datetime64[D]")
    return pd.DataFrame({
        "person": s["person"].to_numpy(dtype=object), "measure": s["measure"].to_numpy(dtype=object),
        "modality": s["modality"].to_numpy(dtype=object), "study_date": sd,
        "age_years": (sd - bd).astype(np.int64) / 365.2425, "value": s["value"].to_numpy(dtype=float),
    })  # fmt: skip


def step_trends(r: Run) -> dict:
    from tracker.engines import trends
    from tracker.engines.cohort_model import empirical_bayes_slopes

    df, t_frame = _timed(_long_frame, r.frames["studies"], r.frames["people"])
    # The studies frame is not the engine's input: once the long frame is built it is let go,
    # as a pipeline reading the store would, so the peak is the engine's working set.
    r.release("trends", "studies", "people")
    gc.collect()
    ols, t_ols = _timed(trends.per_person_ols, df)
    changes, t_changes = _timed(trends.consecutive_changes, df)
    proj, t_proj = _timed(trends.project_crossings, ols, {"mwt_echo": 13.0, "mwt_cmr": 13.0})
    _, t_flags = _timed(trends.progression_flags, ols, changes, proj)
    _, t_eb = _timed(empirical_bayes_slopes, df, "mwt_echo")
    r.frames["long"], r.frames["ols"] = df, ols
    engine_s = t_ols + t_changes + t_proj + t_flags
    raw = r.fig("read", "measurement_table_s")
    return {
        "values": len(df), "series": len(ols), "series_n_ge_3": int((ols["n"] >= 3).sum()),
        "long_frame_s": t_frame, "per_person_ols_s": t_ols, "consecutive_changes_s": t_changes,
        "project_crossings_s": t_proj, "progression_flags_s": t_flags, "empirical_bayes_mwt_echo_s": t_eb,
        "engine_s": engine_s,
        "ols_over_read": t_ols / raw, "engine_over_read": engine_s / raw,
        "engine_and_frame_over_read": (engine_s + t_frame) / raw,
    }  # fmt: skip


def step_statsmodels(r: Run) -> dict:
    import statsmodels.api as sm

    df, ols = r.frames["long"], r.frames["ols"]
    eligible = ols[(ols["n"] >= 3) & np.isfinite(ols["se_slope"])]
    rng = np.random.default_rng(r.args.seed)
    k = min(r.args.sample, len(eligible))
    pick = eligible.iloc[np.sort(rng.choice(len(eligible), size=k, replace=False))]
    keys = set(zip(pick["person"], pick["measure"]))
    sub = df[pd.MultiIndex.from_arrays([df["person"], df["measure"]]).isin(keys)]
    groups = {key: g for key, g in sub.groupby(["person", "measure"], sort=False)}
    fits = []
    t0 = time.perf_counter()
    for key in zip(pick["person"], pick["measure"]):
        g = groups[key]
        res = sm.OLS(g["value"].to_numpy(), sm.add_constant(g["age_years"].to_numpy())).fit()
        ci = res.conf_int(0.05)
        fits.append((res.params[1], res.bse[1], ci[1, 0], ci[1, 1], res.pvalues[1]))
    t_sm = time.perf_counter() - t0
    got = np.array(fits, dtype=float)
    ours = pick[["slope", "se_slope", "ci_low", "ci_high", "p_value"]].to_numpy(dtype=float).copy()
    # A series whose values lie exactly on a line (e.g. a value clipped to the same number at every
    # study) has no residual scatter: its p-value is 0/0, NaN here and NaN or round-off in statsmodels.
    # Such series are counted and their p-values left out of the comparison.
    exact = pick["resid_sd"].to_numpy(dtype=float) < 1e-9
    got[exact, 4] = ours[exact, 4] = 0.0
    both = np.isfinite(got) & np.isfinite(ours)
    diff = np.where(both, np.abs(got - ours), 0.0)
    scale = np.maximum(np.abs(got), 1e-12)
    nan_mismatch = int((np.isnan(got) != np.isnan(ours)).sum())
    equal = bool(np.allclose(ours, got, rtol=1e-7, atol=1e-10, equal_nan=True))
    per_sm = t_sm / k
    per_ours = r.fig("trends", "per_person_ols_s") / r.fig("trends", "series")
    return {
        "sample_series": k, "statsmodels_s": t_sm, "statsmodels_per_series_ms": per_sm * 1e3,
        "per_person_ols_per_series_us": per_ours * 1e6, "per_series_speed_ratio": per_sm / per_ours,
        "statsmodels_whole_cohort_estimate_s": per_sm * r.fig("trends", "series"),
        "equal_results": equal, "max_abs_diff": float(diff.max()),
        "max_rel_diff": float((diff / scale)[np.abs(got) > 1e-9].max()),
        "exact_fit_series": int(exact.sum()), "nan_mismatches": nan_mismatch,
    }  # fmt: skip


def _recall_frames(r: Run):
    """The store frames the recall commands load (``tracker.services.recall._load``), loaded once per run."""
    from tracker.services import recall
    from tracker.store.database import reading

    if "recall" not in r.frames:
        with reading(_existing_engine(r)) as conn:
            r.frames["recall"], r.frames["recall_load_s"] = _timed(recall._load, conn)
    return r.frames["recall"], r.frames["recall_load_s"]


def _subset(frames, families: set[str]):
    """The recall frames restricted to ``families`` (the same kind of store, smaller)."""
    import dataclasses

    people = frames.people[frames.people["family"].isin(families)]
    codes = set(people["person"])
    return dataclasses.replace(
        frames, families=frames.families[frames.families["family"].isin(families)], people=people,
        variants=frames.variants[frames.variants["family"].isin(families)],
        results=frames.results[frames.results["person"].isin(codes)],
        assessments=frames.assessments[frames.assessments["person"].isin(codes)],
        studies=frames.studies[frames.studies["person"].isin(codes)], pending=frames.pending & codes,
    )  # fmt: skip


def _tenth(frames, keep: str | None = None) -> set[str]:
    """Every tenth family (sorted by code), plus ``keep``: the 1x cohort of a 10x store."""
    codes = sorted(frames.families["family"])
    return set(codes[::10]) | ({keep} if keep else set())


def _best_of(n: int, fn, *a):
    """(result, shortest time of n runs): the least disturbed run on a shared machine."""
    best, out = float("inf"), None
    for _ in range(n):
        out, t = _timed(fn, *a)
        best = min(best, t)
    return out, best


def _growth(t_1x: float, t_10x: float, n_1x: int, n_10x: int) -> dict:
    size = n_10x / n_1x
    return {"size_ratio": size, "time_ratio": t_10x / t_1x, "time_ratio_per_size": (t_10x / t_1x) / size}


WORKLIST_SLOTS = 50  # weekly capacity used for the booking part (the command books when given --slots-per-week)


def _worklist(frames, conf, rule_set, policy, start: dt.date, end: dt.date, on: dt.date) -> tuple[int, int]:
    """What ``tracker worklist --from start --to end --slots-per-week N`` computes, without rendering."""
    from tracker.engines.worklist import book_into_slots, lost_to_follow_up, not_recalled
    from tracker.services.worklist import due_proposals

    screening, affected, _family_of, _trend, proposals = due_proposals(
        frames, conf, rule_set, policy, start, end, on)  # fmt: skip
    weeks = -(-((end - start).days + 1) // 7)
    book_into_slots(screening, start, weeks, WORKLIST_SLOTS)
    not_recalled(proposals)
    lost_to_follow_up(screening + affected)
    return len(screening), len(affected)


WORKLIST_EVERY = (10, 5, 2, 1)  # the worklist step's cohorts: every k-th family (1x, 2x, 5x and 10x the first)
WORKLIST_ROUNDS = 2  # timed runs at each size, taken in rounds over the sizes


def _every(frames, k: int):
    """Every k-th family (sorted by code): the whole cohort for k = 1."""
    return frames if k == 1 else _subset(frames, set(sorted(frames.families["family"])[::k]))


def _growth_exponent(sizes: list[int], times: list[float]) -> dict:
    """Slope of log(time) on log(size), by OLS over every timed run, with its 95% interval.

    Time growing as size**b gives slope b: 1 is linear growth, below 1 better than linear.
    A fit over several sizes and runs says more than one ratio of two times, which the
    machine's noise moves by several per cent.
    """
    import statsmodels.api as sm

    fit = sm.OLS(np.log(times), sm.add_constant(np.log(np.asarray(sizes, dtype=float)))).fit()
    low, high = fit.conf_int(0.05)[1]
    return {"growth_exponent": float(fit.params[1]), "growth_exponent_ci95": [float(low), float(high)],
            "growth_fit_runs": len(times)}  # fmt: skip


def step_worklist(r: Run) -> dict:
    from tracker.services import recall

    frames, t_load = _recall_frames(r)
    conf, rule_set, policy = recall._recall_rules(None, None)
    on = dt.date.today()
    start, end = on, on + dt.timedelta(days=364)
    cap = r.args.worklist_max_families
    whole = _every(frames, -(-len(frames.families) // cap)) if cap and len(frames.families) > cap else frames
    cohorts = [_every(whole, k) for k in WORKLIST_EVERY]
    _worklist(_every(whole, 100), conf, rule_set, policy, start, end, on)  # warm-up: imports, caches (not timed)
    # Rounds over the sizes (1x, 2x, 5x, 10x, then again), so that a change in the machine's
    # state during the step falls on every size alike; the shortest time at each size counts.
    sizes, times, best, counts = [], [], [float("inf")] * len(cohorts), [None] * len(cohorts)
    for _ in range(WORKLIST_ROUNDS):
        for i, cohort in enumerate(cohorts):
            counts[i], t = _timed(_worklist, cohort, conf, rule_set, policy, start, end, on)
            sizes.append(len(cohort.families))
            times.append(t)
            best[i] = min(best[i], t)
    small, n_1x, n_10x = cohorts[0], len(cohorts[0].families), len(whole.families)
    (due_1x, aff_1x), (due_10x, aff_10x) = counts[0], counts[-1]
    return {
        "window": f"{start.isoformat()} to {end.isoformat()}", "rule_set": rule_set.id, "policy": policy.point,
        "slots_per_week": WORKLIST_SLOTS, "store_load_s": t_load,
        "families_1x": n_1x, "people_1x": len(small.people), "due_1x": due_1x, "affected_due_1x": aff_1x,
        "worklist_1x_s": best[0],
        "cohort_families": len(frames.families),
        "families_10x": n_10x, "people_10x": len(whole.people), "due_10x": due_10x, "affected_due_10x": aff_10x,
        "worklist_10x_s": best[-1], **_growth(best[0], best[-1], n_1x, n_10x),
        "families_by_size": [len(c.families) for c in cohorts], "best_s_by_size": best,
        **_growth_exponent(sizes, times),
    }  # fmt: skip


def _impact(frames, family: str, new_class: str, rule_set, policy, on: dt.date):
    """What ``tracker reclassify FAMILY --to NEW --dry-run`` computes for the family's variant, without writing."""
    from tracker.services import cascade, recall
    from tracker.engines import family_state as fs
    from tracker.engines.reclassification import impact_of_reclassification

    state = recall._family_state(frames, family, None)
    v = state.variant
    proposals = fs.propose_for_family(state, rule_set, policy, on)
    screening = fs.screening_states(proposals)
    items, _notes = fs.task_items(
        fs.with_shown_statuses(
            impact_of_reclassification(state.pedigree, state.results, v.current_class, new_class, screening,
                                       variant=v.key, affected=state.affected, history=v.history,
                                       contact_dates=cascade._contact_dates(frames, family), on=on),
            state, v.current_class, new_class),
        state,
    )  # fmt: skip
    return len(items)


def step_reclassification(r: Run) -> dict:
    from tracker.services import recall
    from tracker.engines import family_state as fs

    frames, t_load = _recall_frames(r)
    _conf, rule_set, policy = recall._recall_rules(None, None)
    with_variant = fs.family_variants(frames.variants)
    one = {f for f, vs in with_variant.items() if len(vs) == 1}
    sizes = frames.people[frames.people["family"].isin(one)].groupby("family").size()
    family = str(sizes.sort_values(ascending=False, kind="stable").index[0])
    v = with_variant[family][0]
    new_class = "uncertain_significance" if v.current_class in ("pathogenic", "likely_pathogenic") else "pathogenic"
    on = dt.date.today()
    small = _subset(frames, _tenth(frames, keep=family))
    items_1x, t_1x = _best_of(3, _impact, small, family, new_class, rule_set, policy, on)
    items_10x, t_10x = _best_of(3, _impact, frames, family, new_class, rule_set, policy, on)
    n_1x, n_10x = len(small.families), len(frames.families)
    return {
        "family": family, "members": int(sizes[family]), "variant": v.key, "from_class": v.current_class,
        "to_class": new_class, "tasks": items_10x, "tasks_agree": items_1x == items_10x, "store_load_s": t_load,
        "families_1x": n_1x, "impact_1x_s": t_1x, "families_10x": n_10x, "impact_10x_s": t_10x,
        **_growth(t_1x, t_10x, n_1x, n_10x),
    }  # fmt: skip


PER_PERSON_ROUNDS = 3  # timed runs of each command; the shortest counts


def _cli(argv: list[str]) -> int:
    """Run one command in-process as a user would (output discarded); its exit code."""
    import contextlib

    from tracker.cli.app import main as cli_main

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        return cli_main(argv)


def _stores(r: Run) -> dict[int, str]:
    """``--stores 100=PATH,1000=PATH``: stores made earlier (`tracker synth --families N --seed 1`,
    `tracker import all`), by size."""
    out = {}
    for part in (getattr(r.args, "stores", None) or "").split(","):
        if part.strip():
            n, _, path = part.partition("=")
            out[int(n)] = path
    return out


def _per_person_store(r: Run, n: int) -> str:
    """The store of ``n`` families given by ``--stores``, else a new SQLite store of a synthetic cohort
    of ``n`` families (seed of the run), imported by the CLI."""
    if n in _stores(r):
        return _stores(r)[n]
    folder = r.workdir / f"per-person-{n}"
    if (folder / "store.sqlite").exists() and (folder / "cohort").exists():  # made by an earlier step of the run
        return str(folder / "store.sqlite")
    synth.write(synth.generate(n, r.args.seed), folder / "cohort")
    db = str(folder / "store.sqlite")
    for argv in (["init", "--db", db], ["import", "all", str(folder / "cohort"), "--db", db]):
        if _cli(argv) != 0:
            raise SystemExit(f"per_person: `tracker {' '.join(argv)}` failed")
    return db


def _per_person_subject(db: str) -> tuple[str, str, str]:
    """(family, person, new class): the largest family with one variant, its member with the most studies."""
    from tracker.engines import family_state as fs
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(db))
    with reading(engine) as conn:
        people, variants = repo.load_people(conn), repo.load_variants(conn)
        studies = repo.load_studies(conn, entered=False)
    engine.dispose()
    one = {f for f, vs in fs.family_variants(variants).items() if len(vs) == 1}
    sizes = people[people["family"].isin(one)].groupby("family").size()
    family = str(sizes.sort_values(ascending=False, kind="stable").index[0])
    members = set(people.loc[people["family"] == family, "person"])
    counts = studies[studies["person"].isin(members)].groupby("person")["study_date"].nunique()
    person = str(counts.sort_values(ascending=False, kind="stable").index[0]) if len(counts) else sorted(members)[0]
    current = fs.family_variants(variants)[family][0].current_class
    return family, person, "uncertain_significance" if current != "uncertain_significance" else "likely_pathogenic"


# The invented demo clinic's settings (a letter needs the clinic's contact details).
CLINIC = str(Path(__file__).resolve().parent.parent / "demo_family" / "clinic.toml")


def _letter_subject(db: str, family: str, pdf_dir: str, today: str) -> str:
    """The first member of ``family`` (by code) who gets a family letter (not affected, living, ...)."""
    from tracker.store import repository as repo
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(db))
    with reading(engine) as conn:
        members = sorted(repo.load_people(conn, repo.Scope.families([family]))["person"])
    engine.dispose()
    for code in members:
        if _cli(["report", "letter", code, "--out", pdf_dir, "--date", today, "--settings", CLINIC, "--db", db,
                 "--json"]) == 0:
            return code
    raise SystemExit(f"per_person: no member of {family} gets a family letter")


def step_per_person(r: Run) -> dict:
    """Per-person and per-family commands (person, recall, cascade, reclassify --dry-run, report
    trajectory) on one person/family of stores of each size in ``--per-person-sizes``: each reads
    only the family, so the time should hardly grow with the store. The stores are made first, then
    every command is timed in rounds over the sizes (a change in the machine's load falls on every
    size alike); the shortest time counts."""
    sizes = [int(x) for x in r.args.per_person_sizes.split(",")]
    today = dt.date.today().isoformat()
    rounds = getattr(r.args, "rounds", None) or PER_PERSON_ROUNDS
    out: dict = {"sizes": sizes}
    runs: dict[int, dict[str, list[str]]] = {}
    for n in sizes:
        db = _per_person_store(r, n)
        family, person, new = _per_person_subject(db)
        pdf_dir = str(r.workdir / f"per-person-{n}" / "reports")
        commands = {
            "person": ["person", person],
            "recall": ["recall", person],
            "cascade": ["cascade", family],
            "reclassify_dry_run": ["reclassify", family, "--to", new, "--date", today, "--reason", "benchmark",
                                   "--dry-run"],
            "report_trajectory": ["report", "trajectory", person, "--out", pdf_dir],
            "trends_family": ["trends", "--family", family],
            "report_pedigree": ["report", "pedigree", family, "--out", pdf_dir],
            "report_letter": ["report", "letter", _letter_subject(db, family, pdf_dir, today), "--out", pdf_dir,
                              "--date", today, "--settings", CLINIC],
        }  # fmt: skip
        out[f"subject_{n}"] = f"{family} / {person}"
        runs[n] = {name: argv + ["--db", db, "--json"] for name, argv in commands.items()}
        for argv in runs[n].values():
            code = _cli(argv)  # warm-up (imports, caches), not timed
            if code != 0:
                raise SystemExit(f"per_person: `tracker {' '.join(argv)}` exited {code}")
    best: dict[tuple[str, int], float] = {}
    for _ in range(rounds):
        for n in sizes:
            for name, argv in runs[n].items():
                _, t = _timed(_cli, argv)
                best[name, n] = min(best.get((name, n), float("inf")), t)
    names = list(runs[sizes[0]])
    for n in sizes:
        for name in names:
            out[f"{name}_{n}_s"] = best[name, n]
    for n in sizes[1:]:
        for name in names:
            out[f"{name}_ratio_{n}_over_{sizes[0]}"] = best[name, n] / best[name, sizes[0]]
    if len(sizes) > 1:
        out["worst_ratio_largest_over_smallest"] = max(out[f"{name}_ratio_{sizes[-1]}_over_{sizes[0]}"] for name in names)
    return out

# --------------------------------------------------------------------------- command against its floor

FLOOR_ROUNDS = 3  # timed runs of a command and of its floor, alternating; the shortest of each counts

# One aggregate query over the tables `tracker families` reads: per family the members, genotype
# results, studies (count, first, last) and the variants at their latest class.
FAMILIES_SQL = """
WITH m AS (SELECT family_id, count(*) AS n, max(is_proband) AS proband FROM person
           WHERE removed_at IS NULL AND NOT is_placeholder GROUP BY family_id),
     g AS (SELECT p.family_id, sum(g.result = 'carrier') AS carriers, sum(g.result = 'non_carrier') AS non_carriers,
                  sum(g.result = 'no_variant_found') AS none_found
           FROM genetic_result g JOIN person p ON p.id = g.person_id WHERE p.removed_at IS NULL GROUP BY p.family_id),
     s AS (SELECT p.family_id, count(*) AS n, min(s.study_date) AS first, max(s.study_date) AS last
           FROM study s JOIN person p ON p.id = s.person_id
           WHERE s.removed_at IS NULL AND p.removed_at IS NULL GROUP BY p.family_id),
     v AS (SELECT v.family_id, group_concat(v.gene || ' ' || v.transcript || ':' || v.hgvs_c || ' (' || c.acmg_class || ')',
                                            '; ') AS variants
           FROM variant v JOIN variant_classification c ON c.variant_id = v.id
           WHERE c.classified_on = (SELECT max(classified_on) FROM variant_classification WHERE variant_id = v.id)
           GROUP BY v.family_id)
SELECT f.code, f.condition, m.n, m.proband, v.variants, g.carriers, g.non_carriers, g.none_found, s.n, s.first, s.last
FROM family f LEFT JOIN m ON m.family_id = f.id LEFT JOIN g ON g.family_id = f.id
     LEFT JOIN s ON s.family_id = f.id LEFT JOIN v ON v.family_id = f.id
ORDER BY f.code
"""


def _sqlite_path(db: str) -> str:
    from tracker.store.database import locate

    path = locate(db).sqlite_path
    if path is None:
        raise SystemExit("this step measures SQLite stores (give --stores with SQLite files)")
    return str(path)


def _families_floor(path: str) -> int:
    with sqlite3.connect(path) as con:
        return len(con.execute(FAMILIES_SQL).fetchall())


def _check_floor(path: str) -> int:
    """PRAGMA integrity_check, PRAGMA foreign_key_check and the orphan-row count of every foreign key
    (the queries `tracker check` runs on the file itself)."""
    from tracker.store.models import Base

    con = sqlite3.connect(path)
    try:
        n = len(con.execute("PRAGMA integrity_check").fetchall())
        n += len(con.execute("PRAGMA foreign_key_check").fetchall())
        for table in Base.metadata.sorted_tables:
            for fk in table.foreign_keys:
                col, parent = fk.parent, fk.column
                n += con.execute(
                    f'SELECT count(*) FROM "{table.name}" c LEFT JOIN "{parent.table.name}" p '
                    f'ON c."{col.name}" = p."{parent.name}" '
                    f'WHERE c."{col.name}" IS NOT NULL AND p."{parent.name}" IS NULL').fetchone()[0]
    finally:
        con.close()
    return n


def _against_floor(r: Run, name: str, argv: list[str], floor, max_ratio: float) -> dict:
    """A command (in-process, --json) against its floor, on each store size; best of FLOOR_ROUNDS each."""
    sizes = [int(x) for x in r.args.per_person_sizes.split(",")]
    rounds = getattr(r.args, "rounds", None) or FLOOR_ROUNDS
    out: dict = {"sizes": sizes, "target_ratio": max_ratio}
    for n in sizes:
        db = _per_person_store(r, n)
        path = _sqlite_path(db)
        full = argv + ["--db", db, "--json"]
        if n == sizes[0]:  # warm-up on the smallest store (imports, caches), not timed
            _cli(full)  # (the exit code of `check` is 1 when it finds something)
        floor(path)  # and the file into the page cache for both
        best_cmd = best_floor = float("inf")
        for _ in range(rounds):
            best_cmd = min(best_cmd, _timed(_cli, full)[1])
            best_floor = min(best_floor, _timed(floor, path)[1])
        out[f"{name}_{n}_s"] = best_cmd
        out[f"floor_{n}_s"] = best_floor
        out[f"ratio_{n}"] = best_cmd / best_floor
    out["ratio_largest"] = out[f"ratio_{sizes[-1]}"]
    return out


def step_families_sql(r: Run) -> dict:
    """`tracker families --json` against one aggregate SQL query over the same tables (sqlite3)."""
    return _against_floor(r, "families", ["families"], _families_floor, 3.0)


def step_check_sql(r: Run) -> dict:
    """`tracker check --json` against SQLite's integrity and foreign-key checks plus the orphan queries."""
    return _against_floor(r, "check", ["check"], _check_floor, 3.0)


def _bare_app_source() -> str:
    """A typer app with the tracker's command tree (names, help, options) and nothing else."""
    import click
    import typer.main

    from tracker.cli.app import app

    root = typer.main.get_command(app)
    lines = ["import typer", "", "app = typer.Typer(name='tracker', help=" + repr(root.help or "") + ", "
             "no_args_is_help=True, add_completion=False, context_settings={'help_option_names': ['-h', '--help']})", ""]
    counter = [0]

    def params(cmd) -> str:
        out = []
        for p in cmd.params:
            if p.name in ("help",):
                continue
            if p.param_type_name == "argument":
                out.append(f"{p.name}: str = typer.Argument(..., help={getattr(p, 'help', '')!r})")
            elif getattr(p, "is_flag", False):
                out.append(f"{p.name}: bool = typer.Option(False, {', '.join(repr(o) for o in p.opts)}, help={p.help!r})")
            else:
                out.append(f"{p.name}: str = typer.Option(None, {', '.join(repr(o) for o in p.opts)}, help={p.help!r})")
        return ", ".join(out)

    def add(group_var: str, cmd) -> None:
        for name, sub in sorted(cmd.commands.items()):
            counter[0] += 1
            fn = f"c{counter[0]}"
            if isinstance(sub, click.Group):
                var = f"g{counter[0]}"
                lines.append(f"{var} = typer.Typer(help={sub.help!r}, invoke_without_command=True)")
                lines.append(f"{group_var}.add_typer({var}, name={name!r})")
                lines.append(f"@{var}.callback()")
                lines.append(f"def {fn}({params(sub)}):\n    pass")
                add(var, sub)
            else:
                lines.append(f"@{group_var}.command({name!r}, help={sub.help!r})")
                lines.append(f"def {fn}({params(sub)}):\n    pass")
            lines.append("")

    add("app", root)
    lines += ["", "if __name__ == '__main__':", "    app()"]
    return "\n".join(lines) + "\n"


def _wall(argv: list[str]) -> float:
    import subprocess

    t0 = time.perf_counter()
    subprocess.run(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


def _tracker_argv() -> list[str]:
    script = Path(sys.executable).parent / "tracker"
    return [str(script)] if script.exists() else [sys.executable, "-m", "tracker.cli.app"]


def step_help(r: Run) -> dict:
    """`tracker --help` (a new process) against a bare typer app with the same command tree."""
    bare = r.workdir / "bare_app.py"
    bare.write_text(_bare_app_source(), encoding="utf-8")
    rounds = max(getattr(r.args, "rounds", None) or 0, 5)
    tracker_cmd, bare_cmd = _tracker_argv() + ["--help"], [sys.executable, str(bare), "--help"]
    _wall(tracker_cmd), _wall(bare_cmd)  # warm-up (file cache)
    best_t = best_b = float("inf")
    for _ in range(rounds):
        best_t = min(best_t, _wall(tracker_cmd))
        best_b = min(best_b, _wall(bare_cmd))
    return {"tracker_help_s": best_t, "bare_typer_help_s": best_b, "ratio": best_t / best_b, "rounds": rounds}


def _peak_child(argv: list[str]) -> tuple[float, float]:
    """(wall time s, peak resident memory MB) of one new process (os.wait4 gives its own rusage)."""
    import subprocess

    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _pid, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"`{' '.join(argv)}` exited {proc.returncode}")
    return time.perf_counter() - t0, usage.ru_maxrss / 1024.0


def step_trends_memory(r: Run) -> dict:
    """Peak memory of `tracker trends --json` (the whole cohort, output to /dev/null) in its own process."""
    sizes = [int(x) for x in r.args.per_person_sizes.split(",")]
    out: dict = {"sizes": sizes}
    for n in sizes:
        db = _per_person_store(r, n)
        t, mb = _peak_child(_tracker_argv() + ["trends", "--json", "--db", db])
        out[f"trends_json_{n}_s"], out[f"trends_json_{n}_peak_rss_mb"] = t, mb
    out["peak_rss_mb_largest"] = out[f"trends_json_{sizes[-1]}_peak_rss_mb"]
    return out


def step_proposals(r: Run) -> dict:
    """The stored recall proposals on the imported cohort: ``benchmarks/worklist_bench.py``
    (worklist for a 90-day window vs reading the rows it lists; ``recall --refresh`` vs the trend step)."""
    from benchmarks import worklist_bench as wb
    from tracker.services.recall import recall_rules

    conf, rule_set, policy = recall_rules(None, None)
    return wb.measure_proposals(_existing_engine(r), dt.date.today(), conf, rule_set, policy,
                                trend_engine_s=r.fig("trends", "engine_s"))  # fmt: skip


def step_memory(r: Run) -> dict:
    return {"peak_rss_mb": _rss_mb()}


STEPS: list[Step] = [
    Step("synth", "generate the synthetic cohort and write its CSV files", step_synth),
    Step("import", "import the whole cohort (all six files, one transaction)", step_import),
    Step("raw_insert", "plain DB-API executemany of the same rows into the same schema", step_raw_insert),
    Step("read", "read the measurement table alone, and the studies through the repository", step_read),
    Step("trends", "whole-cohort trend engine on every (person, measure) series", step_trends,
         uses=("studies", "people")),
    Step("statsmodels", "statsmodels OLS series by series on a sample", step_statsmodels, uses=("long", "ols")),
    Step("worklist", "the nurse's worklist for a one-year window, on 1/10, 1/5, 1/2 of the cohort and on all of it",
         step_worklist, uses=("recall", "recall_load_s")),
    Step("reclassification", "reclassification impact for the variant of the largest family, 1/10 vs all",
         step_reclassification, uses=("recall", "recall_load_s")),
    Step("proposals", "stored recall proposals: worklist for 90 days vs reading the rows it lists; "
         "recall --refresh vs the trend step (benchmarks/worklist_bench.py)", step_proposals),
    Step("per_person", "person, recall, cascade, reclassify --dry-run and report trajectory on one person/family, "
         "stores of --per-person-sizes families", step_per_person),
    Step("families_sql", "`tracker families` against one aggregate SQL query, on the per_person sizes", step_families_sql),
    Step("check_sql", "`tracker check` against SQLite's integrity and key checks, on the per_person sizes", step_check_sql),
    Step("help", "`tracker --help` against a bare typer app with the same command tree", step_help),
    Step("trends_memory", "peak memory of `tracker trends --json` on the whole cohort, on the per_person sizes",
         step_trends_memory),
    Step("memory", "peak resident memory of the process", step_memory),
]

#: (step, figure, comparison, target, what the target means)
TARGETS = [
    ("raw_insert", "import_over_raw", "<=", 3.0,
     "whole import within 3x a raw executemany of the same rows into the store's schema"),
    ("statsmodels", "per_series_speed_ratio", ">=", 50.0,
     "per_person_ols at least 50x faster per series than statsmodels"),
    ("statsmodels", "equal_results", "==", True, "same slope, SE, CI and p-value as statsmodels on the sample"),
    ("trends", "engine_over_read", "<=", 3.0, "trend engine within 3x the time to read the measurement table"),
    ("worklist", "time_ratio_per_size", "<=", 1.0,
     "worklist time grows linearly or better with the cohort (10x cohort: at most 10x the time)"),
    ("worklist", "growth_exponent", "<=", 1.0,
     "worklist time grows as the cohort size to a power of at most 1 (log-log fit over four sizes)"),
    ("reclassification", "time_ratio_per_size", "<=", 1.0,
     "reclassification impact time grows linearly or better with the cohort"),
    ("per_person", "worst_ratio_largest_over_smallest", "<=", 1.5,
     "per-person and per-family commands: time on the largest store at most 1.5x the smallest's"),
    ("families_sql", "ratio_largest", "<=", 3.0, "`tracker families` within 3x one aggregate SQL query"),
    ("check_sql", "ratio_largest", "<=", 3.0, "`tracker check` within 3x SQLite's integrity, key and orphan checks"),
    ("help", "ratio", "<=", 3.0, "`tracker --help` within 3x a bare typer app with the same commands"),
    ("trends_memory", "peak_rss_mb_largest", "<=", 1024.0, "`tracker trends --json` on the whole cohort under 1 GB"),
    ("proposals", "worklist_over_read", "<=", 3.0,
     "worklist for a 90-day window within 3x reading the stored proposals it lists"),
    ("proposals", "refresh_over_trends", "<=", 3.0, "full recall --refresh within 3x the trend step"),
    ("memory", "peak_rss_mb", "<=", 2048.0, "peak memory under 2 GB"),
]


def _machine() -> dict:
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    return {
        "python": platform.python_version(), "platform": platform.platform(), "cpus": os.cpu_count(),
        "load_average_at_start": [round(x, 2) for x in load],
        "numpy": np.__version__, "pandas": pd.__version__, "sqlite": sqlite3.sqlite_version,
        "started": dt.datetime.now(dt.timezone.utc).isoformat(timespec="seconds"),
    }  # fmt: skip


def _fmt(v) -> str:
    if isinstance(v, float):
        return f"{v:,.3f}" if abs(v) < 100 else f"{v:,.0f}"
    if isinstance(v, int) and not isinstance(v, bool):
        return f"{v:,}"
    return str(v)


def parse_args(argv: list[str] | None = None) -> argparse.Namespace:
    p = argparse.ArgumentParser(prog="python -m benchmarks.cohort", description=__doc__.split("\n\n")[0])
    p.add_argument("--families", type=int, default=10_000, help="families in the synthetic cohort (default 10000)")
    p.add_argument("--seed", type=int, default=1, help="seed of the cohort and of the statsmodels sample")
    p.add_argument("--db", default=None,
                   help="new SQLite file or postgresql+psycopg:// URL; default a temp SQLite file")
    p.add_argument("--sample", type=int, default=3000, help="series fitted one by one with statsmodels (default 3000)")
    p.add_argument("--cohort", default=None, help="reuse a folder written by `tracker synth` instead of generating")
    p.add_argument("--workdir", default=None, help="folder for the cohort and SQLite files (default: a temp folder)")
    p.add_argument("--steps", default=None, help="comma-separated step names to run (default: all, in order)")
    p.add_argument("--json", default=None, help="also write every figure to this JSON file")
    p.add_argument("--profile-import", default=None, help="cProfile the import step into this file and print the top")
    p.add_argument("--worklist-max-families", type=int, default=None,
                   help="worklist step: time at most this many families as the 10x cohort (every k-th family; "
                   "default: the whole cohort), and a tenth of them as the 1x cohort")
    p.add_argument("--per-person-sizes", default="100,1000",
                   help="per_person step: comma-separated store sizes in families (default 100,1000)")
    p.add_argument("--stores", default=None,
                   help="per_person, families_sql, check_sql, trends_memory: reuse stores by size, "
                   "e.g. 100=/tmp/s100.sqlite,1000=/tmp/s1000.sqlite (default: make them)")
    p.add_argument("--rounds", type=int, default=None,
                   help="timed runs per command in per_person, families_sql, check_sql and help (default 3; help 5)")
    p.add_argument("--keep", action="store_true", help="keep the PostgreSQL schema (and the temp folder)")
    p.add_argument("--existing-db", default=None,
                   help="run the read/trends/statsmodels steps on this database instead of importing "
                   "(use with --steps read,trends,statsmodels,memory)")
    return p.parse_args(argv)


def main(argv: list[str] | None = None) -> int:
    args = parse_args(argv)
    tmp = None
    if args.workdir:
        workdir = Path(args.workdir)
        workdir.mkdir(parents=True, exist_ok=True)
    else:
        tmp = tempfile.TemporaryDirectory(prefix="tracker-bench-")
        workdir = Path(tmp.name)
    wanted = args.steps.split(",") if args.steps else [s.name for s in STEPS]
    r = Run(args=args, workdir=workdir, wanted=tuple(wanted))
    machine = _machine()
    print(f"tracker benchmark: {args.families} families, seed {args.seed}, "
          f"{machine['cpus']} CPUs, load average {machine['load_average_at_start']}", flush=True)  # fmt: skip
    try:
        for step in STEPS:
            if step.name not in wanted:
                continue
            print(f"[{step.name}] {step.description}", flush=True)
            t0 = time.perf_counter()
            figures = step.run(r)
            figures["step_s"] = time.perf_counter() - t0
            still = r.still_used(step.name)
            for name in [k for k in r.frames if k not in still]:
                del r.frames[name]
            gc.collect()  # what a step leaves behind unreferenced is freed before the next one
            figures["peak_rss_mb_so_far"] = _rss_mb()
            r.figures[step.name] = figures
            for k, v in figures.items():
                print(f"    {k} = {_fmt(v)}", flush=True)
    finally:
        for fn in r.cleanup:
            fn()
        if tmp is not None and not args.keep:
            tmp.cleanup()
    print("targets:")
    verdicts = []
    for step, name, op, target, what in TARGETS:
        v = r.fig(step, name)
        if v is None:
            continue
        ok = {"<=": lambda a, b: a <= b, ">=": lambda a, b: a >= b, "==": lambda a, b: a == b}[op](v, target)
        verdicts.append({"step": step, "figure": name, "value": v, "target": f"{op} {target}", "met": bool(ok)})
        print(f"    {'met    ' if ok else 'NOT MET'} {step}.{name} = {_fmt(v)} (target {op} {target}): {what}")
    if args.json:
        Path(args.json).write_text(
            json.dumps({"machine": machine, "args": vars(args), "figures": r.figures, "targets": verdicts},
                       indent=2, default=str) + "\n", encoding="utf-8")  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
