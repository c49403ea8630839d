"""Cascade uptake figures: how far family communication and testing reached the at-risk relatives.

Pure engine: plain records in (one :class:`RelativeRecord` per relative), plain
dataclasses out.  It never opens the database or prints.  The service
(:mod:`tracker.services.uptake`) decides who is at risk and reads each date from
the record; this module only counts, divides and estimates, with the period
given.

Each figure's definition is a string constant below (``DEF_*``), printed beside
the figure in the PDF and copied into ``docs/uptake.md``; a test checks that the
document carries every one of them word for word.

Figures are counts with their denominators, never a bare percentage: a clinic's
families are small and one relative moves a percentage by many points.

Decision support only: the figures describe the record, they do not say what
any relative should do.  The treating clinician decides, following local
protocols and the current guideline.
"""

from __future__ import annotations

import datetime as dt
import statistics
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field

# --------------------------------------------------------------------------- definitions

DEF_PERIOD = (
    "Period: a family is counted when its cascade start date (the proband's result, see below) falls "
    "from the first to the last day of the period, both included. Events are counted up to the last day "
    "of the period; later events are not counted."
)
DEF_PROBAND_RESULT = (
    "Proband's result (cascade start): the date of the family's first positive genetic result, that is "
    "the first result 'carrier' of the family's P/LP variant, or the day the variant was first classified "
    "P/LP if that came later. A family without one has no cascade start date: it is shown on its own "
    "and left out of the clinic's figures and of every time figure."
)
DEF_AT_RISK = (
    "At-risk relative (the denominator of every percentage): a blood relative of the proband not recorded "
    "as deceased, not the proband, not a member drawn only to connect the pedigree, and not ruled out by "
    "the pedigree as the record stands at the end of the period (for example a child of a relative who tested "
    "non-carrier). Relatives who tested non-carrier stay in: they were at risk until their test."
)
DEF_DEGREE = (
    "Degree of relationship to the proband: first (parents, children, full siblings), second "
    "(grandparents, grandchildren, aunts and uncles, nieces and nephews, half siblings), more distant "
    "(third degree or further), counted on the pedigree as tracker.domain.pedigree does."
)
DEF_INFORMED = (
    "Informed: the relative's first contact is on or before the last day of the period. First contact "
    "is the earliest of: the first recorded contact that reached the relative, and the first "
    "counselling, genetic test, screening visit or recorded decline (each implies the relative "
    "had been told). A relative recorded as told without a date counts as informed."
)
DEF_COUNSELLED = "Counselled: a recorded genetic counselling on or before the last day of the period."
DEF_TESTED = (
    "Tested: a genetic test of the relative (predictive or diagnostic, any result, here or elsewhere) "
    "dated on or before the last day of the period."
)
DEF_SCREENED = (
    "Screened: a clinical screening visit of the relative (echocardiogram, cardiac MRI or clinic visit; "
    "an ECG alone is not counted; here or elsewhere) dated on or before the last day of the period."
)
DEF_DECLINED = (
    "Declined: the relative's decline of testing or screening is recorded, dated on or before the last "
    "day of the period (an undated decline counts)."
)
DEF_NOT_REACHABLE = (
    "Not reachable: the record says the relative cannot be reached (lost to follow-up, wrong address, "
    "moved away) and no later contact reached them, dated on or before the last day of the period (an "
    "undated one counts)."
)
DEF_ROUTE = (
    "Informed through the family or directly: how the first contact that reached the relative was "
    "made. Through the family: a relative passed the news on (recorded as such). Directly: a letter, "
    "phone call or clinic contact from the clinic. Not recorded: informed, but the route is unknown "
    "(for example known only from a test). Denominator: the relatives informed."
)
DEF_TIME_TO_CONTACT = (
    "Time to first contact: days from the proband's result to the relative's first contact (as under "
    "Informed). A relative not yet contacted is censored at the last day of the period, never dropped. "
    "A first contact before the proband's result counts as 0 days; a relative born after the proband's "
    "result is timed from their birth. A relative recorded as told on an unknown day is left out of "
    "this figure and counted beside it. Curve: Kaplan-Meier estimate "
    "(statsmodels SurvfuncRight), drawn as the proportion contacted. Median: the first time at which "
    "the estimated proportion not yet contacted falls below one half (statsmodels' quantile rule); "
    "'not reached' when it never does within the follow-up."
)
DEF_TIME_TO_TEST = (
    "Time to test: days from the proband's result to the relative's first genetic test (as under "
    "Tested). A relative not yet tested is censored at the last day of the period, whether or not they "
    "declined or could not be reached. A test before the proband's result counts as 0 days. Curve and "
    "median as for time to first contact."
)
DEF_FUNNEL = (
    "Cascade funnel: the at-risk relatives, then those informed, counselled, tested and screened, each "
    "bar a count of the at-risk relatives with its percentage of them. The stages are not nested: a "
    "relative may be screened without a genetic test, or tested without recorded counselling."
)
DEFINITIONS: dict[str, str] = {
    "period": DEF_PERIOD,
    "proband_result": DEF_PROBAND_RESULT,
    "at_risk": DEF_AT_RISK,
    "degree": DEF_DEGREE,
    "informed": DEF_INFORMED,
    "counselled": DEF_COUNSELLED,
    "tested": DEF_TESTED,
    "screened": DEF_SCREENED,
    "declined": DEF_DECLINED,
    "not_reachable": DEF_NOT_REACHABLE,
    "informed_route": DEF_ROUTE,
    "time_to_first_contact": DEF_TIME_TO_CONTACT,
    "time_to_test": DEF_TIME_TO_TEST,
    "funnel": DEF_FUNNEL,
}

