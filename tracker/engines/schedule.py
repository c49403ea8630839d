"""Recall proposals: when one person should next be seen, under one rule set.

:func:`propose_recall` is pure: it takes a :class:`PersonState`, a loaded
:class:`~tracker.rules.RuleSet` (one guideline, never blended), a
:class:`Policy` and today's date, and returns a :class:`Proposal`.  Intervals
are whole months; ages are whole years.

Conventions (documented here because the proposal depends on them)
------------------------------------------------------------------
* **Age band at the due date.**  The interval is that of the rule for the age
  on the *candidate due date*.  Starting from the rule at the last visit, the
  candidate is ``last visit + interval``; if the candidate falls in another
  rule's age band (e.g. a child turning 18), the interval is recomputed from
  the last visit with that rule, and so on.  If the recomputed date falls back
  into a band already tried (two bands disagree), the earliest candidate is
  used (the safer choice).  A birthday counts on the day itself; a person born
  on 29 February turns a year older on 1 March in a common year.
* **Year-only date of birth.**  Age is counted from 1 July of the birth year
  with an uncertainty of 0.5 y: the band is read for a birth on 1 January,
  1 July and 31 December.  When these straddle a band edge, the band with the
  shorter interval is used and the proposal says so.  A release rule must
  hold for every possible age.
* **Several rules at once.**  The rule giving the shortest interval under the
  policy governs; every matching rule is listed.
* **Policy point.**  ``shortest`` = the range's minimum, ``longest`` = its
  maximum, ``midpoint`` = the mean rounded down to a whole month.
* **Modifiers** (only when there is a last visit): progression beyond
  measurement variability, a projected threshold crossing before the routine
  due date, or a borderline phenotype, each cap the interval at the months
  given in the rule set (with its source).
* **Triggers** (new symptoms, pregnancy, started competitive sport, puberty,
  variant reclassified, new family data, new ECG abnormality): review now
  (due = today).
* **Rule for the age on the as-of date.**  A rule is never read at an old
  date's age.  For a person overdue (due date before today) the rule, its
  interval and its needs are those of the age *today*, the day the visit is
  now wanted; the due date and the days overdue are kept (flag
  ``band_changed_since_due`` when the rule differs).  When the age band on
  the proposed visit date differs from today's, the visit follows the rule
  of the visit date and a note names both (flag ``band_change_before_visit``).
* **Never screened** (no screening visit on record): the person has been
  eligible since the later of the start of the first matching age band
  (earliest possible birth date) and ``eligible_since`` (the date they were
  identified as at risk).  If that date is past, the person is *due now*
  (due = today, status ``due``, ``never_screened`` with ``eligible_since``
  and the contact gap ``gap_reason``), never "N days overdue"; the rule is
  the one for the age today.  If it is in the future, the visit is due on
  that date.  An affected person with no visit and no ``eligible_since``
  (diagnosis date) is due today (first evaluation).
* **Local overrides** (:class:`LocalOverride`) replace a rule's range and are
  listed with their reason; overrides naming a rule not in the rule set are
  ignored.
* **Genotype without a P/LP family variant.**  ``carrier`` or ``non_carrier``
  in a family without the ``plp_variant`` feature (e.g. after a downgrade to
  VUS/LB/B) is scheduled as genotype unknown (``uncertain``), and a
  genotype-negative result then does not release.
* **Borderline or uncertain phenotype** is its own state: the rule set's
  borderline rows apply (closer review, CMR to clarify), never its
  phenotype-negative rows, and the proposal carries
  :data:`BORDERLINE_CAUTION` (no sport clearance; specialist review).
* Deceased people are never scheduled; ``declined`` gives status
  ``not_recalled``; ``lost_to_follow_up`` is flagged; affected members
  (phenotype ``positive``) get the rule set's affected follow-up rules.

Every proposal carries the cautions: decision support only; it supports and
does not replace the clinician's decision and local protocol; follow the
current guideline; return earlier for symptoms or new family data.
"""

from __future__ import annotations

import calendar
import dataclasses
import datetime as dt
from dataclasses import dataclass, field

from tracker.domain.dates import DAY, PartialDate, age_at, birthday_at_age, completed_years
from tracker.rules.model import (
    FAMILY_FEATURES,
    GENOTYPES,
    PHENOTYPES,
    TRIGGERS,
    Rule,
    RuleSet,
    Source,
)

SEXES = ("female", "male", "unknown")
VITAL_STATUSES = ("alive", "deceased", "unknown")
CONTACT_STATUSES = ("not_contacted", "contactable", "declined", "lost_to_follow_up")
POINTS = ("shortest", "longest", "midpoint")
STATUSES = ("due", "overdue", "released", "not_recalled", "not_scheduled")

