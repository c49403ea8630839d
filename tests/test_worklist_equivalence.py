"""The worklist's cohort-wide fast paths give exactly what the straightforward ones give.

* :func:`build_family_states` (one pass over the cohort) against :func:`build_family_state`
  called for each family with the whole cohort's frames, on an invented synthetic cohort
  (:func:`tracker.synth.generate`) with the awkward cases added: several variants in a family,
  monozygotic and dizygotic twins, placeholders, a parent recorded in another family, a person
  without a date of birth, an open reclassification task, trend rows and an earlier ``as_of`` day.
* The records helper against ``DataFrame.to_dict("records")``.
* The review engine's vectorised steps against their row-by-row versions.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math

import numpy as np
import pandas as pd
import pytest

from tracker import synth
from tracker.domain.records import frame_records
from tracker.engines import family_state as fs
from tracker.engines import review

FLAGS = {"people": ("placeholder", "proband"), "assessments": ("competitive_athlete", "pregnant", "hypertension")}


def _bool(column: pd.Series) -> pd.Series:
    return column.map({"yes": True, "no": False}).fillna(False).astype(bool)


@pytest.fixture(scope="module")
def cohort() -> dict[str, pd.DataFrame]:
    """Store-like frames of 40 invented families (yes/no flags as booleans, as the loaders give them)
    with the awkward cases of the module docstring added."""
    c = synth.generate(40, 11)
    f = {
        "people": c.people.copy(),
        "variants": c.variants.copy(),
        "results": c.genetic_results.copy(),
        "assessments": c.assessments.copy(),
        "studies": c.studies.copy(),
    }
    for name, cols in FLAGS.items():
        for col in cols:
            f[name][col] = _bool(f[name][col])
    people = f["people"].astype({"mother": object, "father": object, "twin_of": object, "twin_type": object})

    def siblings(family: str) -> tuple[str, str]:
        kids = people[(people["family"] == family) & people["mother"].notna() & people["father"].notna()]
        pair = kids.groupby(["mother", "father"])["person"].apply(list)
        return tuple(next(p for p in pair if len(p) >= 2)[:2])

    for family, kind in (("SYN00003", "monozygotic"), ("SYN00005", "dizygotic")):
        a, b = siblings(family)
        people.loc[people["person"] == a, ["twin_of", "twin_type"]] = [b, kind]
    people.loc[people["person"] == "SYN00004-II-2", "mother"] = "SYN00006-II-1"  # a parent in another family
    people.loc[people["person"] == "SYN00007-II-2", "birth_date"] = np.nan  # no date of birth
    f["people"] = people
    extra = f["variants"][f["variants"]["family"] == "SYN00001"].iloc[[0]].copy()
    second = extra.assign(hgvs_c="c.100A>G", hgvs_p="p.(Lys34Glu)", acmg_class="uncertain_significance",
                          classified_on="2012-01-01")  # fmt: skip
    relabel = extra.assign(acmg_class="likely_pathogenic", classified_on="2024-05-05", reason="re-review")
    f["variants"] = pd.concat([relabel, f["variants"], second], ignore_index=True)  # newest row first, on purpose
    return f


def _args(f: dict) -> tuple:
    return f["people"], f["variants"], f["results"], f["assessments"], f["studies"]


def _trends(f: dict) -> pd.DataFrame:
    """Invented trend rows for every fifth person (one of them twice: the last row counts)."""
    codes = f["people"]["person"].tolist()[::5]
    t = pd.DataFrame({"person": codes, "progressing": [i % 2 == 0 for i in range(len(codes))],
                      "projected_crossing_age": [float(30 + i) if i % 3 == 0 else np.nan for i in range(len(codes))],
                      "reasons": [f"mwt_echo: reason {i}" if i % 2 == 0 else "" for i in range(len(codes))]})  # fmt: skip
    return pd.concat([t, t.iloc[[0]].assign(progressing=False, reasons="later row")], ignore_index=True)


def _plain(st: fs.FamilyState) -> dict:
    """Every field of a family state as comparable data (the pedigree by its members)."""
    out = {f.name: getattr(st, f.name) for f in dataclasses.fields(st) if f.name not in ("pedigree", "genotypes",
                                                                                          "results")}  # fmt: skip
    out["facts"], out["states"] = list(st.facts.items()), list(st.states.items())
    out["members"] = [st.pedigree.member(p) for p in st.pedigree.people]
    out["genotypes"] = (list(st.genotypes.items()), st.genotypes.mode, st.genotypes.notes)
    return out


def _same_results(a: pd.DataFrame, b: pd.DataFrame) -> bool:
    """The same genetic results (an empty frame may carry fewer columns on one path)."""
    return (a.empty and b.empty) or a.equals(b)


@pytest.mark.parametrize("as_of", [None, dt.date(2026, 12, 2), dt.date(2015, 6, 30)])
def test_all_families_at_once_equal_one_family_at_a_time(cohort, as_of):
    pending = ["SYN00002-III-1", "SYN00009-II-2"]
    trends = _trends(cohort)
    states = fs.build_family_states(*_args(cohort), trends=trends, reclassification_pending=pending, as_of=as_of)
    assert list(states) == sorted(set(cohort["people"]["family"]))
    for family, st in states.items():
        one = fs.build_family_state(family, *_args(cohort), trends=trends, reclassification_pending=pending,
                                    as_of=as_of)  # fmt: skip
        assert _plain(st) == _plain(one), family
        assert _same_results(st.results, one.results), family


def test_the_awkward_cases_are_present(cohort):
    """The comparison above covers what it claims to."""
    states = fs.build_family_states(*_args(cohort), trends=_trends(cohort), reclassification_pending=["SYN00002-III-1"])
    assert len(states["SYN00001"].variants) == 2 and states["SYN00001"].variant.previous_class is not None
    assert any("another family" in n for n in states["SYN00004"].notes)
    assert states["SYN00003"].pedigree.monozygotic_co_twins(
        next(p for p in states["SYN00003"].pedigree.people if states["SYN00003"].pedigree.co_twins(p)))
    assert any(states["SYN00005"].pedigree.co_twins(p) for p in states["SYN00005"].pedigree.people)
    assert "SYN00007-II-2" in states["SYN00007"].not_scheduled
    assert any("placeholder" in why for st in states.values() for why in st.not_scheduled.values())
    assert "variant_reclassified" in states["SYN00002"].states["SYN00002-III-1"].triggers
    assert any(s.progression for st in states.values() for s in st.states.values())


def test_trends_for_the_cohort_equal_trends_family_by_family(cohort):
    states = fs.build_family_states(*_args(cohort))
    trends = _trends(cohort)
    family_of = dict(zip(cohort["people"]["person"], cohort["people"]["family"]))
    parts = fs.by_family(trends, family_of)
    at_once = fs.apply_trends_to_states(states, trends)
    for family, st in states.items():
        assert _plain(at_once[family]) == _plain(fs.apply_trends(st, parts.get(family))), family


def test_family_variants_of_the_cohort_equal_those_of_each_family(cohort):
    v = cohort["variants"]
    whole = fs.family_variants(v)
    assert whole == {fam: fs.family_variants(v[v["family"] == fam])[fam] for fam in sorted(set(v["family"]))}
    assert list(whole) == sorted(whole)


def test_records_up_to_keeps_the_rows_dated_on_or_before_the_day(cohort):
    on = dt.date(2015, 6, 30)
    for name, col in (("variants", "classified_on"), ("results", "test_date"), ("assessments", "assessment_date"),
                      ("studies", "study_date")):  # fmt: skip
        frame = cohort[name]
        expected = frame[[not pd.isna(d) and dt.date.fromisoformat(d) <= on for d in frame[col]]]
        assert fs.records_up_to(frame, col, on).equals(expected), name


def _same_records(a: list[dict], b: list[dict]) -> bool:
    if len(a) != len(b):
        return False
    for x, y in zip(a, b):
        if list(x) != list(y):
            return False
        for k in x:
            u, v = x[k], y[k]
            nan = isinstance(u, float) and isinstance(v, float) and math.isnan(u) and math.isnan(v)
            if type(u) is not type(v) or not (nan or u is v or u == v):
                return False
    return True


def test_frame_records_equal_to_dict_records(cohort):
    for name, frame in cohort.items():
        assert _same_records(frame_records(frame), frame.to_dict("records")), name
        part = frame.iloc[3:11]
        assert _same_records(frame_records(part), part.to_dict("records")), name
    odd = pd.DataFrame({
        "int": [1, 2, 3], "float32": np.array([1.5, np.nan, 3], dtype=np.float32), "bool": [True, False, True],
        "boolean": pd.array([True, None, False], dtype="boolean"), "Int64": pd.array([1, None, 3], dtype="Int64"),
        "category": pd.Categorical(["x", None, "y"]), "str": pd.Series(["u", None, "w"], dtype="str"),
        "datetime": pd.to_datetime(["2020-01-01", None, "2021-01-01"]),
        "objects": pd.Series([np.int64(1), np.float64(2.5), pd.NA], dtype=object),
        "dates": [dt.date(2020, 1, 1), None, np.datetime64("2020-01-01")],
    })  # fmt: skip
    assert _same_records(frame_records(odd), odd.to_dict("records"))
    assert frame_records(odd.iloc[:0]) == [] and frame_records(odd[[]]) == [{}, {}, {}]


# --------------------------------------------------------------------------- review engine


def _ecg_row_by_row(a: pd.DataFrame, child: np.ndarray) -> None:
    """The ECG voltage criteria written one row at a time (the straightforward version)."""
    for code, source in review._VOLTAGE_SOURCES.items():
        rows = (a["measure"] == code).to_numpy() & ~child
        for i in np.flatnonzero(rows):
            v = float(a.at[i, "value"])
            met = (review.dv.sokolow_lyon_criterion(v) if code == review.dv.SOKOLOW_LYON
                   else review.dv.cornell_criterion(v, str(a.at[i, "sex"])))  # fmt: skip
            if met is None:
                continue
            a.at[i, "assessment"] = "above normal limits" if met else "within normal limits"
            a.at[i, "flag"] = "LV hypertrophy voltage criterion met" if met else None
            a.at[i, "source"] = source
            a.at[i, "note"] = "ECG voltage criterion (adults)"


def _join_everywhere(out: np.ndarray, mask: np.ndarray, text) -> np.ndarray:
    """Text joining computed on every row, then kept where ``mask`` (the straightforward version)."""
    text = np.broadcast_to(np.asarray(text, dtype=object), out.shape)
    return np.where(mask, np.where(out == "", text, out + "; " + text), out)


@pytest.fixture(scope="module")
def measurements(cohort) -> tuple[pd.DataFrame, dict]:
    f = cohort
    states = fs.build_family_states(*_args(f))
    kw = {"guideline": "esc_2023",
          "relative_of_affected": set().union(*(fs.first_degree_of_affected(s) for s in states.values())),
          "genotype_positive": set().union(*(fs.genotype_positive(s) for s in states.values()))}  # fmt: skip
    return review.build_measurements(f["people"], f["studies"]), kw


def test_review_steps_equal_their_row_by_row_versions(measurements, monkeypatch):
    m, kw = measurements
    before = m.copy()
    fast = review.assess_measurements(m, **kw)
    fast_trend = review.trend_table(fast, **kw)
    fast_flags = review.trend_flags(m, **kw)
    pd.testing.assert_frame_equal(m, before)  # the input is never changed
    assert (fast["measure"].isin(list(review._VOLTAGE_SOURCES)) & (fast["source"] != "")).any()
    assert (fast_trend["reasons"] != "").any() and fast_trend["converted"].any()

    monkeypatch.setattr(review, "_ecg_voltage_criteria", _ecg_row_by_row)
    monkeypatch.setattr(review, "_join", _join_everywhere)
    slow = review.assess_measurements(m, **kw)
    pd.testing.assert_frame_equal(fast, slow, check_exact=True)
    pd.testing.assert_frame_equal(fast_trend, review.trend_table(slow, **kw), check_exact=True)
    pd.testing.assert_frame_equal(fast_flags, review.trend_flags(m, **kw), check_exact=True)


def test_build_measurements_equals_the_plain_join(cohort, measurements, monkeypatch):
    fast, _ = measurements
    monkeypatch.setattr(review, "_join_unique", lambda d, attrs: d.join(attrs).reset_index())
    monkeypatch.setattr(review, "_segment_codes",
                        lambda measures: measures[measures.astype(str).str.startswith(review._SEGMENT_PREFIXES)])
    pd.testing.assert_frame_equal(fast, review.build_measurements(cohort["people"], cohort["studies"]),
                                  check_exact=True)  # fmt: skip