SMALL_NUMBERS = (
    "Small numbers: every percentage is shown with its count and denominator. Below 20 relatives one "
    "person moves a percentage by 5 points or more; compare families and periods with care."
)
CAUTION = (
    "Decision support only: these figures describe the record, not what any relative should do. The "
    "treating clinician decides, following local protocols and the current guideline."
)

STATUSES = ("informed", "counselled", "tested", "screened", "declined", "not_reachable")
DEGREE_GROUPS = ("first", "second", "more_distant")
DEGREE_WORDS = {"first": "first degree", "second": "second degree", "more_distant": "more distant",
                "unknown": "degree unknown"}  # fmt: skip
ROUTES = ("via_family", "direct", "not_recorded")
DAYS_PER_MONTH = 365.25 / 12  # calendar average, for the months shown beside days


def degree_group(degree: int | None) -> str:
    """'first', 'second', 'more_distant' (3 or more), or 'unknown' (None)."""
    if degree is None:
        return "unknown"
    if degree <= 1:
        return "first"
    return "second" if degree == 2 else "more_distant"


# --------------------------------------------------------------------------- input


@dataclass(frozen=True)
class RelativeRecord:
    """One relative of a proband, with the dates the record holds (None: no such event recorded).

    ``degree``: degree of relationship to the proband (1, 2, 3 and up; None when unknown).
    ``informed_via``: 'family', 'direct' or None (not recorded).  ``declined_on`` /
    ``not_reachable_on``: the date of the decline or of the failed contact, when known.
    """

    family: str
    person: str
    degree: int | None
    at_risk: bool
    at_risk_why: str
    proband_result_date: dt.date | None
    first_informed_date: dt.date | None = None
    informed_via: str | None = None
    counselled_date: dt.date | None = None
    tested_date: dt.date | None = None
    tested_external: bool = False
    screened_date: dt.date | None = None
    declined: bool = False
    declined_on: dt.date | None = None
    not_reachable: bool = False
    not_reachable_on: dt.date | None = None
    born_on: dt.date | None = None  # a relative born after the proband's result is timed from birth
    informed_undated: bool = False  # the record says the relative was told, but not when

    def __post_init__(self) -> None:
        if self.informed_via not in (None, "family", "direct"):
            raise ValueError(f"{self.person}: informed_via {self.informed_via!r} is not 'family', 'direct' or None")


@dataclass(frozen=True)
class Period:
    """``start`` (None: from the first cascade) to ``end`` (both included)."""

    start: dt.date | None
    end: dt.date

    def __post_init__(self) -> None:
        if self.start is not None and self.start > self.end:
            raise ValueError("the period ends before it starts")

    def holds(self, day: dt.date | None) -> bool:
        return day is not None and (self.start is None or day >= self.start) and day <= self.end


# --------------------------------------------------------------------------- output


@dataclass(frozen=True)
class Proportion:
    """``count`` of ``of``; ``percent`` None when ``of`` is 0 or the item is not recorded."""

    count: int | None
    of: int
    recorded: bool = True

    @property
    def percent(self) -> float | None:
        if not self.recorded or self.count is None or self.of == 0:
            return None
        return round(100 * self.count / self.of, 1)

    def text(self) -> str:
        """'5 of 9 (56%)', '0 of 0 (—)', or 'not recorded (of 9)'."""
        if not self.recorded or self.count is None:
            return f"not recorded (of {self.of})"
        pct = self.percent
        return f"{self.count} of {self.of} ({'—' if pct is None else f'{pct:.0f}%'})"

    def as_dict(self) -> dict:
        return {"count": self.count if self.recorded else None, "of": self.of, "percent": self.percent,
                "recorded": self.recorded, "text": self.text()}  # fmt: skip


