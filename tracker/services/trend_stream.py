"""The whole cohort's trends (`tracker trends --json` / `--csv` without --family), computed a batch
of families at a time with family-scoped reads, so that memory stays bounded at registry scale.

The output equals what one pass over the cohort gives (`tracker.services.review.trends`), row for
row and value for value, in the same order. Two things span the cohort and are handled so:

- the order (most concerning first, then person and measure): each batch's rows are written to a
  temporary file as they are computed, with their sort key kept in memory; the rows are read back
  in the cohort's order when the output is written;
- the empirical-Bayes slope (``slope_eb_per_year``) pools every person with the measure: each batch
  keeps its per-series OLS table (a few numbers per series), the pooled slopes are computed from
  all of them once (:func:`tracker.engines.cohort_model.empirical_bayes_from_ols`, in the order the
  one-pass computation uses), and each row takes its slope as it is read back.
"""

from __future__ import annotations

import json
import pickle
import tempfile
from collections.abc import Iterator
from typing import IO, Any

from sqlalchemy import Connection

from tracker.errors import UserError

# Families per batch: a few hundred keep the working set small (about 150 MB at 500 families of
# the synthetic cohort) and the per-batch overhead of the engine low (engineering choice).
BATCH_FAMILIES = 500
CSV_CHUNK_ROWS = 20_000


class CohortTrends:
    """Rows of the cohort's trend table, spilled to a temporary file in computation order;
    :meth:`rows` reads them back in output order. Use as a context manager (closes the file)."""

    def __init__(self, header: dict[str, Any]) -> None:
        self.header = header
        self._file = tempfile.TemporaryFile()
        self._keys: list[tuple] = []
        self._eb: dict[tuple[str, str], float] = {}
        self._kinds: dict[str, dict[type, Any]] = {}  # column -> one sample value per Python type seen
        self.lsc_used: set[tuple[str, str]] = set()  # (lsc_status, measure) of rows with a last change

    def __enter__(self) -> CohortTrends:
        return self

    def __exit__(self, *exc) -> None:
        self._file.close()

    @property
    def count(self) -> int:
        return len(self._keys)

    def _add(self, rows: list[dict[str, Any]], keys: list[str]) -> None:
        for r in rows:
            values = tuple(r[k] for k in keys)
            data = pickle.dumps(values, protocol=pickle.HIGHEST_PROTOCOL)
            offset = self._file.tell()
            self._file.write(data)
            self._keys.append((-r["concern"], r["person"], r["measure"], offset, len(data)))
            if r.get("last_change") is not None:
                self.lsc_used.add((r.get("lsc_status"), r["measure"]))
            for k, v in zip(keys, values):
                if k != "slope_eb_per_year":
                    self._kinds.setdefault(k, {}).setdefault(type(v), v)

    def _finish(self, eb: dict[tuple[str, str], float]) -> None:
        from tracker.services.review import clean

        self._eb = eb
        self._keys.sort(key=lambda k: k[:3])
        if self._keys:  # the types the slope column will hold
            samples = self._kinds.setdefault("slope_eb_per_year", {})
            for _, person, measure, _, _ in self._keys:
                v = clean(eb.get((person, measure)))
                samples.setdefault(type(v), v)
                if len(samples) == 2:
                    break
        self._file.flush()

    def rows(self, keys: list[str]) -> Iterator[dict[str, Any]]:
        """Every row, in the cohort's order (most concerning first), with the cohort's slopes."""
        from tracker.services.review import clean

        f = self._file
        for _, person, measure, offset, size in self._keys:
            f.seek(offset)
            row = dict(zip(keys, pickle.loads(f.read(size))))
            row["slope_eb_per_year"] = clean(self._eb.get((person, measure)))
            yield row

    def column_dtypes(self, keys: list[str]) -> dict[str, Any]:
        """The dtype pandas gives each column of the whole table (``pd.DataFrame(rows)``): inferred
        from one sample value of each Python type the column holds."""
        import pandas as pd

        out = {}
        for k in keys:
            samples = list(self._kinds.get(k, {}).values())
            out[k] = pd.DataFrame([{k: v} for v in samples], columns=[k]).dtypes[k] if samples else object
        return out