CAUTIONS: tuple[str, ...] = (
    "Decision support only: this proposal supports and does not replace the treating clinician's "
    "decision, the person's preferences and the local protocol.",
    "Follow the current guideline: check the rule set and the source shown beside each rule.",
    "Return earlier for new symptoms (syncope, palpitations, chest pain, breathlessness) or new family "
    "data (a new diagnosis, a sudden death, a variant reclassification).",
)
AFFECTED_CAUTION = (
    "Affected: outside family screening. Risk scores are 5-year population estimates for shared "
    "decisions; check the model's age range and exclusions. Refer complex genetic or ICD decisions "
    "to a cardiomyopathy centre."
)
GAP_REASONS = {
    "not_contacted": "not contacted",
    "declined": "declined",
    "lost_to_follow_up": "lost to follow-up",
    "contactable": "contactable, no visit yet",
}
"""Why a never-screened person has not been seen, by contact status (plain words)."""

LOST_CAUTION = "Lost to follow-up: the proposal stands but the person cannot be reached; try re-contact (local protocol)."
NO_RULE_CAUTION = "No rule in this rule set covers this person: the clinician decides the follow-up."
BORDERLINE_CAUTION = (
    "Borderline or uncertain phenotype: this person is not phenotype-negative. The proposal gives no "
    "clearance for competitive sport; sport decisions are deferred to review by a cardiomyopathy "
    "specialist, and contrast CMR may clarify the phenotype."
)


# --------------------------------------------------------------------- inputs


@dataclass(frozen=True)
class PersonState:
    """What the scheduler needs to know about one person (plain values only).

    ``genotype`` is one of ``GENOTYPES`` (carrier, non_carrier,
    at_risk_untested, not_at_risk, uncertain); ``phenotype`` one of negative,
    positive, borderline; ``family_features`` codes from ``FAMILY_FEATURES``;
    ``triggers`` codes from ``TRIGGERS``.  ``last_visit`` is the date of the
    last screening visit (ECG and imaging).  ``progression`` is True when a
    measurement changed beyond its measurement variability;
    ``projected_crossing_age_years`` the age (decimal years) at which a trend
    projects crossing the diagnostic threshold, or None.  ``eligible_since``
    is the date the person became at risk (e.g. the family diagnosis or the
    variant report), or None.  ``variant_classified_on`` is the date of the
    family variant's current classification (shown with a release).
    """

    person_code: str
    birth: PartialDate
    sex: str = "unknown"
    vital_status: str = "alive"
    contact_status: str = "contactable"
    genotype: str = "at_risk_untested"
    phenotype: str = "negative"
    family_features: frozenset[str] = frozenset()
    athlete: bool = False
    last_visit: dt.date | None = None
    progression: bool = False
    projected_crossing_age_years: float | None = None
    triggers: frozenset[str] = frozenset()
    eligible_since: dt.date | None = None
    variant_classified_on: dt.date | None = None
    # From the contact log (revision 0012; tracker.domain.contacts): the open wish
    # (no_further_contact / only_via_family_member, with the family member), the day the relative
    # asked to be contacted, the day they were first informed, and whether anything came back
    # since (a visit, a test, a booking or a reply).
    contact_wish: str | None = None
    contact_via: str | None = None
    contact_later_on: dt.date | None = None
    informed_on: dt.date | None = None
    responded: bool = False

    def __post_init__(self) -> None:
        object.__setattr__(self, "family_features", frozenset(self.family_features))
        object.__setattr__(self, "triggers", frozenset(self.triggers))
        checks = (
            ("sex", self.sex, SEXES),
            ("vital_status", self.vital_status, VITAL_STATUSES),
            ("contact_status", self.contact_status, CONTACT_STATUSES),
            ("genotype", self.genotype, tuple(GENOTYPES)),
            ("phenotype", self.phenotype, tuple(PHENOTYPES)),
        )
        for name, value, allowed in checks:
            if value not in allowed:
                raise ValueError(f"{name} {value!r} is not one of {allowed}")
        bad = sorted(self.family_features - set(FAMILY_FEATURES))
        if bad:
            raise ValueError(f"unknown family features {bad}")
        bad = sorted(self.triggers - set(TRIGGERS))
        if bad:
            raise ValueError(f"unknown triggers {bad}")
        if not isinstance(self.birth, PartialDate):
            raise TypeError("birth must be a PartialDate")


@dataclass(frozen=True)
class LocalOverride:
    """A clinic's own interval for one rule, with the reason (recorded in the proposal)."""

    rule_id: str
    min_months: int
    max_months: int
    reason: str

    def __post_init__(self) -> None:
        if not (0 < self.min_months <= self.max_months):
            raise ValueError("override months must be positive with min <= max")
        if not self.reason.strip():
            raise ValueError("a local override needs a reason")


@dataclass(frozen=True)
class Policy:
    """Clinic setting: which point of each interval range to use, and local overrides."""

    point: str = "midpoint"
    overrides: tuple[LocalOverride, ...] = ()

    def __post_init__(self) -> None:
        if self.point not in POINTS:
            raise ValueError(f"policy point {self.point!r} is not one of {POINTS}")