@dataclass(frozen=True)
class TimeFigure:
    """A time-to-event figure in days from the proband's result.

    ``relatives``: at risk and in the figure; ``events`` reached the event by the end of the period;
    ``censored`` did not.  ``median_days``: Kaplan-Meier median (None: not reached or nobody in the
    figure).  ``curve``: (day, proportion with the event) at each event time, from (0, 0).
    """

    relatives: int
    events: int
    censored: int
    median_days: float | None
    median_among_events_days: float | None
    before_result: int
    follow_up_days: tuple[int, int] | None  # shortest and longest follow-up
    curve: tuple[tuple[float, float], ...] = ()
    censor_days: tuple[int, ...] = ()
    undated: int = 0  # had the event on an unknown day: left out of the figure, counted here

    @property
    def median_months(self) -> float | None:
        return None if self.median_days is None else round(self.median_days / DAYS_PER_MONTH, 1)

    def text(self) -> str:
        if self.relatives == 0:
            return "— (no relatives with a cascade start date)"
        if self.median_days is None:
            med = "median not reached"
        else:
            med = f"median {self.median_days:.0f} days ({self.median_months:.1f} months)"
        text = f"{med}; {self.relatives} relatives: {self.events} with the event, {self.censored} censored"
        if self.before_result:
            text += f"; {self.before_result} before the proband's result (counted as 0 days)"
        if self.undated:
            text += f"; {self.undated} left out: the day is not recorded"
        return text

    def as_dict(self) -> dict:
        return {
            "unit": "days",
            "relatives": self.relatives,
            "events": self.events,
            "censored": self.censored,
            "median_days": self.median_days,
            "median_months": self.median_months,
            "median_reached": self.median_days is not None,
            "median_among_events_days": self.median_among_events_days,
            "median_among_events_note": "among relatives with the event only: ignores the censored, so "
            "it is shorter than the true median; shown for comparison",
            "event_before_result": self.before_result,
            "left_out_undated": self.undated,
            "follow_up_days": None if self.follow_up_days is None else
            {"shortest": self.follow_up_days[0], "longest": self.follow_up_days[1]},
            "curve": [{"day": d, "proportion": round(p, 4)} for d, p in self.curve],
            "text": self.text(),
        }  # fmt: skip


@dataclass(frozen=True)
class GroupFigures:
    """The figures of one group of at-risk relatives (a family, a degree, the clinic)."""

    at_risk: int
    counts: Mapping[str, Proportion]
    tested_elsewhere: Proportion
    routes: Mapping[str, Proportion]
    time_to_first_contact: TimeFigure
    time_to_test: TimeFigure

    def as_dict(self) -> dict:
        return {
            "at_risk": self.at_risk,
            "counts": {k: v.as_dict() for k, v in self.counts.items()},
            "tested_elsewhere": self.tested_elsewhere.as_dict(),
            "informed_route": {k: v.as_dict() for k, v in self.routes.items()},
            "time_to_first_contact": self.time_to_first_contact.as_dict(),
            "time_to_test": self.time_to_test.as_dict(),
        }


@dataclass(frozen=True)
class FamilyFigures:
    family: str
    proband: str | None
    proband_result_date: dt.date | None
    in_period: bool
    left_out_reason: str | None
    figures: GroupFigures
    by_degree: Mapping[str, GroupFigures]
    not_at_risk: int


@dataclass(frozen=True)
class UptakeReport:
    period: Period
    clinic: GroupFigures
    by_degree: Mapping[str, GroupFigures]
    families: tuple[FamilyFigures, ...]
    families_counted: int
    notes: tuple[str, ...] = ()
    recorded: frozenset[str] = field(default_factory=frozenset)


# --------------------------------------------------------------------------- computing


def first_contact(r: RelativeRecord) -> dt.date | None:
    """The first contact as :data:`DEF_INFORMED` defines it (no period cut)."""
    dates = [r.first_informed_date, r.counselled_date, r.tested_date, r.screened_date]
    if r.declined:
        dates.append(r.declined_on)
    present = [d for d in dates if d is not None]
    return min(present) if present else None


def _by(day: dt.date | None, end: dt.date) -> bool:
    return day is not None and day <= end


def _flag_by(flag: bool, day: dt.date | None, end: dt.date) -> bool:
    return flag and (day is None or day <= end)


