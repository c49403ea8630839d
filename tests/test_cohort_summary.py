"""`tracker families` counts studies and values by aggregate queries; they agree with counting the
rows `repository.load_studies` reads (the way the summary was computed before), a removed study left out."""

from __future__ import annotations

import json

import pytest

from tracker.cli.app import main
from tracker.store import repository as repo
from tracker.store.database import locate, make_engine, reading


@pytest.fixture
def demo(tmp_path):
    db = str(tmp_path / "demo.sqlite")
    assert main(["demo", "--db", db]) == 0
    return db


def _expected(db: str) -> tuple[dict, dict]:
    engine = make_engine(locate(db))
    with reading(engine) as conn:
        people, studies = repo.load_people(conn), repo.load_studies(conn)
    engine.dispose()
    st = studies.drop_duplicates(["person", "study_date", "modality"])
    st = st.assign(family=st["person"].map(people.set_index("person")["family"]))
    totals = {"studies": len(st), "measurements": int(studies["measure"].notna().sum()),
              "first_study": st["study_date"].min(), "last_study": st["study_date"].max(),
              "people": int((~people["placeholder"]).sum()), "placeholders": int(people["placeholder"].sum())}
    per_family = {f: (len(g), g["study_date"].min(), g["study_date"].max()) for f, g in st.groupby("family")}
    return totals, per_family


def _check(run, db):
    data = json.loads(run("families", "--json", db=db).out)
    totals, per_family = _expected(db)
    for k, v in totals.items():
        assert data["totals"][k] == v, k
    for row in data["families"]:
        assert (row["studies"], row["first_study"], row["last_study"]) == per_family.get(row["family"], (0, None, None))


def test_counts_agree_with_the_rows_read(demo, run):
    _check(run, demo)


def test_a_removed_study_is_not_counted(demo, run):
    before = json.loads(run("families", "--json", db=demo).out)["totals"]
    r = run("remove", "study", "HV05-I-2", "2018-02-12", "echo", "--reason", "duplicate", db=demo)
    assert r.code == 0, r
    after = json.loads(run("families", "--json", db=demo).out)["totals"]
    assert after["studies"] == before["studies"] - 1
    assert after["measurements"] < before["measurements"]
    _check(run, demo)