# -------------------------------------------------------------------- outputs


@dataclass(frozen=True)
class Fired:
    """A rule, modifier, trigger, advice item or override that applied.

    ``kind``: ``rule`` | ``release`` | ``modifier`` | ``trigger`` | ``advice`` |
    ``override``.  ``source`` is the display label (guideline, year,
    section, tag); ``tag`` is ``V``, ``V2``, ``M``, ``common_practice``, or
    ``local`` for a local-protocol override.  ``applied`` is False for a
    matching rule that did not govern the interval, or a modifier that did
    not shorten it.
    """

    kind: str
    code: str
    text: str
    source: str
    tag: str
    applied: bool = True


@dataclass(frozen=True)
class Proposal:
    """The scheduler's answer for one person.

    ``status``: ``due`` (due today or later), ``overdue`` (due date before
    today), ``released`` (no routine recall), ``not_recalled`` (declined),
    ``not_scheduled`` (deceased, not at risk).  ``days_overdue`` =
    today - due in days (negative: days until due; None without a due date).
    ``interval_months`` is the routine interval used (after modifiers);
    ``routine_due`` the routine date before any trigger.

    ``never_screened``: no screening visit on record (then ``eligible_since``
    is the day the person became eligible).  ``gap_reason``: the contact
    status behind a gap: ``not_contacted``, ``declined`` or
    ``lost_to_follow_up`` for anyone recalled (due, overdue, not recalled)
    who cannot be reached, ``contactable`` for a never-screened person who
    can, None otherwise, also for people released or not scheduled (see
    :data:`GAP_REASONS`); recall and worklist both show it.
    ``contact_status`` is the person's contact status (booking uses it).
    """

    person_code: str
    rule_set_id: str
    today: dt.date
    status: str
    due: dt.date | None
    interval_months: int | None
    routine_due: dt.date | None
    days_overdue: int | None
    rule_id: str | None
    needs: tuple[str, ...]
    consider: tuple[str, ...]
    fired: tuple[Fired, ...]
    triggers: tuple[str, ...]
    progression: bool
    flags: tuple[str, ...]
    notes: tuple[str, ...]
    cautions: tuple[str, ...]
    never_screened: bool = False
    eligible_since: dt.date | None = None
    gap_reason: str | None = None
    contact_status: str = "contactable"
    contact_wish: str | None = None
    contact_via: str | None = None
    contact_later_on: dt.date | None = None
    informed_on: dt.date | None = None
    responded: bool = False


def never_screened_text(p: Proposal) -> str | None:
    """'never screened, eligible since D; due now (not contacted)' for a never-screened person, else None."""
    if not p.never_screened:
        return None
    gap = GAP_REASONS.get(p.gap_reason or "", p.gap_reason or "")
    if p.eligible_since is None:
        return f"never screened ({gap})" if gap else "never screened"
    if p.eligible_since > p.today:
        text = f"never screened, eligible from {p.eligible_since.isoformat()}"
    else:
        text = f"never screened, eligible since {p.eligible_since.isoformat()}"
        if p.status in ("due", "overdue") and p.due is not None and p.due <= p.today:
            text += "; due now"
        elif p.status == "not_recalled":
            text += "; not recalled"
    return text + (f" ({gap})" if gap else "")


# -------------------------------------------------------------------- helpers


def add_months(start: dt.date, months: int) -> dt.date:
    """``start`` plus whole calendar months; the day is clipped to the month's end (31 Jan + 1 = 28/29 Feb)."""
    y, m = divmod(start.month - 1 + months, 12)
    year, month = start.year + y, m + 1
    return dt.date(year, month, min(start.day, calendar.monthrange(year, month)[1]))


def interval_point(min_months: int, max_months: int, point: str) -> int:
    """The policy's point of a [min, max] month range (midpoint rounded down)."""
    if point == "shortest":
        return min_months
    if point == "longest":
        return max_months
    if point == "midpoint":
        return (min_months + max_months) // 2
    raise ValueError(f"unknown policy point {point!r}")


def _birth_points(birth: PartialDate) -> tuple[dt.date, ...]:
    if birth.precision == DAY:
        return (birth.value,)
    return (birth.earliest(), birth.value, birth.latest())


def possible_ages(birth: PartialDate, on: dt.date) -> tuple[int, ...]:
    """Whole years of age on ``on``: one value for a full birth date, up to two for a year-only one."""
    return tuple(sorted({completed_years(b, on) for b in _birth_points(birth) if b <= on}))


def _range(rule: Rule, policy: Policy) -> tuple[int, int, LocalOverride | None]:
    for o in policy.overrides:
        if o.rule_id == rule.id:
            return o.min_months, o.max_months, o
    assert rule.interval_months is not None
    return rule.interval_months[0], rule.interval_months[1], None