def status_of(r: RelativeRecord, end: dt.date) -> dict[str, bool]:
    """Which of :data:`STATUSES` the relative has reached by ``end``."""
    return {
        "informed": _by(first_contact(r), end) or _flag_by(r.declined, r.declined_on, end) or r.informed_undated,
        "counselled": _by(r.counselled_date, end),
        "tested": _by(r.tested_date, end),
        "screened": _by(r.screened_date, end),
        "declined": _flag_by(r.declined, r.declined_on, end),
        "not_reachable": _flag_by(r.not_reachable, r.not_reachable_on, end),
    }


def _median(values: Sequence[float]) -> float | None:
    return float(statistics.median(values)) if values else None


def kaplan_meier(times: Sequence[float], events: Sequence[bool]) -> tuple[tuple[tuple[float, float], ...], float | None]:
    """(curve of the proportion with the event, median time) by statsmodels' SurvfuncRight.

    The curve starts at (0, 0) and has a point at each distinct event time: (t, 1 - S(t)).
    The median is ``SurvfuncRight.quantile(0.5)``: the first event time with S(t) < 0.5 (None when
    S never falls below one half, or nobody has the event).
    """
    if not times or not any(events):
        return ((0.0, 0.0),) if times else (), None
    import numpy as np
    from statsmodels.duration.survfunc import SurvfuncRight

    sf = SurvfuncRight(np.asarray(times, dtype=float), np.asarray([1 if e else 0 for e in events], dtype=float))
    curve = [(0.0, 0.0)] + [(float(t), float(1 - s)) for t, s in zip(sf.surv_times, sf.surv_prob)]
    if curve[1][0] == 0.0:  # events at day 0: the curve starts at their proportion
        curve = curve[1:]
    q = sf.quantile(0.5)
    median = None if q is None or np.isnan(q) else float(q)
    return tuple(curve), median


def time_figure(records: Iterable[RelativeRecord], event_of, end: dt.date, undated_of=None) -> TimeFigure:
    """Time from the proband's result to ``event_of(record)`` (a date or None), censored at ``end``.

    Records without a proband result date (or with one after ``end``) are not in the figure, nor
    are those for which ``undated_of(record)`` says the event happened on an unknown day (counted
    in ``undated``: neither an event time nor a censoring time can be given).
    """
    undated = 0
    times: list[float] = []
    events: list[bool] = []
    event_days: list[float] = []
    censor: list[int] = []
    before = 0
    follow: list[int] = []
    for r in records:
        start = r.proband_result_date
        if start is None or start > end:
            continue
        if r.born_on is not None and start < r.born_on <= end:
            start = r.born_on
        day = event_of(r)
        if (day is None or day > end) and undated_of is not None and undated_of(r):
            undated += 1
            continue
        follow.append((end - start).days)
        day = event_of(r)
        if day is not None and day <= end:
            t = (day - start).days
            if t < 0:
                before += 1
                t = 0
            times.append(float(t))
            events.append(True)
            event_days.append(float(t))
        else:
            t = (end - start).days
            times.append(float(t))
            events.append(False)
            censor.append(t)
    curve, median = kaplan_meier(times, events)
    return TimeFigure(
        relatives=len(times), events=len(event_days), censored=len(censor), median_days=median,
        median_among_events_days=_median(event_days), before_result=before,
        follow_up_days=(min(follow), max(follow)) if follow else None, curve=curve, censor_days=tuple(sorted(censor)),
        undated=undated,
    )  # fmt: skip


def group_figures(records: Sequence[RelativeRecord], end: dt.date,
                  recorded: Iterable[str] = STATUSES + ("route", "external")) -> GroupFigures:
    """The figures of the at-risk relatives among ``records`` (others are ignored), events up to ``end``.

    ``recorded``: the statuses the source records at all; the others are shown as "not recorded"
    rather than as a count of 0 (``'route'`` in it: the informing route is recorded; ``'external'``:
    tests done elsewhere are recorded as such).
    """
    recorded = frozenset(recorded)
    at_risk = [r for r in records if r.at_risk]
    n = len(at_risk)
    states = [status_of(r, end) for r in at_risk]
    counts = {s: Proportion(sum(st[s] for st in states), n, s in recorded) for s in STATUSES}
    tested = sum(st["tested"] for st in states)
    elsewhere = Proportion(sum(st["tested"] and r.tested_external for st, r in zip(states, at_risk)), tested,
                           "external" in recorded)  # fmt: skip
    informed = [r for r, st in zip(at_risk, states) if st["informed"]]
    route_known = "route" in recorded
    routes = {
        "via_family": Proportion(sum(r.informed_via == "family" for r in informed), len(informed), route_known),
        "direct": Proportion(sum(r.informed_via == "direct" for r in informed), len(informed), route_known),
        "not_recorded": Proportion(sum(r.informed_via is None for r in informed), len(informed)),
    }
    return GroupFigures(
        at_risk=n, counts=counts, tested_elsewhere=elsewhere, routes=routes,
        time_to_first_contact=time_figure(at_risk, first_contact, end, lambda r: r.informed_undated),
        time_to_test=time_figure(at_risk, lambda r: r.tested_date, end),
    )  # fmt: skip