def cohort_trends(conn: Connection, measure: str | None, settings, horizon: float,
                  batch_families: int | None = None) -> CohortTrends:  # fmt: skip
    """The cohort's trend rows (as ``review.trends(conn, None, ...)`` gives them), computed
    ``batch_families`` families at a time."""
    import pandas as pd

    from tracker.engines import review
    from tracker.engines.cohort_model import empirical_bayes_from_ols
    from tracker.gcpause import gc_paused
    from tracker.services.review import TREND_JSON_KEYS, guideline, records, status_sets
    from tracker.store import repository as repo
    from tracker.store.repository import Scope

    measures = repo.load_measures(conn)
    if measure is not None and measure not in set(measures["code"]):
        raise UserError(f"unknown measure code {measure!r} (see `tracker measures`)")
    header = {"guideline": guideline(settings), "horizon_years": horizon, "family": None, "measure": measure}
    out = CohortTrends(header)
    families = list(repo.load_families(conn)["family"])
    batch_families = batch_families or BATCH_FAMILIES
    stage1: list[pd.DataFrame] = []
    try:
        for i in range(0, len(families), batch_families):
            scope = Scope.families(families[i : i + batch_families])
            with gc_paused():
                people = repo.load_people(conn, scope)
                studies = repo.load_studies(conn, entered=False, scope=scope)
                results = repo.load_genetic_results(conn, scope)
                variants = repo.load_variants(conn, scope)
                assessments = repo.load_assessments(conn, scope)
                ctx = review.clinical_context(people, results, variants, assessments)
                rel, pos = status_sets(ctx)
                studies = studies[studies["person"].isin(set(people["person"]))]
                m = review.mark_pregnancy(review.build_measurements(people, studies), assessments)
                del studies
                t = review.trend_table(m, guideline=settings.guideline, relative_of_affected=rel,
                                       genotype_positive=pos, clinic_repeatability=settings.repeatability,
                                       horizon_years=horizon, eb_slopes={}, ols_out=stage1)  # fmt: skip
                del m
                t = t[(t["n"] >= 2) | t["criteria_not_assessable"].astype(bool)]
                if measure is not None:
                    t = t[t["measure"] == measure]
                out._add(records(t, TREND_JSON_KEYS), TREND_JSON_KEYS)
        out._finish(_cohort_eb(stage1, empirical_bayes_from_ols))
    except BaseException:
        out._file.close()
        raise
    return out


def _cohort_eb(stage1, empirical_bayes_from_ols) -> dict[tuple[str, str], float]:
    """The cohort's empirical-Bayes slopes from the batches' per-series OLS tables, taken in the
    order one pass over the cohort has them (by person code; a batch keeps its own order)."""
    import numpy as np
    import pandas as pd

    if not stage1:
        return {}
    ols = pd.concat(stage1, ignore_index=True)
    stage1.clear()
    if not (ols["n"] >= 2).any():
        return {}
    ols = ols.iloc[np.argsort(ols["person"].to_numpy(dtype=str), kind="stable")].reset_index(drop=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        eb = empirical_bayes_from_ols(ols)
    return dict(zip(zip(eb["person"], eb["measure"]), eb["slope_eb"].astype(float)))


def write_json(result: CohortTrends, tail: dict[str, Any], keys: list[str], fh: IO[str]) -> None:
    """The JSON ``print_json`` prints for ``{**header, "rows": [...], **tail}``, written row by row."""
    doc = {**result.header, "rows": ["\x00rows\x00"], **tail}
    text = json.dumps(doc, indent=2, ensure_ascii=False, default=str)
    marker = '    "\\u0000rows\\u0000"'
    head, _, rest = text.partition(marker)
    if result.count == 0:
        fh.write(json.dumps({**result.header, "rows": [], **tail}, indent=2, ensure_ascii=False, default=str) + "\n")
        return
    fh.write(head)
    first = True
    for row in result.rows(keys):
        if not first:
            fh.write(",\n")
        first = False
        body = json.dumps(row, indent=2, ensure_ascii=False, default=str)
        fh.write("\n".join("    " + line for line in body.split("\n")))
    fh.write(rest + "\n")


def write_csv(result: CohortTrends, keys: list[str], caution: str, fh: IO[str]) -> None:
    """The CSV ``pd.DataFrame(rows, columns=keys).assign(caution=...).to_csv(index=False)`` writes,
    written in chunks with the whole table's column types."""
    import pandas as pd

    dtypes = result.column_dtypes(keys)

    def frame(chunk: list[dict]) -> pd.DataFrame:
        df = pd.DataFrame(chunk, columns=keys, dtype=object)
        for k in keys:
            if dtypes[k] != object:
                df[k] = df[k].astype(dtypes[k])
        return df.assign(caution=caution)

    chunk: list[dict] = []
    header = True
    for row in result.rows(keys):
        chunk.append(row)
        if len(chunk) >= CSV_CHUNK_ROWS:
            frame(chunk).to_csv(fh, index=False, header=header)
            header, chunk = False, []
    if chunk or header:
        frame(chunk).to_csv(fh, index=False, header=header)
