"""gc_paused: the cyclic collector is off inside, and back as it was after (also on error, also nested);
the bulk paths (import, studies read, worklist) use it."""

from __future__ import annotations

import gc

import pytest

from tracker.gcpause import gc_paused


@pytest.fixture(autouse=True)
def _collector_on():
    gc.enable()
    yield
    gc.enable()


def test_off_inside_and_back_on_after():
    with gc_paused():
        assert not gc.isenabled()
    assert gc.isenabled()


def test_back_on_after_an_error():
    with pytest.raises(ValueError):
        with gc_paused():
            raise ValueError("boom")
    assert gc.isenabled()


def test_nested_pauses_restore_only_at_the_outer_end():
    with gc_paused():
        with gc_paused():
            assert not gc.isenabled()
        assert not gc.isenabled()
    assert gc.isenabled()


def test_left_off_when_it_was_off_before():
    gc.disable()
    with gc_paused():
        pass
    assert not gc.isenabled()


def test_the_import_and_the_studies_read_run_with_the_collector_paused(monkeypatch, tmp_path):
    # Both bulk paths enter the pause: seen by replacing it with one that records where it was entered.
    import contextlib

    from conftest import MINI
    from tracker.io import csv_import
    from tracker.store import migrate
    from tracker.store import repository
    from tracker.store.database import locate, make_engine, reading, writing

    entered = []

    def recorder(where):
        @contextlib.contextmanager
        def pause():
            entered.append(where)
            yield

        return pause

    monkeypatch.setattr(csv_import, "gc_paused", recorder("import"))
    monkeypatch.setattr(repository, "gc_paused", recorder("read"))
    engine = make_engine(locate(str(tmp_path / "t.sqlite")), create=True)
    migrate.upgrade(engine)
    with writing(engine) as conn:
        csv_import.import_folder(conn, MINI, user="test")
    assert entered.count("import") == 6  # once per file of the folder
    entered.clear()
    with reading(engine) as conn:
        studies = repository.load_studies(conn)
        assert "read" in entered and len(studies) == 13
        # The worklist's family states and trends are built with the collector paused as well.
        import datetime as dt

        from tracker.cli import recall
        from tracker.services import worklist

        monkeypatch.setattr(worklist, "gc_paused", recorder("worklist"))
        frames = recall._load(conn)
        conf, rule_set, policy = recall._recall_rules(None, None)
        day = dt.date(2026, 12, 1)
        worklist.due_proposals(frames, conf, rule_set, policy, day, day + dt.timedelta(days=364), day)
    engine.dispose()
    assert "worklist" in entered