def by_degree(records: Sequence[RelativeRecord], end: dt.date, recorded: Iterable[str]) -> dict[str, GroupFigures]:
    """Figures per degree group (first, second, more distant; 'unknown' only when someone has no degree)."""
    groups: dict[str, list[RelativeRecord]] = {g: [] for g in DEGREE_GROUPS}
    for r in records:
        if r.at_risk:
            groups.setdefault(degree_group(r.degree), []).append(r)
    return {g: group_figures(rs, end, recorded) for g, rs in groups.items()}


def uptake(
    records: Iterable[RelativeRecord],
    period: Period,
    *,
    probands: Mapping[str, str | None] | None = None,
    result_dates: Mapping[str, dt.date | None] | None = None,
    recorded: Iterable[str] = STATUSES + ("route", "external"),
    notes: Iterable[str] = (),
) -> UptakeReport:
    """The uptake figures per family, per degree and for the clinic over ``period``.

    ``probands`` / ``result_dates``: family -> proband code / cascade start date, so that a family
    with no at-risk relative is still listed (its figures are empty: "—", never a division error).
    """
    records = list(records)
    fams: dict[str, list[RelativeRecord]] = {}
    for f in list(probands or {}) + list(result_dates or {}):
        fams.setdefault(f, [])
    for r in records:
        fams.setdefault(r.family, []).append(r)
    recorded = frozenset(recorded)
    out: list[FamilyFigures] = []
    counted: list[RelativeRecord] = []
    for fam in sorted(fams):
        rs = fams[fam]
        start = (result_dates or {}).get(fam)
        if start is None:
            start = next((r.proband_result_date for r in rs if r.proband_result_date is not None), None)
        if start is None:
            reason = "no positive genetic result recorded: no cascade start date"
        elif not period.holds(start):
            reason = f"cascade started {start.isoformat()}, outside the period"
        else:
            reason = None
        if reason is None:
            counted.extend(rs)
        out.append(FamilyFigures(
            family=fam, proband=(probands or {}).get(fam), proband_result_date=start, in_period=reason is None,
            left_out_reason=reason, figures=group_figures(rs, period.end, recorded),
            by_degree=by_degree(rs, period.end, recorded), not_at_risk=sum(not r.at_risk for r in rs),
        ))  # fmt: skip
    return UptakeReport(
        period=period, clinic=group_figures(counted, period.end, recorded),
        by_degree=by_degree(counted, period.end, recorded), families=tuple(out),
        families_counted=sum(f.in_period for f in out), notes=tuple(notes), recorded=recorded,
    )  # fmt: skip


def _iso(d: dt.date | None) -> str | None:
    return d.isoformat() if d is not None else None


def report_dict(rep: UptakeReport) -> dict:
    """The report as plain JSON-ready data (ISO dates, days as the time unit)."""
    return {
        "period": {"from": _iso(rep.period.start), "to": rep.period.end.isoformat()},
        "units": {"time": "days from the proband's result (months = days / 30.44)", "percent": "percent of 'of'"},
        "families_counted": rep.families_counted,
        "clinic": rep.clinic.as_dict(),
        "by_degree": {g: f.as_dict() for g, f in rep.by_degree.items()},
        "families": [
            {
                "family": f.family,
                "proband": f.proband,
                "proband_result_date": _iso(f.proband_result_date),
                "in_clinic_figures": f.in_period,
                "left_out_reason": f.left_out_reason,
                "relatives_not_at_risk": f.not_at_risk,
                "figures": f.figures.as_dict(),
                "by_degree": {g: x.as_dict() for g, x in f.by_degree.items()},
            }
            for f in rep.families
        ],
        "not_recorded": sorted(s for s in STATUSES + ("route", "external") if s not in rep.recorded),
        "definitions": dict(DEFINITIONS),
        "notes": list(rep.notes),
        "cautions": [SMALL_NUMBERS, CAUTION],
    }
