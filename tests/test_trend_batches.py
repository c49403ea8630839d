"""The worklist's trend modifiers are the same whether trends are computed in one go or in batches."""

from __future__ import annotations

import pytest

from tracker.services import recall


@pytest.fixture
def demo_db(tmp_path, run):
    db = str(tmp_path / "demo.sqlite")
    assert run("demo", db=db).code == 0
    return db


def test_batches_of_people_give_the_same_worklist(demo_db, run, monkeypatch):
    args = ("worklist", "--from", "2026-12-01", "--to", "2027-12-01", "--as-of", "2026-12-01", "--json")
    whole = run(*args, db=demo_db)
    assert whole.code == 0, whole
    monkeypatch.setattr(recall, "TREND_CHUNK_PEOPLE", 4)  # 59 demo people: 15 batches
    batched = run(*args, db=demo_db)
    assert batched.code == 0, batched
    assert batched.out == whole.out
    assert '"overdue"' in whole.out or '"due"' in whole.out
