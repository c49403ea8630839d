"""Family-scoped reads give the same results as whole-cohort reads, and a reclassification refuses
to write when the records it was worked out from changed in between.

On an invented synthetic cohort (30 families, seed 3, imported into a new store): every person's
recall and every family's cascade plan and reclassification impact, read for the family alone,
equal the same computed from the frames of the whole cohort (compared as JSON).
"""

from __future__ import annotations

import contextlib
import datetime as dt
import io
import json
import os

import pytest

from tracker import synth
from tracker.cli.app import main
from tracker.errors import UserError
from tracker.services import cascade as SC
from tracker.services import reclassification as SRC
from tracker.services import recall as SV
from tracker.store.database import reading, writing
from tracker.store.repository import COHORT

ON = dt.date(2026, 12, 1)


def _main(*argv: str) -> int:
    with contextlib.redirect_stdout(io.StringIO()):
        return main(list(argv))


def _json(data) -> str:
    return json.dumps(data, sort_keys=True, default=str)


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    os.environ.pop("TRACKER_SETTINGS", None)
    folder = tmp_path_factory.mktemp("scoped")
    synth.write(synth.generate(30, 3), folder / "cohort")
    db = str(folder / "cohort.sqlite")
    assert _main("init", "--db", db) == 0
    assert _main("import", "all", str(folder / "cohort"), "--db", db) == 0
    from tracker.cli.common import open_store

    engine = open_store(db)
    with reading(engine) as conn:
        frames = SV.load(conn, COHORT)
    conf, rule_set, policy = SV._recall_rules(None, None)
    return db, engine, frames, conf, rule_set, policy


def test_every_recall_read_for_the_family_equals_the_whole_cohort_one(store):
    db, engine, frames, conf, rule_set, policy = store
    people = sorted(frames.people["person"])
    assert len(people) > 100 and frames.people["family"].nunique() == 30
    with reading(engine) as conn:
        for person in people:
            scoped = SV.person_recall(conn, person, ON, conf, rule_set, policy)
            whole = SV.recall_data(frames, person, ON, conf, rule_set, policy)
            assert _json(scoped) == _json(whole), person


def test_every_cascade_read_for_the_family_equals_the_whole_cohort_one(store):
    db, engine, frames, conf, rule_set, policy = store
    gid = conf.guideline
    with reading(engine) as conn:
        for family in sorted(frames.families["family"]):
            scoped = SC.family_cascade(conn, family, ON, conf, gid)
            whole = SC.cascade_data(frames, family, ON, conf, gid)
            assert _json(scoped) == _json(whole), family


def _single_variant_families(frames) -> list[str]:
    counts = frames.variants.groupby("family")[["transcript", "hgvs_c"]].apply(lambda g: len(g.drop_duplicates()))
    return sorted(counts[counts == 1].index)


def _other_class(frames, family: str) -> str:
    latest = frames.variants[frames.variants["family"] == family].sort_values("classified_on")["acmg_class"].iloc[-1]
    return "uncertain_significance" if latest != "uncertain_significance" else "likely_pathogenic"


def test_every_reclassification_impact_read_for_the_family_equals_the_whole_cohort_one(store):
    db, engine, frames, conf, rule_set, policy = store
    families = _single_variant_families(frames)
    assert len(families) >= 10
    with reading(engine) as conn:
        for family in families:
            new = _other_class(frames, family)
            scoped = SRC.plan(conn, family, new, ON, "re-review", rule_set, policy, conf)
            whole = SRC.plan(conn, family, new, ON, "re-review", rule_set, policy, conf, scope=COHORT)
            assert _json(SRC.dry_run(scoped)) == _json(SRC.dry_run(whole)), family
            key = scoped.planned[0].variant.key  # by variant: every family with it is read, and only those
            by_key = SRC.plan(conn, key, new, ON, "re-review", rule_set, policy, conf)
            assert family in {x.variant.family for x in by_key.planned}


def _classifications(engine) -> int:
    from sqlalchemy import func, select

    from tracker.store.models import VariantClassification

    with reading(engine) as conn:
        return conn.execute(select(func.count()).select_from(VariantClassification)).scalar_one()


def test_a_reclassification_refuses_to_write_when_the_records_changed_after_they_were_read(store, tmp_path):
    db, engine, frames, conf, rule_set, policy = store
    family = _single_variant_families(frames)[0]
    new = _other_class(frames, family)
    with reading(engine) as conn:
        planned = SRC.plan(conn, family, new, dt.date(2026, 11, 1), "re-review", rule_set, policy, conf)
    # meanwhile, another user records a newer classification of the same variant
    assert _main("reclassify", family, "--to", new, "--date", "2026-11-02", "--reason", "other user",
                 "--db", db) == 0  # fmt: skip
    before = _classifications(engine)
    with pytest.raises(UserError) as exc, writing(engine) as conn:
        SRC.write(conn, planned, "tester")
    assert "changed while the impact was worked out" in str(exc.value) and "\n" not in str(exc.value)
    assert "latest classification" in str(exc.value)
    assert _classifications(engine) == before  # nothing written


def test_a_reclassification_writes_when_nothing_changed(store):
    db, engine, frames, conf, rule_set, policy = store
    family = _single_variant_families(frames)[-1]
    new = _other_class(frames, family)
    before = _classifications(engine)
    with reading(engine) as conn:
        planned = SRC.plan(conn, family, new, dt.date(2026, 11, 3), "re-review", rule_set, policy, conf)
    with writing(engine) as conn:
        (written,) = SRC.write(conn, planned, "tester")
    assert written["classification_id"] is not None and written["to_class"] == new
    assert _classifications(engine) == before + 1


def test_a_change_in_another_family_does_not_stop_a_reclassification(store):
    db, engine, frames, conf, rule_set, policy = store
    families = _single_variant_families(frames)
    mine, other = families[1], families[2]
    with reading(engine) as conn:
        planned = SRC.plan(conn, mine, _other_class(frames, mine), dt.date(2026, 11, 4), "re-review", rule_set,
                           policy, conf)  # fmt: skip
    assert _main("reclassify", other, "--to", _other_class(frames, other), "--date", "2026-11-04", "--reason",
                 "other user", "--db", db) == 0  # fmt: skip
    before = _classifications(engine)
    with writing(engine) as conn:
        (written,) = SRC.write(conn, planned, "tester")
    assert written["family"] == mine and _classifications(engine) == before + 1