def _months(rule: Rule, policy: Policy) -> int:
    lo, hi, _ = _range(rule, policy)
    return interval_point(lo, hi, policy.point)


@dataclass(frozen=True)
class _Choice:
    rule: Rule
    months: int
    matching: tuple[Rule, ...]
    straddle: bool
    on: dt.date


@dataclass
class _Ctx:
    state: PersonState
    rule_set: RuleSet
    policy: Policy
    today: dt.date
    genotype: str
    rules: tuple[Rule, ...] = ()
    eligible: dt.date | None = None
    fired: list[Fired] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    flags: list[str] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)

    def flag(self, f: str) -> None:
        if f not in self.flags:
            self.flags.append(f)

    def fire(self, kind: str, code: str, text: str, source: Source, applied: bool = True) -> None:
        self.fired.append(Fired(kind, code, text, source.label, source.tag, applied))
        if applied and source.needs_verification:
            self.flag("verify")
            msg = f"{code}: {source.label}."
            if msg not in self.cautions:
                self.cautions.append(msg)

    def matches(self, rule_or_cond, age: int) -> bool:
        c = getattr(rule_or_cond, "conditions", rule_or_cond)
        s = self.state
        return c.matches_state(self.genotype, s.phenotype, s.family_features, s.athlete) and c.matches_age(age)

    def key(self, r: Rule) -> tuple:
        return (_months(r, self.policy), _range(r, self.policy)[1], self.rules.index(r))


def _choose(ctx: _Ctx, on: dt.date) -> _Choice | None:
    """The governing recall rule for the age(s) on ``on`` (shortest interval wins)."""
    per_age: list[Rule | None] = []
    matching: list[Rule] = []
    for age in possible_ages(ctx.state.birth, on):
        m = [r for r in ctx.rules if ctx.matches(r, age)]
        matching.extend(r for r in m if r not in matching)
        per_age.append(min(m, key=ctx.key) if m else None)
    present = [r for r in per_age if r is not None]
    if not present:
        return None
    rule = min(present, key=ctx.key)
    straddle = len({r.id if r else None for r in per_age}) > 1
    return _Choice(rule, _months(rule, ctx.policy), tuple(matching), straddle, on)


def _first_eligible(ctx: _Ctx, from_date: dt.date) -> dt.date | None:
    """Earliest date on or after ``from_date`` inside the age band of a matching rule."""
    points = _birth_points(ctx.state.birth)
    s = ctx.state
    candidates = []
    for r in ctx.rules:
        c = r.conditions
        if not c.matches_state(ctx.genotype, s.phenotype, s.family_features, s.athlete):
            continue
        start = birthday_at_age(points[0], c.min_age)
        end = None if c.max_age is None else birthday_at_age(points[-1], c.max_age)
        d = max(start, from_date)
        if end is None or d < end:
            candidates.append(d)
    return min(candidates) if candidates else None


def _effective_genotype(ctx: _Ctx) -> str:
    s = ctx.state
    if s.genotype in ("carrier", "non_carrier") and "plp_variant" not in s.family_features:
        ctx.notes.append(
            f"genotype '{s.genotype}' without a P/LP variant in the family (e.g. after a downgrade to "
            "VUS/LB/B): scheduled as genotype unknown ('uncertain'); a negative result does not release."
        )
        return "uncertain"
    return s.genotype


def _release(ctx: _Ctx) -> Rule | None:
    s = ctx.state
    for r in ctx.rule_set.select("screening", "release"):
        on = s.last_visit if r.age_at == "last_visit" else ctx.today
        if on is None:
            continue
        ages = possible_ages(s.birth, on)
        if ages and all(ctx.matches(r, a) for a in ages):
            return r
    return None


def _routine(ctx: _Ctx) -> tuple[dt.date, _Choice] | None:
    """Routine due date and the governing rule, before triggers."""
    s = ctx.state
    last = s.last_visit
    if last is None:
        due = _never_screened(ctx)
        if due is None:
            return None
        choice = _choose(ctx, due)
        assert choice is not None
        _band_before_visit(ctx, due, choice)
        return due, choice

    choice = _choose(ctx, last)
    if choice is None:
        due = _first_eligible(ctx, last)
        if due is None:
            return None
        choice = _choose(ctx, due)
        assert choice is not None
        ctx.notes.append(
            f"no screening band at the age at the last visit: due on {due.isoformat()}, when the person "
            f"enters the band of rule {choice.rule.id}"
        )
        return _rule_today(ctx, due, choice)

    tried = [(add_months(last, choice.months), choice)]
    for _ in range(len(ctx.rules) + 1):
        due, cur = tried[-1]
        nxt = _choose(ctx, due)
        if nxt is None:
            ctx.notes.append(
                f"no rule covers the age on the candidate due date {due.isoformat()}: the interval of rule "
                f"{cur.rule.id} is kept; reassess at the visit"
            )
            break
        if nxt.rule.id == cur.rule.id:
            tried[-1] = (due, nxt)
            break
        ctx.flag("band_crossing")
        if any(ch.rule.id == nxt.rule.id for _, ch in tried):
            due, cur = min(tried, key=lambda t: t[0])
            ctx.notes.append(
                f"age-band crossing: the bands disagree; the earliest candidate date {due.isoformat()} "
                f"(rule {cur.rule.id}) is used"
            )
            return _rule_today(ctx, due, cur)
        ctx.notes.append(
            f"age-band crossing: the candidate due date {due.isoformat()} falls in the band of rule "
            f"{nxt.rule.id}; interval recomputed from the last visit with that rule"
        )
        tried.append((add_months(last, nxt.months), nxt))
    return _rule_today(ctx, *tried[-1])


