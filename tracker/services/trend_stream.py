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
    :meth:`rows` reads them back in output order. Use as a context manager (closes the file).

    Per row only a few machine words stay in memory (offset, concern, person and measure codes),
    so that the index of 757,883 series of a 10,000-family cohort takes about 15 MB."""

    def __init__(self, header: dict[str, Any]) -> None:
        from array import array

        self.header = header
        self._file = tempfile.TemporaryFile()
        self._offsets = array("q")
        self._concern = array("b")
        self._person = array("l")
        self._measure = array("l")
        self._codes: tuple[dict[str, int], dict[str, int]] = ({}, {})  # person, measure -> code
        self._order = None
        self._sizes = None
        self._eb = None
        self._kinds: dict[str, dict[type, Any]] = {}  # column -> one sample value per Python type seen
        self.lsc_used: set[tuple[str, str]] = set()  # (lsc_status, measure) of rows with a last change

    def __enter__(self) -> CohortTrends:
        return self

    def __exit__(self, *exc) -> None:
        self._file.close()

    @property
    def count(self) -> int:
        return len(self._offsets)

    def _add(self, rows: list[dict[str, Any]], keys: list[str]) -> None:
        persons, measures = self._codes
        for r in rows:
            values = tuple(r[k] for k in keys)
            self._offsets.append(self._file.tell())
            self._file.write(pickle.dumps(values, protocol=pickle.HIGHEST_PROTOCOL))
            self._concern.append(int(r["concern"]))
            self._person.append(persons.setdefault(r["person"], len(persons)))
            self._measure.append(measures.setdefault(r["measure"], len(measures)))
            if r.get("last_change") is not None:
                self.lsc_used.add((r.get("lsc_status"), r["measure"]))
            for k, v in zip(keys, values):
                if k != "slope_eb_per_year":
                    self._kinds.setdefault(k, {}).setdefault(type(v), v)

    def _finish(self, eb) -> None:
        """Sort (concern highest first, then person and measure) and take each row's pooled slope
        from ``eb`` (person, measure, slope_eb columns)."""
        import numpy as np
        import pandas as pd

        persons, measures = self._codes
        person = np.array(self._person, dtype=np.int64)
        measure = np.array(self._measure, dtype=np.int64)
        rank_p = _ranks(persons)
        rank_m = _ranks(measures)
        concern = np.array(self._concern, dtype=np.int64)
        self._order = np.lexsort((rank_m[measure], rank_p[person], -concern)) if len(concern) else np.zeros(0, int)
        end = self._file.seek(0, 2)
        offsets = np.array(self._offsets, dtype=np.int64)
        self._sizes = np.diff(np.append(offsets, end))
        width = max(len(measures), 1)
        slope = np.full(len(offsets), np.nan)
        if eb is not None and len(eb):
            p = eb["person"].map(persons)
            m = eb["measure"].map(measures)
            known = (p.notna() & m.notna()).to_numpy()
            keys = p[known].astype(np.int64).to_numpy() * width + m[known].astype(np.int64).to_numpy()
            by_key = pd.Series(eb["slope_eb"].to_numpy(dtype=float)[known], index=keys)
            slope = by_key.reindex(person * width + measure).to_numpy(dtype=float)
        self._eb = slope
        if len(slope):  # the types the slope column will hold (clean(): NaN -> None)
            samples = self._kinds.setdefault("slope_eb_per_year", {})
            if np.isfinite(slope).any():
                samples[float] = 0.0
            if np.isnan(slope).any():
                samples[type(None)] = None
        self._file.flush()

    def rows(self, keys: list[str]) -> Iterator[dict[str, Any]]:
        """Every row, in the cohort's order (most concerning first), with the cohort's slopes."""
        from tracker.services.review import clean

        f = self._file
        for i in self._order:
            f.seek(self._offsets[i])
            row = dict(zip(keys, pickle.loads(f.read(int(self._sizes[i])))))
            row["slope_eb_per_year"] = clean(self._eb[i])
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


def _ranks(codes: dict[str, int]):
    """Rank of each code's text in sorted order (the order pandas sorts strings in)."""
    import numpy as np

    texts = sorted(codes, key=codes.__getitem__)  # by code
    rank = np.empty(len(texts), dtype=np.int64)
    rank[np.array(sorted(range(len(texts)), key=texts.__getitem__), dtype=np.int64)] = np.arange(len(texts))
    return rank


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


def _cohort_eb(stage1, empirical_bayes_from_ols):
    """The cohort's empirical-Bayes slopes (person, measure, slope_eb) from the batches' per-series
    OLS tables, taken in the order one pass over the cohort has them (by person code; a batch keeps
    its own order); None when no series has two studies."""
    import numpy as np
    import pandas as pd

    if not stage1:
        return None
    ols = pd.concat(stage1, ignore_index=True)
    stage1.clear()
    if not (ols["n"] >= 2).any():
        return None
    ols = ols.iloc[np.argsort(ols["person"].to_numpy(dtype=str), kind="stable")].reset_index(drop=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        return empirical_bayes_from_ols(ols)[["person", "measure", "slope_eb"]]


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
