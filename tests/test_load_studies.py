"""repository.load_studies: the typed, batched reader gives exactly the frame of the plain row-by-row read."""

from __future__ import annotations

import pandas as pd
import pytest
from sqlalchemy import select

from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading
from tracker.store.models import Measurement, Person, Study

COLUMNS = ["person", "study_date", "modality", "site", "height_cm", "weight_kg", "measure", "value", "unit"]


def _plain(conn, entered: bool) -> pd.DataFrame:
    """The reference: every row as a tuple of Python objects, dates formatted one by one."""
    value = Measurement.entered_value if entered else Measurement.value
    unit = Measurement.entered_unit if entered else Measurement.unit
    stmt = (
        select(Person.code, Study.study_date, Study.modality, Study.site, Study.height_cm, Study.weight_kg,
               Measurement.measure_code, value, unit)
        .join(Person, Study.person_id == Person.id)
        .outerjoin(Measurement, Measurement.study_id == Study.id)
        .where(Study.removed_at.is_(None), Person.removed_at.is_(None))
        .order_by(Person.code, Study.study_date, Study.modality, Measurement.measure_code)
    )  # fmt: skip
    df = pd.DataFrame([tuple(r) for r in conn.execute(stmt).all()], columns=COLUMNS, dtype=object)
    df["study_date"] = df["study_date"].map(lambda d: d.isoformat()).astype(object)
    for c in ("height_cm", "weight_kg", "value"):
        df[c] = df[c].astype(float)
    return df


@pytest.mark.parametrize("entered", [True, False])
def test_load_studies_equals_the_plain_read(loaded_db, entered, monkeypatch):
    monkeypatch.setattr(repo, "_BATCH", 7)  # many batches, so codes must carry across them
    engine = make_engine(locate(loaded_db))
    with reading(engine) as conn:
        got = repo.load_studies(conn, entered=entered)
        want = _plain(conn, entered)
    engine.dispose()
    assert len(want) > 10 and want["measure"].isna().any()
    assert list(got.columns) == COLUMNS
    assert got.dtypes.to_dict() == want.dtypes.to_dict()
    assert got.equals(want)
    # Empty cells are None in text columns (not NaN), as in the other load_* frames.
    assert all(v is None for v in got.loc[got["measure"].isna(), "unit"])


def test_load_studies_of_an_empty_store(db_url, run):
    assert run("init", db=db_url).code == 0
    engine = make_engine(locate(db_url))
    with reading(engine) as conn:
        got = repo.load_studies(conn)
    engine.dispose()
    assert got.empty and list(got.columns) == COLUMNS
    floats = {"height_cm", "weight_kg", "value"}
    assert all((got[c].dtype == float) == (c in floats) for c in COLUMNS)
    assert all(got[c].dtype == object for c in COLUMNS if c not in floats)
