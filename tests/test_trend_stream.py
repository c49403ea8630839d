"""The whole cohort's trends computed a batch of families at a time (tracker.services.trend_stream)
give the same JSON and CSV as one pass over the cohort (tracker.services.review.trends), byte for
byte, including the empirical-Bayes slope that pools every person of the cohort."""

from __future__ import annotations

import io
import json

import pandas as pd
import pytest

from tracker.cli.app import main
from tracker.engines import review as engine
from tracker.services import review as service
from tracker.services import trend_stream
from tracker.settings import Settings
from tracker.store.database import locate, make_engine, reading

KEYS = service.TREND_JSON_KEYS
TAIL = {"not_pooled": engine.NOT_POOLED, "caution": engine.CAUTION}


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    db = str(tmp_path_factory.mktemp("stream") / "demo.sqlite")
    assert main(["demo", "--db", db]) == 0
    return db


def _one_pass(conn, measure=None) -> dict:
    return service.trends(conn, None, measure, Settings(), 3.0)


@pytest.mark.parametrize("batch", [1, 2, 500])
@pytest.mark.parametrize("measure", [None, "mwt_echo"])
def test_batches_give_the_one_pass_json_and_csv(demo, batch, measure):
    eng = make_engine(locate(demo))
    with reading(eng) as conn:
        whole = _one_pass(conn, measure)
        with trend_stream.cohort_trends(conn, measure, Settings(), 3.0, batch_families=batch) as streamed:
            js, csv = io.StringIO(), io.StringIO()
            trend_stream.write_json(streamed, TAIL, KEYS, js)
            trend_stream.write_csv(streamed, KEYS, engine.CAUTION, csv)
    eng.dispose()
    assert len(whole["rows"]) > 10
    assert js.getvalue() == json.dumps(whole, indent=2, ensure_ascii=False, default=str) + "\n"
    expected_csv = io.StringIO()
    pd.DataFrame(whole["rows"], columns=KEYS).assign(caution=engine.CAUTION).to_csv(expected_csv, index=False)
    assert csv.getvalue() == expected_csv.getvalue()


def test_the_pooled_slope_spans_batches(demo):
    """The comparison above can fail: slopes pooled within one-family batches differ from the cohort's."""
    eng = make_engine(locate(demo))
    with reading(eng) as conn:
        whole = {(r["person"], r["measure"]): r["slope_eb_per_year"] for r in _one_pass(conn)["rows"]}
        per_family = {}
        for fam in ("HV01", "HV02", "HV03", "HV04", "HV05"):
            for r in service.trends(conn, fam, None, Settings(), 3.0)["rows"]:
                per_family[(r["person"], r["measure"])] = r["slope_eb_per_year"]
    eng.dispose()
    assert whole.keys() == per_family.keys()
    assert any(whole[k] != per_family[k] for k in whole if whole[k] is not None)


def test_cli_streams_the_cohort(demo, run, tmp_path, monkeypatch):
    monkeypatch.setattr(trend_stream, "BATCH_FAMILIES", 2)
    eng = make_engine(locate(demo))
    with reading(eng) as conn:
        whole = _one_pass(conn)
    eng.dispose()
    out = tmp_path / "t.csv"
    r = run("trends", "--json", "--csv", out, db=demo)
    assert r.code == 0
    assert json.loads(r.out) == whole
    assert f"wrote {len(whole['rows'])} rows" in r.err
    r = run("trends", "--csv", out, db=demo)  # the table: first rows and a count
    assert f"Trends: {len(whole['rows'])} series" in r.out
    assert f"... and {len(whole['rows']) - 50} more" in r.out


def test_unknown_measure_is_one_line(demo, run):
    r = run("trends", "--json", "--measure", "nope", db=demo)
    assert r.code == 1
    assert "unknown measure code 'nope'" in r.err