def _ages_text(ctx: _Ctx, on: dt.date) -> str:
    ages = possible_ages(ctx.state.birth, on)
    return " or ".join(str(a) for a in ages) + " y"


def _eligible_from(ctx: _Ctx) -> dt.date | None:
    """The day a never-screened person became (or will become) eligible for a rule of ``ctx.rules``."""
    s = ctx.state
    start = s.birth.earliest()
    if s.eligible_since is not None:
        start = max(start, s.eligible_since)
    elif s.phenotype == "positive":
        # Affected, no visit and no diagnosis date recorded: first evaluation now.
        start = max(start, ctx.today)
    return _first_eligible(ctx, start)


def _never_screened(ctx: _Ctx) -> dt.date | None:
    """Visit date for a never-screened person: today if eligible in the past, else the eligibility date."""
    eligible = _eligible_from(ctx)
    if eligible is None:
        return None
    ctx.eligible = eligible
    ctx.flag("never_seen")
    gap = GAP_REASONS[ctx.state.contact_status]
    if eligible > ctx.today:
        ctx.notes.append(
            f"never screened: eligible from {eligible.isoformat()} (age {_ages_text(ctx, eligible)}), "
            f"when the person enters the band of a screening rule; {gap}"
        )
        return eligible
    then = _choose(ctx, eligible)
    visit = _first_eligible(ctx, ctx.today)
    since = "the date identified as at risk or the start of the first age band" if ctx.state.eligible_since \
        else "the start of the first age band"
    if visit is None:
        ctx.notes.append(
            f"never screened, eligible since {eligible.isoformat()} ({since}); no rule covers the age on "
            f"{ctx.today.isoformat()} ({_ages_text(ctx, ctx.today)}): the clinician decides; {gap}"
        )
        return None
    now = _choose(ctx, visit)
    text = f"never screened, eligible since {eligible.isoformat()} ({since}); " + (
        "due now" if visit == ctx.today else f"due on {visit.isoformat()}, when the person enters a band again"
    ) + f"; {gap}; rule for the age on {visit.isoformat()} ({_ages_text(ctx, visit)}): {now.rule.id}"
    if then is not None and then.rule.id != now.rule.id:
        text += f" (when first eligible, at {_ages_text(ctx, eligible)}, it was {then.rule.id})"
    ctx.notes.append(text)
    return visit


def _band_before_visit(ctx: _Ctx, visit: dt.date, choice: _Choice) -> None:
    """Say which rule applies on the visit date when today's age band has another rule."""
    if visit <= ctx.today:
        return
    now = _choose(ctx, ctx.today)
    if now is None or now.rule.id == choice.rule.id:
        return
    ctx.flag("band_change_before_visit")
    ctx.notes.append(
        f"age band changes before the visit: on {ctx.today.isoformat()} (age {_ages_text(ctx, ctx.today)}) rule "
        f"{now.rule.id} applies; on the visit date {visit.isoformat()} (age {_ages_text(ctx, visit)}) rule "
        f"{choice.rule.id} applies, and the visit follows it"
    )


def _rule_today(ctx: _Ctx, due: dt.date, choice: _Choice) -> tuple[dt.date, _Choice]:
    """For a due date already past, the rule of the age on the as-of date (the visit is wanted now)."""
    if due >= ctx.today:
        _band_before_visit(ctx, due, choice)
        return due, choice
    now = _choose(ctx, ctx.today)
    if now is None:
        ctx.notes.append(
            f"overdue since {due.isoformat()} (rule {choice.rule.id}); no rule covers the age on "
            f"{ctx.today.isoformat()} ({_ages_text(ctx, ctx.today)}): reassess at the visit"
        )
        return due, choice
    if now.rule.id != choice.rule.id:
        ctx.flag("band_changed_since_due")
        ctx.notes.append(
            f"overdue since {due.isoformat()}, a date set by rule {choice.rule.id} (age {_ages_text(ctx, due)} then); "
            f"on {ctx.today.isoformat()} the age is {_ages_text(ctx, ctx.today)}: rule {now.rule.id} applies to the "
            "visit now (its interval and needs are used)"
        )
    return due, now


