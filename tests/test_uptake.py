"""Cascade uptake engine (tracker.engines.uptake) on invented families whose figures are known by
construction (hand-counted below), Kaplan-Meier checked by hand on tiny cases and against an
independent product-limit calculation; statsmodels' SurvfuncRight is the reference library the
engine uses for the curves.  All people and dates are invented."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest

from tracker.engines import uptake as U
from tracker.engines.uptake import Period, RelativeRecord

D = dt.date
START = D(2024, 1, 1)  # family A's proband result
END = D(2024, 12, 31)  # period end: 365 days after START (2024 is a leap year)


def rel(person, degree, *, fam="A", start=START, at_risk=True, **kw):
    return RelativeRecord(family=fam, person=person, degree=degree, at_risk=at_risk,
                          at_risk_why="invented", proband_result_date=start, **kw)  # fmt: skip


def family_a():
    """9 at-risk relatives and one married-in spouse (not at risk).

    person degree  informed (route)        counselled  tested               screened    other
    R1     1       2024-01-10 (family)     2024-02-01  2024-02-15           -           -
    R2     1       2024-01-20 (direct)     -           2024-03-01 elsewhere 2024-03-10  -
    R3     1       2024-02-01 (family)     -           -                    -           declined 2024-02-05
    R4     1       2024-03-01 (direct)     -           -                    2024-04-01  -
    R5     2       2024-05-01 (direct)     -           -                    -           -
    R6     2       -                       -           -                    -           not reachable 2024-06-01
    R7     2       -                       -           -                    -           -
    R8     3       -                       -           -                    -           -
    R9     4       -                       -           2025-02-01 (after the period: not counted)
    SP     -       married in, not at risk (left out of every figure)

    Counts (of 9): informed 5 (R1-R5), counselled 1 (R1), tested 2 (R1, R2), screened 2 (R2, R4),
    declined 1 (R3), not reachable 1 (R6).  Route (of 5 informed): family 2 (R1, R3), direct 3.
    Tested elsewhere: 1 of 2 (R2).
    """
    return [
        rel("R1", 1, first_informed_date=D(2024, 1, 10), informed_via="family", counselled_date=D(2024, 2, 1),
            tested_date=D(2024, 2, 15)),
        rel("R2", 1, first_informed_date=D(2024, 1, 20), informed_via="direct", tested_date=D(2024, 3, 1),
            tested_external=True, screened_date=D(2024, 3, 10)),
        rel("R3", 1, first_informed_date=D(2024, 2, 1), informed_via="family", declined=True,
            declined_on=D(2024, 2, 5)),
        rel("R4", 1, first_informed_date=D(2024, 3, 1), informed_via="direct", screened_date=D(2024, 4, 1)),
        rel("R5", 2, first_informed_date=D(2024, 5, 1), informed_via="direct"),
        rel("R6", 2, not_reachable=True, not_reachable_on=D(2024, 6, 1)),
        rel("R7", 2),
        rel("R8", 3),
        rel("R9", 4, tested_date=D(2025, 2, 1)),
        rel("SP", None, at_risk=False),
    ]  # fmt: skip


def test_family_counts_by_construction():
    rep = U.uptake(family_a(), Period(None, END))
    c = rep.clinic
    assert c.at_risk == 9
    got = {k: (v.count, v.of) for k, v in c.counts.items()}
    assert got == {"informed": (5, 9), "counselled": (1, 9), "tested": (2, 9), "screened": (2, 9),
                   "declined": (1, 9), "not_reachable": (1, 9)}  # fmt: skip
    assert c.counts["informed"].percent == 55.6 and c.counts["informed"].text() == "5 of 9 (56%)"
    assert {k: (v.count, v.of) for k, v in c.routes.items()} == {
        "via_family": (2, 5), "direct": (3, 5), "not_recorded": (0, 5)}
    assert (c.tested_elsewhere.count, c.tested_elsewhere.of) == (1, 2)
    assert rep.families[0].not_at_risk == 1


def test_counts_by_degree():
    """first: R1-R4 (4), informed 4, tested 2, screened 2, declined 1; second: R5-R7 (3), informed 1,
    not reachable 1; more distant: R8 (3rd) and R9 (4th) (2), none informed (R9's test is after the period)."""
    rep = U.uptake(family_a(), Period(None, END))
    first, second, distant = (rep.by_degree[g] for g in ("first", "second", "more_distant"))
    assert (first.at_risk, first.counts["informed"].count, first.counts["tested"].count,
            first.counts["screened"].count, first.counts["declined"].count) == (4, 4, 2, 2, 1)  # fmt: skip
    assert (second.at_risk, second.counts["informed"].count, second.counts["not_reachable"].count) == (3, 1, 1)
    assert (distant.at_risk, distant.counts["informed"].count, distant.counts["tested"].count) == (2, 0, 0)
    assert "unknown" not in rep.by_degree  # everyone at risk has a degree


def test_time_to_first_contact_by_hand():
    """Days from 2024-01-01 to first contact: R1 9, R2 19, R3 31, R4 60, R5 121; R6-R9 not contacted:
    censored at 365 (the period end), not dropped.  Kaplan-Meier, 9 at risk: S = 8/9 after day 9,
    7/9 after 19, 6/9 after 31, 5/9 = 0.556 after 60, 4/9 = 0.444 after 121: the first time S < 1/2
    is day 121.  Median among the contacted only: median(9, 19, 31, 60, 121) = 31."""
    t = U.uptake(family_a(), Period(None, END)).clinic.time_to_first_contact
    assert (t.relatives, t.events, t.censored) == (9, 5, 4)
    assert t.censor_days == (365, 365, 365, 365)
    assert t.median_days == 121.0
    assert t.median_among_events_days == 31.0
    assert t.curve[-1][1] == pytest.approx(5 / 9)
    assert [d for d, _ in t.curve] == [0.0, 9.0, 19.0, 31.0, 60.0, 121.0]
    assert t.follow_up_days == (365, 365)


def test_time_to_test_median_not_reached():
    """Tested: R1 on day 45, R2 on day 60; 7 censored at 365 (R9's test is after the period).
    S = 8/9 then 7/9: never below one half: the median is not reached (None), never a made-up figure."""
    t = U.uptake(family_a(), Period(None, END)).clinic.time_to_test
    assert (t.relatives, t.events, t.censored) == (9, 2, 7)
    assert t.median_days is None
    assert "median not reached" in t.text()
    assert t.median_among_events_days == 52.5


def test_km_tiny_case_by_hand_and_by_product_limit():
    """times 0(e) 3(e) 5(c) 5(e) 8(c) 10(e): S(0) = 5/6, S(3) = 5/6 * 4/5 = 2/3, S(5) = 2/3 * 3/4 = 1/2
    (the relative censored at 5 is still at risk at 5), S(10) = 0.  Median: first S < 1/2: day 10
    (statsmodels' quantile rule, strict inequality)."""
    curve, median = U.kaplan_meier([0, 3, 5, 5, 8, 10], [True, True, False, True, False, True])
    assert [d for d, _ in curve] == [0.0, 3.0, 5.0, 10.0]
    assert [p for _, p in curve] == pytest.approx([1 / 6, 1 / 3, 1 / 2, 1.0])
    assert median == 10.0
    # an independent product-limit calculation on a less tidy case
    times = [2, 2, 3, 7, 7, 7, 11, 15, 15, 20, 30, 30]
    events = [True, False, True, True, True, False, False, True, False, True, False, True]
    curve, _ = U.kaplan_meier(times, events)
    s, expected = 1.0, []
    for t in sorted(set(times)):
        d = sum(1 for x, e in zip(times, events) if x == t and e)
        n = sum(1 for x in times if x >= t)
        if d:
            s *= 1 - d / n
            expected.append((float(t), 1 - s))
    assert [d for d, _ in curve[1:]] == [d for d, _ in expected]
    assert [p for _, p in curve[1:]] == pytest.approx([p for _, p in expected])


def test_contact_before_result_counts_as_day_zero():
    recs = [rel("E1", 1, screened_date=D(2023, 6, 1)), rel("E2", 1, first_informed_date=D(2024, 1, 11)), rel("E3", 1)]
    t = U.uptake(recs, Period(None, END)).clinic.time_to_first_contact
    assert t.before_result == 1 and t.events == 2 and t.censored == 1
    assert t.curve[0][0] == 0.0 and t.curve[0][1] == pytest.approx(1 / 3)  # one of three contacted at day 0


def test_events_imply_informed():
    """Tested, screened, counselled or declined without a recorded informing date: informed on that date."""
    recs = [rel("T", 1, tested_date=D(2024, 2, 1)), rel("S", 2, screened_date=D(2024, 3, 1)),
            rel("X", 2, declined=True)]  # fmt: skip
    rep = U.uptake(recs, Period(None, END))
    assert rep.clinic.counts["informed"].count == 3
    assert rep.clinic.routes["not_recorded"].count == 3
    assert rep.clinic.time_to_first_contact.events == 2  # the undated decline has no time: censored


def test_empty_family_and_zero_denominators():
    rep = U.uptake([], Period(None, END), probands={"E": "E-1"}, result_dates={"E": D(2024, 3, 1)})
    f = rep.families[0]
    assert f.family == "E" and f.figures.at_risk == 0 and f.in_period
    for p in f.figures.counts.values():
        assert p.percent is None and p.text() == "0 of 0 (—)"
    assert f.figures.time_to_first_contact.median_days is None
    assert f.figures.time_to_first_contact.text().startswith("—")
    d = U.report_dict(rep)
    assert d["clinic"]["counts"]["informed"]["percent"] is None
    assert d["clinic"]["time_to_test"]["median_days"] is None
    # nobody informed: the route shares have a zero denominator
    rep = U.uptake([rel("N", 1)], Period(None, END))
    assert rep.clinic.routes["via_family"].of == 0 and rep.clinic.routes["via_family"].percent is None


def test_not_recorded_is_not_zero():
    rep = U.uptake(family_a(), Period(None, END), recorded=("informed", "tested", "screened", "declined",
                                                              "not_reachable"))  # fmt: skip
    assert rep.clinic.counts["counselled"].count is not None
    assert rep.clinic.counts["counselled"].percent is None
    assert rep.clinic.counts["counselled"].text() == "not recorded (of 9)"
    assert rep.clinic.routes["via_family"].text() == "not recorded (of 5)"
    assert U.report_dict(rep)["not_recorded"] == ["counselled", "external", "route"]
    assert rep.clinic.tested_elsewhere.text() == "not recorded (of 2)"


def test_period_selects_families_and_cuts_events():
    """Family B starts 2025-03-01, after the period: listed, left out of the clinic figures.
    Family C has no positive result: listed with the reason, left out.  With the period ending
    2024-03-31, family A's events after that day are not counted: informed R1-R4 (4), tested 2,
    screened 1 (R4's screening is 2024-04-01), censoring at 90 days."""
    recs = family_a() + [rel("B1", 1, fam="B", start=D(2025, 3, 1)), rel("C1", 1, fam="C", start=None)]
    rep = U.uptake(recs, Period(D(2024, 1, 1), D(2024, 3, 31)))
    by_fam = {f.family: f for f in rep.families}
    assert rep.families_counted == 1 and by_fam["A"].in_period
    assert "outside the period" in by_fam["B"].left_out_reason
    assert "no positive genetic result" in by_fam["C"].left_out_reason
    c = rep.clinic
    assert (c.at_risk, c.counts["informed"].count, c.counts["tested"].count, c.counts["screened"].count) == (9, 4, 2, 1)
    assert set(c.time_to_first_contact.censor_days) == {(D(2024, 3, 31) - START).days}


def test_bad_route_and_period_refused():
    with pytest.raises(ValueError, match="informed_via"):
        rel("Z", 1, informed_via="email")
    with pytest.raises(ValueError, match="ends before"):
        Period(D(2025, 1, 1), D(2024, 1, 1))


def test_degree_groups():
    assert [U.degree_group(d) for d in (1, 2, 3, 5, None)] == ["first", "second", "more_distant",
                                                                "more_distant", "unknown"]  # fmt: skip


def test_docs_carry_every_definition_word_for_word():
    text = (Path(__file__).resolve().parents[1] / "docs" / "uptake.md").read_text(encoding="utf-8")
    flat = " ".join(text.split())
    for key, words in U.DEFINITIONS.items():
        assert " ".join(words.split()) in flat, key
    from tracker.services.uptake import SOURCE_LOG, SOURCE_STATUS

    for words in (SOURCE_LOG, SOURCE_STATUS):
        assert " ".join(words.split()) in flat, words[:40]


def _texts(flowables) -> str:
    out = []
    for f in flowables:
        if hasattr(f, "_content"):  # KeepTogether
            out.append(_texts(f._content))
        elif hasattr(f, "text"):
            out.append(f.text)
    return " ".join(out)


def test_pdf_prints_each_figure_with_its_definition(tmp_path):
    from tracker.outputs import uptake_pdf as P

    rep = U.uptake(family_a(), Period(None, END))
    doc = P.UptakeDocument("Invented clinic", D(2026, 12, 5), rep, "invented source")
    story = " ".join(_texts(P.build_story(doc)).split()).replace("&#x27;", "'").replace("&#39;", "'")
    for key in ("funnel", "time_to_first_contact", "time_to_test", "informed_route", "at_risk", "proband_result"):
        assert " ".join(U.DEFINITIONS[key].split()) in story, key
    path = P.write_uptake_pdf(doc, tmp_path / P.file_name(None, END))
    assert path.name == "uptake-to-2024-12-31.pdf" and path.read_bytes().startswith(b"%PDF")


def test_relative_born_after_the_result_is_timed_from_birth():
    """Born 2024-06-01, five months after the result: contacted 2024-07-01 is 30 days, not 182;
    censored at the period end from birth (213 days), not from the result."""
    recs = [rel("BABY", 1, born_on=D(2024, 6, 1), first_informed_date=D(2024, 7, 1)),
            rel("BABY2", 1, born_on=D(2024, 6, 1))]  # fmt: skip
    t = U.uptake(recs, Period(None, END)).clinic.time_to_first_contact
    assert t.median_among_events_days == 30.0
    assert t.censor_days == ((END - D(2024, 6, 1)).days,) == (213,)