def _apply_modifiers(ctx: _Ctx, due: dt.date, choice: _Choice) -> tuple[dt.date, int, bool]:
    s, rs, last = ctx.state, ctx.rule_set, ctx.state.last_visit
    months = choice.months
    if last is None:
        if s.progression or s.projected_crossing_age_years is not None:
            ctx.notes.append("trend flags need a previous visit: no modifier applied to a first visit")
        return due, months, False
    firing = []
    if s.progression:
        firing.append(rs.modifiers["progression"])
    if s.projected_crossing_age_years is not None:
        age = age_at(s.birth, due)
        if s.projected_crossing_age_years < age.years + age.uncertainty_years:
            firing.append(rs.modifiers["projected_crossing"])
        else:
            ctx.notes.append(
                f"projected threshold crossing at {s.projected_crossing_age_years:.1f} y is after the routine "
                "due date: no change"
            )
    if s.phenotype == "borderline" and choice.rule.group == "screening":
        firing.append(rs.modifiers["borderline"])
    progression = any(m.code in ("progression", "projected_crossing") for m in firing)
    if not firing:
        return due, months, progression
    capped = min([months] + [m.months for m in firing])
    for m in firing:
        shortened = m.months < months
        text = m.text if shortened else f"{m.text} (the interval was already {months} months or less)"
        ctx.fire("modifier", m.code, text, m.source, applied=shortened)
    if capped < months:
        due = add_months(last, capped)
        months = capped
        again = _choose(ctx, due)
        if again is not None and again.months < months:
            months = again.months
            due = add_months(last, months)
            ctx.notes.append(f"the shortened date falls in the band of rule {again.rule.id}, whose interval is shorter")
    return due, months, progression


def _needs(rule: Rule | None, ctx: _Ctx) -> tuple[tuple[str, ...], tuple[str, ...]]:
    needs: list[str] = list(rule.needs) if rule else []
    consider: list[str] = list(rule.consider) if rule else []
    for code in sorted(ctx.state.triggers):
        for n in ctx.rule_set.triggers[code].needs:
            if n not in needs:
                needs.append(n)
    return tuple(needs), tuple(c for c in consider if c not in needs)


def _advice(ctx: _Ctx) -> None:
    ages = possible_ages(ctx.state.birth, ctx.today)
    for a in ctx.rule_set.advice:
        if any(ctx.matches(a.conditions, age) for age in ages):
            ctx.fire("advice", a.id, a.text, a.source)


def _proposal(ctx: _Ctx, status: str, due, months, routine_due, rule, progression=False) -> Proposal:
    needs, consider = _needs(rule, ctx) if status in ("due", "overdue") else ((), ())
    days = None if due is None else (ctx.today - due).days
    cautions = list(CAUTIONS) + [c for c in ctx.cautions if c not in CAUTIONS]
    never = ctx.state.last_visit is None and status in ("due", "overdue", "not_recalled")
    return Proposal(
        person_code=ctx.state.person_code,
        rule_set_id=ctx.rule_set.id,
        today=ctx.today,
        status=status,
        due=due,
        interval_months=months,
        routine_due=routine_due,
        days_overdue=days,
        rule_id=rule.id if rule else None,
        needs=needs,
        consider=consider,
        fired=tuple(ctx.fired),
        triggers=tuple(sorted(ctx.state.triggers)),
        progression=progression,
        flags=tuple(ctx.flags),
        notes=tuple(ctx.notes),
        cautions=tuple(cautions),
        never_screened=never,
        eligible_since=ctx.eligible if never else None,
        gap_reason=(ctx.state.contact_status
                    if status in ("due", "overdue", "not_recalled")
                    and (never or ctx.state.contact_status != "contactable") else None),
        contact_status=ctx.state.contact_status,
        contact_wish=ctx.state.contact_wish,
        contact_via=ctx.state.contact_via,
        contact_later_on=ctx.state.contact_later_on,
        informed_on=ctx.state.informed_on,
        responded=ctx.state.responded,
    )


# ----------------------------------------------------------------- public API


def matching_rules(person: PersonState, rule_set: RuleSet, on: dt.date, group: str | None = None) -> tuple[Rule, ...]:
    """Recall rules of ``rule_set`` whose conditions hold for ``person`` at any possible age on ``on``.

    ``group`` defaults to ``affected`` for phenotype ``positive`` and
    ``screening`` otherwise.  The genotype is normalised as in
    :func:`propose_recall`.
    """
    ctx = _Ctx(person, rule_set, Policy(), on, person.genotype)
    ctx.genotype = _effective_genotype(ctx)
    grp = group or ("affected" if person.phenotype == "positive" else "screening")
    ctx.rules = rule_set.select(grp, "recall")
    ages = possible_ages(person.birth, on)
    return tuple(r for r in ctx.rules if any(ctx.matches(r, a) for a in ages))


def propose_recall(person: PersonState, rule_set: RuleSet, policy: Policy, today: dt.date) -> Proposal:
    """Propose the next visit for ``person`` under ``rule_set`` (see the module docstring)."""
    ctx = _Ctx(person, rule_set, policy, today, person.genotype)
    ctx.notes.append(f"rule set: {rule_set.title}")
    s = person

    if s.vital_status == "deceased":
        ctx.notes.append("deceased: never scheduled")
        return _proposal(ctx, "not_scheduled", None, None, None, None)
    if s.contact_wish == "no_further_contact":
        ctx.notes.append("asked for no further contact: must not be approached")
    elif s.contact_wish == "only_via_family_member":
        ctx.notes.append(f"contact only through {s.contact_via} (the relative's wish)")
    if s.contact_later_on is not None and s.contact_later_on > today and s.contact_status != "declined":
        ctx.flag("contact_later")
        ctx.notes.append(f"asked to be contacted on {s.contact_later_on.isoformat()}: not approached before then")
    if s.contact_status == "declined":
        ctx.notes.append("declined: not recalled")
        if s.last_visit is None:
            ctx.genotype = _effective_genotype(ctx)
            if s.phenotype == "positive" or ctx.genotype != "not_at_risk":
                ctx.rules = rule_set.select("affected" if s.phenotype == "positive" else "screening", "recall")
                ctx.eligible = _eligible_from(ctx)
                if ctx.eligible is not None:
                    ctx.notes.append(f"never screened, eligible since {ctx.eligible.isoformat()}; declined")
        if s.triggers:
            ctx.notes.append(
                "trigger(s) recorded (" + ", ".join(sorted(s.triggers)) + "): the person declined recall; "
                "the clinician decides whether to make contact"
            )
        return _proposal(ctx, "not_recalled", None, None, None, None)
    if s.vital_status == "unknown":
        ctx.flag("vital_status_unknown")
        ctx.notes.append("vital status unknown: confirm before inviting")
    if s.contact_status == "lost_to_follow_up":
        ctx.flag("lost_to_follow_up")
        ctx.cautions.append(LOST_CAUTION)
    elif s.contact_status == "not_contacted":
        ctx.flag("not_contacted")
        ctx.notes.append("not yet contacted: the relative must be informed before a visit can be booked")
    if person.birth.precision != DAY:
        ctx.notes.append(
            "year-only date of birth: age counted from 1 July with an uncertainty of 0.5 y; where this straddles "
            "a band edge the band with the shorter interval is used"
        )

    ctx.genotype = _effective_genotype(ctx)
    affected = s.phenotype == "positive"
    if affected:
        ctx.flag("affected")
        ctx.notes.append("affected: out of family screening; affected follow-up rules apply")
        ctx.cautions.append(AFFECTED_CAUTION)
    elif s.phenotype == "borderline":
        # Its own state: never scheduled or advised as phenotype-negative (rule sets refuse such rows).
        ctx.notes.append(
            "phenotype borderline or uncertain: the rule set's borderline rows apply, not its phenotype-negative rows"
        )
        ctx.cautions.append(BORDERLINE_CAUTION)
    if not affected and ctx.genotype == "not_at_risk":
        ctx.notes.append("not at risk: outside family screening")
        return _proposal(ctx, "not_scheduled", None, None, None, None)
    ctx.rules = rule_set.select("affected" if affected else "screening", "recall")

    released = None if affected else _release(ctx)
    if released is not None:
        ctx.fire("release", released.id, released.text, released.source)
        ctx.cautions.append(released.caution)
        when = s.variant_classified_on.isoformat() if s.variant_classified_on else "date not recorded"
        ctx.cautions.append(f"Release depends on the family variant's current classification ({when}): re-review it.")

    routine = None if released is not None else _routine(ctx)
    due = months = rule = None
    progression = False
    if routine is not None:
        due, choice = routine
        rule, months = choice.rule, choice.months
        lo, hi, override = _range(rule, policy)
        for r in choice.matching:
            ctx.fire("rule", r.id, r.text, r.source, applied=(r.id == rule.id))
        if override is not None:
            ctx.fired.append(
                Fired("override", rule.id, f"local protocol {lo}-{hi} months: {override.reason}", "local protocol", "local")
            )
        if choice.straddle:
            ctx.flag("age_uncertain")
            ctx.notes.append(
                f"age uncertain on {choice.on.isoformat()} (year-only birth date) straddles a band edge: "
                f"the band with the shorter interval (rule {rule.id}) was used"
            )
        due, months, progression = _apply_modifiers(ctx, due, choice)
        ctx.notes.append(f"interval {months} months ({policy.point} of {lo}-{hi} months unless shortened)")
    elif released is None:
        ctx.flag("no_rule")
        ctx.cautions.append(NO_RULE_CAUTION)
        ctx.notes.append(
            f"no rule covers genotype '{ctx.genotype}', phenotype '{s.phenotype}', family features "
            f"{sorted(s.family_features) or 'none'}: clinician review now"
        )

    _advice(ctx)
    routine_due = due

    if s.triggers:
        ctx.flag("trigger")
        for code in sorted(s.triggers):
            t = rule_set.triggers[code]
            ctx.fire("trigger", code, t.text, t.source)
        if routine_due is not None and routine_due < today:
            ctx.notes.append(f"routine recall was overdue by {(today - routine_due).days} days")
        return _proposal(ctx, "due", today, months, routine_due, rule, progression)

    if released is not None:
        return _proposal(ctx, "released", None, None, None, released)
    if routine is None:
        return _proposal(ctx, "due", today, None, None, None)
    status = "overdue" if due < today else "due"
    return _proposal(ctx, status, due, months, routine_due, rule, progression)


# ------------------------------------------------------- how long a proposal holds


def band_edge_ages(rule_set: RuleSet) -> tuple[int, ...]:
    """Every age (whole years) at which a rule, release or advice item of ``rule_set`` starts or
    stops applying, and 0 (the day of birth)."""
    edges = {0}
    for c in [r.conditions for r in rule_set.rules] + [a.conditions for a in rule_set.advice]:
        edges.add(c.min_age)
        if c.max_age is not None:
            edges.add(c.max_age)
    return tuple(sorted(edges))


def next_band_birthday(birth: PartialDate, edges: tuple[int, ...], after: dt.date) -> dt.date | None:
    """The first day after ``after`` on which a possible age (every birth point of a year-only
    date) reaches one of ``edges``; None if none lies ahead."""
    days = [d for b in _birth_points(birth) for a in edges if (d := birthday_at_age(b, a)) > after]
    return min(days) if days else None


_TODAY_FLAGS = frozenset({"band_change_before_visit", "band_changed_since_due", "no_rule"})


def _holds_for_today_only(p: Proposal) -> bool:
    """A proposal whose content is tied to the day it was computed: due today (a trigger, due now
    for a never-screened person, no rule), a note naming today's age band against another, an
    eligibility date of today, or today's date in any text."""
    today = p.today
    if p.triggers or p.due == today or p.eligible_since == today or _TODAY_FLAGS & set(p.flags):
        return True
    day = today.isoformat()
    texts = list(p.notes) + list(p.cautions) + [f.text for f in p.fired]
    return any(day in t for t in texts)


def valid_until(person: PersonState, rule_set: RuleSet, p: Proposal) -> dt.date:
    """The last day on which ``p`` (proposed on ``p.today`` for ``person``) is still the proposal,
    given the same records, rule set and policy; read it on a later day ``d`` with :func:`redate`.

    Between ``p.today`` and that day only ``today`` and ``days_overdue`` move
    (:func:`redate`); everything else :func:`propose_recall` returns is the same.  It is the
    earliest of:

    * ``p.today`` itself when the proposal is tied to that day (:func:`_holds_for_today_only`):
      a trigger (review now, due today), due today, a never-screened person due now, no rule
      (clinician review now), an age-band note naming today's band, today's date in any text;
    * the due date, when it lies ahead: the day after it the status becomes ``overdue`` and the
      rule is read at that day's age; for a never-screened person the day before the due date
      (on that day the wording becomes "due now");
    * the day before the next birthday at which a possible age (each birth point of a
      year-only date of birth) reaches an age-band edge of the rule set (any rule, release or
      advice item, :func:`band_edge_ages`): the rule for today's age, the release and the advice
      may change then.

    Nothing else in a proposal depends on the day: triggers (symptoms, pregnancy, sport,
    reclassification) come from the latest records, not from time windows, and a projected
    threshold crossing is compared with the age on the (fixed) routine due date.  A new record
    changes the proposal, which is why every write recomputes the family's proposals.
    """
    today = p.today
    if _holds_for_today_only(p):
        return today
    end = dt.date(9999, 12, 31)  # built here, not date.max: the same date class as the caller's dates
    if p.due is not None and p.due >= today:
        end = p.due - dt.timedelta(days=1) if p.never_screened else p.due
    birthday = next_band_birthday(person.birth, band_edge_ages(rule_set), today)
    if birthday is not None:
        end = min(end, birthday - dt.timedelta(days=1))
    return max(end, today)


def redate(p: Proposal, on: dt.date) -> Proposal:
    """``p`` read on ``on`` (between ``p.today`` and its :func:`valid_until`): the same proposal,
    with ``today`` and ``days_overdue`` counted from ``on``."""
    if on == p.today:
        return p
    days = None if p.due is None else (on - p.due).days
    return dataclasses.replace(p, today=on, days_overdue=days)
