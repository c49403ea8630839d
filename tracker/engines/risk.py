"""HCM Risk-SCD: 5-year risk of sudden cardiac death in adults with HCM.

Model: O'Mahony C et al., A novel clinical risk prediction model for sudden
cardiac death in hypertrophic cardiomyopathy (HCM Risk-SCD), Eur Heart J
2014;35:2010-20, doi:10.1093/eurheartj/eht439.

Coefficients and baseline survival [V2]: many independent reproductions
agree; the paper itself was not seen.  (One reproduction prints the age
coefficient as 0.01799918; the effect is < 0.01 percentage point.)

    PI = 0.15939858*MWT - 0.00294271*MWT^2 + 0.0259082*LA + 0.00446131*LVOTmax
       + 0.4583082*FHxSCD + 0.82639195*NSVT + 0.71650361*UnexplainedSyncope
       - 0.01799934*Age
    risk(5 y) = 1 - 0.998^exp(PI)

Inputs: age (years), maximal LV wall thickness MWT (mm, echo), left atrial
anteroposterior diameter LA (mm, echo), LVOTmax = the larger of the peak
instantaneous LVOT gradient at rest and on Valsalva (mmHg; exercise
gradients are not used), and 1/0 for family history of SCD, non-sustained
VT and unexplained syncope.

Validated input ranges used by independent reproductions (presumably the
derivation ranges) [V2; derivation ranges themselves M]: age 16-115 y,
MWT 10-35 mm, LA 28-67 mm, LVOTmax 2-154 mmHg.  Outside them, or when an
exclusion applies (age < 16, prior cardiac arrest or sustained VT,
competitive athlete, metabolic/infiltrative disease or syndrome; ESC 2023
[V], arrest exclusion [V2]), no number is given.

Bands (<4 %, 4 to <6 %, >=6 %) with the wording of ESC 2014 [V2] and
ESC 2023 [V] are kept as two separate rule sets, never blended.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from tracker.domain.dates import age_bounds, parse_partial_date
from tracker.domain.numbers import finite_number

MODEL_NAME = "HCM Risk-SCD (O'Mahony et al., Eur Heart J 2014)"

# --- coefficients, O'Mahony 2014 [V2] ---
COEF_MWT = 0.15939858
COEF_MWT2 = -0.00294271
COEF_LA = 0.0259082
COEF_LVOT = 0.00446131
COEF_FHX_SCD = 0.4583082
COEF_NSVT = 0.82639195
COEF_SYNCOPE = 0.71650361
COEF_AGE = -0.01799934
BASELINE_SURVIVAL_5Y = 0.998

# --- validated ranges, inclusive [V2] ---
RANGES = {
    "age_years": (16.0, 115.0),
    "mwt_mm": (10.0, 35.0),
    "la_diameter_mm": (28.0, 67.0),
    "lvot_max_mmhg": (2.0, 154.0),
}
VALIDATED_RANGES_TEXT = (
    "Validated input ranges (as used by independent reproductions of the model, presumably the "
    "derivation ranges; verify): age 16-115 years, maximal wall thickness 10-35 mm, left atrial "
    "diameter 28-67 mm, maximal LVOT gradient (rest or Valsalva) 2-154 mmHg. Not for age <16 y, "
    "prior cardiac arrest or sustained VT, competitive athletes, metabolic/infiltrative disease "
    "(e.g. Anderson-Fabry) or syndromes (e.g. Noonan); not validated around myectomy."
)
CAUTION = (
    "Decision support only: the treating clinician decides, with the patient; follow local "
    "protocols and the current guideline. This is a 5-year population estimate that omits late "
    "gadolinium enhancement, ejection fraction and apical aneurysm; re-estimate every 1-2 years "
    "or on clinical change."
)

ESC2014 = "ESC 2014"
ESC2023 = "ESC 2023"
LOW = "low"
INTERMEDIATE = "intermediate"
HIGH = "high"

# Band wording, paraphrased. ESC 2014 [V2]; ESC 2023 [V].
_BANDS = {
    ESC2014: {
        LOW: "<4%: ICD generally not indicated.",
        INTERMEDIATE: "4 to <6%: ICD may be considered.",
        HIGH: ">=6%: ICD should be considered.",
    },
    ESC2023: {
        LOW: (
            "<4%: low risk. If extensive LGE (>=15% of LV mass) or LVEF <50%, an ICD may be "
            "considered in shared decision-making (IIb B)."
        ),
        INTERMEDIATE: "4 to <6%: an ICD may be considered (IIb B).",
        HIGH: (
            ">=6%: an ICD should be considered after weighing lifelong complications, competing "
            "risks and the lifestyle and psychological impact (IIa B)."
        ),
    },
}
BAND_LIMITS_PCT = (4.0, 6.0)  # <4 low; 4 to <6 intermediate; >=6 high


@dataclass(frozen=True)
class RiskBand:
    guideline: str
    category: str  # low / intermediate / high
    label: str  # "<4%", "4 to <6%", ">=6%"
    wording: str


@dataclass(frozen=True)
class RiskSCDResult:
    """Outcome of one Risk-SCD estimate; ``risk_5y_pct`` is None when refused."""

    computed: bool
    risk_5y_pct: float | None  # full precision; round only for display
    prognostic_index: float | None
    refusal_reasons: tuple[str, ...]
    esc2014: RiskBand | None
    esc2023: RiskBand | None
    inputs: dict = field(default_factory=dict)
    model: str = MODEL_NAME
    validated_ranges: str = VALIDATED_RANGES_TEXT
    caution: str = CAUTION


# ---------------------------------------------------------------------------
# Equation (no checks; for clinical output use hcm_risk_scd)
# ---------------------------------------------------------------------------

def mwt_term(mwt_mm: float) -> float:
    """Contribution of maximal wall thickness to the PI (peaks near 27.1 mm, falls above)."""
    return COEF_MWT * mwt_mm + COEF_MWT2 * mwt_mm**2


def prognostic_index(
    age_years: float,
    mwt_mm: float,
    la_diameter_mm: float,
    lvot_max_mmhg: float,
    family_history_scd: bool,
    nsvt: bool,
    unexplained_syncope: bool,
) -> float:
    """HCM Risk-SCD prognostic index (O'Mahony 2014 [V2]); no range or exclusion checks."""
    return (
        mwt_term(mwt_mm)
        + COEF_LA * la_diameter_mm
        + COEF_LVOT * lvot_max_mmhg
        + COEF_FHX_SCD * int(bool(family_history_scd))
        + COEF_NSVT * int(bool(nsvt))
        + COEF_SYNCOPE * int(bool(unexplained_syncope))
        + COEF_AGE * age_years
    )


def risk_from_index(pi: float) -> float:
    """5-year SCD risk in % = 100 x (1 - 0.998^exp(PI)) (O'Mahony 2014 [V2])."""
    return 100.0 * (1.0 - BASELINE_SURVIVAL_5Y ** math.exp(pi))


def band(risk_5y_pct: float, guideline: str) -> RiskBand:
    """Band a 5-year risk (%) by one guideline (``"ESC 2014"`` or ``"ESC 2023"``).

    <4 % low, 4 to <6 % intermediate, >=6 % high, compared on the unrounded
    value.  Wording: ESC 2014 [V2], ESC 2023 [V].
    """
    if guideline not in _BANDS:
        raise ValueError(f"unknown guideline {guideline!r}; expected {ESC2014!r} or {ESC2023!r}")
    lo, hi = BAND_LIMITS_PCT
    if risk_5y_pct < lo:
        cat, label = LOW, "<4%"
    elif risk_5y_pct < hi:
        cat, label = INTERMEDIATE, "4 to <6%"
    else:
        cat, label = HIGH, ">=6%"
    return RiskBand(guideline, cat, label, _BANDS[guideline][cat])


# ---------------------------------------------------------------------------
# Inputs helper
# ---------------------------------------------------------------------------

def lvot_max_for_risk_scd(rest_mmhg: float | None, valsalva_mmhg: float | None) -> float | None:
    """LVOTmax for the model = the larger of the rest and Valsalva peak gradients (mmHg).

    Returns the one given when the other is missing, None when both are.
    Exercise gradients must not be passed (the model did not use them).
    A gradient provoked only by standing is not the model's Valsalva input.
    """
    vals = [v for v in (rest_mmhg, valsalva_mmhg) if v is not None and math.isfinite(v)]
    return max(vals) if vals else None


# ---------------------------------------------------------------------------
# Checked estimate
# ---------------------------------------------------------------------------

_number = finite_number


def hcm_risk_scd(
    *,
    age_years: float | None,
    mwt_mm: float | None,
    la_diameter_mm: float | None,
    lvot_max_mmhg: float | None,
    family_history_scd: bool | None,
    nsvt: bool | None,
    unexplained_syncope: bool | None,
    prior_cardiac_arrest_or_sustained_vt: bool | None,
    competitive_athlete: bool | None,
    metabolic_infiltrative_or_syndromic: bool | None,
) -> RiskSCDResult:
    """HCM Risk-SCD 5-year risk with range and exclusion checks.

    Every argument must be given; None means "not known".  The estimate is
    refused (``computed=False``, no number, reasons listed) when any
    predictor is missing or outside :data:`RANGES`, when an exclusion
    applies, or when an exclusion is not recorded (None): the model must not
    be used without knowing that, e.g., no cardiac arrest occurred.

    Units: age in years (may be fractional), MWT and LA diameter in mm from
    echo, LVOTmax in mmHg (rest or Valsalva, see
    :func:`lvot_max_for_risk_scd`).  Family history of SCD, NSVT and
    unexplained syncope as defined by the guideline in use (ESC 2023 family
    history: a first-degree relative dying suddenly aged <40 y, or at any
    age with confirmed HCM [V]).
    """
    inputs = dict(
        age_years=age_years,
        mwt_mm=mwt_mm,
        la_diameter_mm=la_diameter_mm,
        lvot_max_mmhg=lvot_max_mmhg,
        family_history_scd=family_history_scd,
        nsvt=nsvt,
        unexplained_syncope=unexplained_syncope,
        prior_cardiac_arrest_or_sustained_vt=prior_cardiac_arrest_or_sustained_vt,
        competitive_athlete=competitive_athlete,
        metabolic_infiltrative_or_syndromic=metabolic_infiltrative_or_syndromic,
    )
    reasons: list[str] = []

    # Exclusions first (ESC 2023 [V]; prior arrest/sustained VT [V2]).
    exclusions = {
        "prior_cardiac_arrest_or_sustained_vt": (
            "prior cardiac arrest or sustained VT (secondary prevention applies instead)"
        ),
        "competitive_athlete": "competitive athlete (model not validated)",
        "metabolic_infiltrative_or_syndromic": "metabolic or infiltrative disease or syndrome (model not validated)",
    }
    for name, text in exclusions.items():
        v = inputs[name]
        if v is None or v not in (True, False):
            reasons.append(f"exclusion not recorded: {name}")
        elif v:
            reasons.append(f"exclusion applies: {text}")
    age = _number(age_years)
    if age is not None and age < RANGES["age_years"][0]:
        reasons.append("exclusion applies: age under 16 years (use a paediatric model)")

    numbers: dict[str, float] = {}
    for name, (lo, hi) in RANGES.items():
        x = _number(inputs[name])
        if x is None:
            reasons.append(f"missing: {name}")
        elif not (lo <= x <= hi):
            if not (name == "age_years" and x < lo):  # already reported as exclusion
                reasons.append(f"outside validated range: {name} = {x:g} (range {lo:g}-{hi:g})")
        else:
            numbers[name] = x
    for name in ("family_history_scd", "nsvt", "unexplained_syncope"):
        if inputs[name] is None or inputs[name] not in (True, False):
            reasons.append(f"missing: {name}")

    if reasons:
        return RiskSCDResult(False, None, None, tuple(reasons), None, None, inputs)

    pi = prognostic_index(
        numbers["age_years"],
        numbers["mwt_mm"],
        numbers["la_diameter_mm"],
        numbers["lvot_max_mmhg"],
        bool(family_history_scd),
        bool(nsvt),
        bool(unexplained_syncope),
    )
    risk = risk_from_index(pi)
    return RiskSCDResult(True, risk, pi, (), band(risk, ESC2014), band(risk, ESC2023), inputs)


# ---------------------------------------------------------------------------
# One person's estimate from the record: answers, echo, family history, devices
# ---------------------------------------------------------------------------

# Family history of SCD as the model's input: sudden cardiac death in one or more first-degree
# relatives under 40 years of age, or in a first-degree relative with confirmed HCM at any age.
# ESC 2023 [V] (docs/reference/guidelines.md, "Main contradictions" item 5); the ESC 2014 wording is
# the same [M, from memory, verify].  The AHA definition (<=50 y, first-degree or close relative)
# belongs to the AHA factor list, not to this model, and is not blended in.
FHX_SCD_AGE_LIMIT_YEARS = 40
FHX_SCD_DEFINITION = (
    "ESC definition: sudden cardiac death in a first-degree relative under 40 years, or in a first-degree "
    "relative with confirmed HCM at any age"
)

PRIMARY_PREVENTION = (
    "HCM Risk-SCD estimates risk for primary-prevention ICD decisions in people without an ICD."
)
SECONDARY_PREVENTION = (
    "A prior cardiac arrest or sustained VT is recorded: secondary prevention applies and HCM Risk-SCD is not "
    "used (the model excludes these patients)."
)

# The model's yes/no answers as stored with an assessment (repository names), and the one flag.
ANSWER_NAMES = ("family_history_scd", "nsvt", "unexplained_syncope", "prior_arrest_or_sustained_vt",
                "metabolic_or_syndromic", "competitive_athlete")  # fmt: skip


@dataclass(frozen=True)
class SuddenDeath:
    """A first-degree relative whose death the record calls sudden, judged against the definition.

    ``counts``: "yes" (meets the definition), "no" (does not, e.g. 40 y or older without HCM
    recorded as absent) or "uncertain" (age or HCM status unknown, or the age straddles 40 y).
    """

    relative: str
    relation: str
    age_low: int | None
    age_high: int | None
    hcm: str  # "confirmed", "absent" (assessed unaffected), "unknown"
    from_notes: bool
    counts: str

    @property
    def age_text(self) -> str:
        if self.age_low is None:
            return "age at death unknown"
        if self.age_low == self.age_high:
            return f"at {self.age_low} y"
        return f"at {self.age_low}-{self.age_high} y"

    def text(self) -> str:
        how = "notes say sudden death (cause of death not recorded)" if self.from_notes else "sudden death"
        hcm = {"confirmed": "HCM confirmed", "absent": "assessed unaffected", "unknown": "HCM not recorded"}[self.hcm]
        return f"{self.relation} {self.relative}: {how} {self.age_text}, {hcm}"


@dataclass(frozen=True)
class PersonRisk:
    """HCM Risk-SCD of one person as every output shows it (PDF, ``person``, ``recall``).

    ``status``: "computed", "refused" or "not applicable".  ``conflicts``: where the record
    contradicts, or may contradict, a recorded answer; shown beside the figure.
    """

    status: str
    headline: str
    risk_5y_pct: float | None = None
    inputs: dict = field(default_factory=dict)
    inputs_text: tuple[str, ...] = ()
    reasons: tuple[str, ...] = ()
    bands: tuple[str, ...] = ()
    conflicts: tuple[str, ...] = ()
    device: str = ""
    has_icd: bool = False
    secondary_prevention: bool = False
    model: str = MODEL_NAME
    validated_ranges: str = VALIDATED_RANGES_TEXT
    caution: str = CAUTION

    def as_dict(self) -> dict:
        return {
            "status": self.status, "headline": self.headline, "risk_5y_pct": self.risk_5y_pct,
            "inputs": dict(self.inputs), "inputs_text": list(self.inputs_text), "reasons": list(self.reasons),
            "bands": list(self.bands), "conflicts": list(self.conflicts), "device": self.device,
            "has_icd": self.has_icd, "secondary_prevention": self.secondary_prevention, "model": self.model,
            "validated_ranges": self.validated_ranges, "caution": self.caution,
        }  # fmt: skip


def _blank(v) -> bool:
    if v is None:
        return True
    if isinstance(v, float) and math.isnan(v):
        return True
    return isinstance(v, str) and not v.strip()


def latest_answers(assessments, person: str) -> tuple[dict[str, bool | None], list[str]]:
    """The latest recorded answer of each Risk-SCD question (None: never recorded) and where it came from."""
    answers: dict[str, bool | None] = {a: None for a in ANSWER_NAMES}
    dates: dict[str, list[str]] = {}
    if assessments is None or not len(assessments):
        return answers, []
    mine = assessments[assessments["person"] == person].sort_values("assessment_date")
    for name in answers:
        if name not in mine.columns:
            continue
        known = mine[mine[name].notna()]
        if len(known):
            answers[name] = bool(known[name].iloc[-1])
            dates.setdefault(known["assessment_date"].iloc[-1], []).append(name)
    if len(dates) == 1:
        return answers, [f"answers as recorded at the assessment of {next(iter(dates))}"]
    return answers, [f"{', '.join(n.replace('_', ' ') for n in names)} as recorded at the assessment of {d}"
                     for d, names in sorted(dates.items())]  # fmt: skip


def hcm_status(people, assessments) -> dict[str, str]:
    """Person -> "confirmed" (ever assessed affected here, or an age at diagnosis recorded), "absent"
    (assessed, never affected) or "unknown" (no assessment, no diagnosis recorded)."""
    out: dict[str, str] = {}
    if assessments is not None and len(assessments):
        for p, status in zip(assessments["person"].tolist(), assessments["affected_status"].tolist()):
            if status == "affected":
                out[p] = "confirmed"
            elif status == "unaffected":
                out.setdefault(p, "absent")
    if "diagnosis_age" in people.columns:
        for p, age in zip(people["person"].tolist(), people["diagnosis_age"].tolist()):
            if not _blank(age):
                out[p] = "confirmed"
    return out


def _age_at_death(r: dict) -> tuple[int | None, int | None]:
    if not _blank(r.get("death_age")):
        a = int(float(r["death_age"]))
        return a, a
    b, d = r.get("birth_date"), r.get("death_date")
    if _blank(b) or _blank(d):
        return None, None
    return age_bounds(parse_partial_date(b), parse_partial_date(d))


def first_degree_sudden_deaths(person: str, people, hcm: dict[str, str]) -> list[SuddenDeath]:
    """Parents, children, full siblings and a co-twin of ``person`` who died suddenly, by the record.

    A death counts as sudden when ``death_cause`` is "sudden"; with no cause recorded, a note
    containing "sudden" is reported too, labelled as coming from the notes.  Each is judged
    against :data:`FHX_SCD_DEFINITION`.
    """
    rows = {r["person"]: r for r in people.to_dict("records")}
    me = rows.get(person)
    if me is None:
        return []
    relatives: dict[str, str] = {}
    for link in ("mother", "father"):
        if not _blank(me.get(link)):
            relatives[me[link]] = link
    mother, father = me.get("mother"), me.get("father")
    for code, r in rows.items():
        if code == person:
            continue
        if r.get("mother") == person or r.get("father") == person:
            relatives.setdefault(code, "child")
        elif not _blank(mother) and not _blank(father) and r.get("mother") == mother and r.get("father") == father:
            relatives.setdefault(code, "sibling")
        elif r.get("twin_of") == person or me.get("twin_of") == code:
            relatives.setdefault(code, "co-twin")
    out = []
    for code, relation in relatives.items():
        r = rows.get(code)
        if r is None or r.get("vital_status") != "deceased":
            continue
        cause = r.get("death_cause")
        from_notes = False
        if _blank(cause):
            notes = r.get("notes")
            if _blank(notes) or "sudden" not in str(notes).lower():
                continue
            from_notes = True
        elif cause != "sudden":
            continue
        lo, hi = _age_at_death(r)
        status = hcm.get(code, "unknown")
        if status == "confirmed" or (hi is not None and hi < FHX_SCD_AGE_LIMIT_YEARS):
            counts = "yes"
        elif lo is not None and lo >= FHX_SCD_AGE_LIMIT_YEARS and status == "absent":
            counts = "no"
        else:
            counts = "uncertain"
        if from_notes and counts == "yes":
            counts = "uncertain"  # a note is not a recorded cause of death
        out.append(SuddenDeath(code, relation, lo, hi, status, from_notes, counts))
    return sorted(out, key=lambda s: s.relative)


def family_history_conflicts(answer: bool | None, deaths: list[SuddenDeath]) -> tuple[str, ...]:
    """Where the recorded family-history answer and the pedigree disagree, or may disagree.

    A "yes" with no sudden death recorded is not a conflict (relatives may be missing from the
    record); a "no" (or no answer) beside a recorded sudden death that meets, or may meet, the
    definition (:data:`FHX_SCD_DEFINITION`) is.
    """
    out = []
    shown = "not recorded" if answer is None else ("yes" if answer else "no")
    for d in deaths:
        if d.counts == "no" or answer is True:
            continue
        if d.counts == "yes":
            lead = "CONFLICT" if answer is False else "CHECK"
            verdict = (f"{'meets' if answer is False else 'would meet'} the definition (ESC 2023 [V]: a first-degree "
                       f"relative under {FHX_SCD_AGE_LIMIT_YEARS} y, or any age with confirmed HCM)")  # fmt: skip
        else:
            lead = "CHECK"
            verdict = f"counts only if under {FHX_SCD_AGE_LIMIT_YEARS} y or with confirmed HCM (ESC 2023 [V]): verify"
        out.append(f"{lead}: family history of SCD answered {shown}, but the record holds {d.text()}; {verdict}.")
    return tuple(out)


def _model_args(inputs: dict) -> dict:
    """The keyword arguments of :func:`hcm_risk_scd` from a result's ``inputs``."""
    names = ("age_years", "mwt_mm", "la_diameter_mm", "lvot_max_mmhg", "family_history_scd", "nsvt",
             "unexplained_syncope", "prior_cardiac_arrest_or_sustained_vt", "competitive_athlete",
             "metabolic_infiltrative_or_syndromic")  # fmt: skip
    return {n: inputs[n] for n in names}


def _num(v, unit: str) -> str:
    if v is None or not math.isfinite(v):
        return ""
    a = abs(v)
    text = f"{v:.0f}" if a >= 100 else f"{v:.1f}" if a >= 1 else f"{v:.2f}"
    return f"{text} {unit}".rstrip()


def _value(v) -> float | None:
    if _blank(v):
        return None
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _device(row: dict | None, as_of) -> tuple[str, bool]:
    """The devices recorded for the person by ``as_of``: (words, has an ICD)."""
    if row is None:
        return "", False
    words, icd = [], False
    for col, name in (("icd_date", "ICD"), ("pacemaker_date", "pacemaker")):
        v = row.get(col)
        if _blank(v):
            continue
        when = parse_partial_date(v)
        if as_of is not None and when.earliest() > as_of:
            continue
        words.append(f"{name} implanted {when.isoformat()}")
        icd |= col == "icd_date"
    return "; ".join(words), icd


def person_risk_scd(person: str, *, affected_status: str | None, assessed, answers: dict[str, bool | None],
                    answered: list[str], people, hcm: dict[str, str], as_of=None) -> PersonRisk:  # fmt: skip
    """HCM Risk-SCD of one person from the record, with everything shown beside the figure.

    ``assessed``: the person's measurements as :func:`tracker.engines.review.assess_measurements`
    gives them (columns study_date, modality, measure, value, age_years) or None; ``answers`` and
    ``answered`` from :func:`latest_answers`; ``people`` the family's people frame (cause and age of
    death, devices); ``hcm`` from :func:`hcm_status`.  Inputs come from the latest echo.

    With an ICD recorded the figure is still computed when it can be, but no band advice is given:
    the output says the person already has an ICD.  A prior arrest or sustained VT refuses the
    figure (secondary prevention).  Neither ever says an ICD is "not indicated".
    """
    affected_status = None if _blank(affected_status) else affected_status
    row = next(iter(people[people["person"] == person].to_dict("records")), None)
    device, has_icd = _device(row, as_of)
    secondary = answers.get("prior_arrest_or_sustained_vt") is True
    deaths = first_degree_sudden_deaths(person, people, hcm)
    conflicts = family_history_conflicts(answers.get("family_history_scd"), deaths)
    common = dict(conflicts=conflicts, device=device, has_icd=has_icd, secondary_prevention=secondary)
    if affected_status != "affected":
        return PersonRisk("not applicable", "Not estimated: HCM Risk-SCD is for patients with HCM, and this person "
                          f"is not recorded as affected (latest status: {affected_status or 'never assessed'}).",
                          validated_ranges="", caution="", model="", **common)  # fmt: skip
    prefix = []
    if has_icd:
        prefix.append(f"This person already has an ICD ({device}). {PRIMARY_PREVENTION} No ICD recommendation "
                      "is derived from the figure.")  # fmt: skip
    if secondary:
        prefix.append(SECONDARY_PREVENTION)
    echo = None
    if assessed is not None and len(assessed):
        echo = assessed[(assessed["modality"] == "echo") & (assessed["measure"] == "mwt_echo")]
    if echo is None or echo.empty:
        head = " ".join(prefix + ["Not computed: no echo maximal wall thickness recorded. No figure is given."])
        return PersonRisk("refused", head, reasons=("missing: mwt_mm",), **common)
    date = echo["study_date"].max()
    at = assessed[(assessed["study_date"] == date) & (assessed["modality"] == "echo")].set_index("measure")["value"]
    age = float(echo.loc[echo["study_date"] == date, "age_years"].iloc[0])
    rest, valsalva, prov = (_value(at.get(k)) for k in ("lvot_rest", "lvot_valsalva", "lvot_provoked"))
    notes = []
    if valsalva is not None:
        lvot = lvot_max_for_risk_scd(rest, valsalva)
    elif prov is not None:
        # The model's provoked input is the Valsalva gradient; lvot_provoked does not say how it was provoked.
        lvot = None
        notes.append("the provoked LVOT gradient of this echo (lvot_provoked) does not state the manoeuvre; the model "
                     "needs the Valsalva gradient: record it as lvot_valsalva")  # fmt: skip
    else:
        lvot = lvot_max_for_risk_scd(rest, None)
        if rest is not None:
            notes.append("no Valsalva gradient recorded at this echo: the rest gradient is used")
    result = hcm_risk_scd(
        age_years=age, mwt_mm=_value(at.get("mwt_echo")), la_diameter_mm=_value(at.get("la_diam")),
        lvot_max_mmhg=lvot, family_history_scd=answers.get("family_history_scd"), nsvt=answers.get("nsvt"),
        unexplained_syncope=answers.get("unexplained_syncope"),
        prior_cardiac_arrest_or_sustained_vt=answers.get("prior_arrest_or_sustained_vt"),
        competitive_athlete=answers.get("competitive_athlete"),
        metabolic_infiltrative_or_syndromic=answers.get("metabolic_or_syndromic"),
    )  # fmt: skip

    def yn(v: object) -> str:
        return "not recorded" if v is None else ("yes" if v else "no")

    i = result.inputs
    inputs_text = (
        f"echo {date.isoformat()}", f"age {age:.1f} y", f"maximal wall thickness {_num(i['mwt_mm'], 'mm') or 'missing'}",
        f"LA diameter {_num(i['la_diameter_mm'], 'mm') or 'missing'}",
        f"maximal LVOT gradient {_num(i['lvot_max_mmhg'], 'mmHg') or 'missing'}",
        f"family history of SCD {yn(i['family_history_scd'])}", f"NSVT {yn(i['nsvt'])}",
        f"unexplained syncope {yn(i['unexplained_syncope'])}",
        f"prior cardiac arrest or sustained VT {yn(i['prior_cardiac_arrest_or_sustained_vt'])}",
        f"competitive athlete {yn(i['competitive_athlete'])}",
        f"metabolic/infiltrative disease or syndrome {yn(i['metabolic_infiltrative_or_syndromic'])}",
    )  # fmt: skip
    inputs = {**i, "echo_date": date.isoformat()}
    tail = ("; ".join(answered),) if answered else ()
    if result.computed and conflicts and answers.get("family_history_scd") is False:
        other = hcm_risk_scd(**{**_model_args(i), "family_history_scd": True})
        if other.computed:  # what the disputed answer is worth, beside the figure
            common["conflicts"] = conflicts + (
                f"Answered yes, the estimate would be {other.risk_5y_pct:.2f}% ({other.esc2014.label}).",)
    if result.computed:
        head = " ".join(prefix + [f"Estimated 5-year risk of sudden cardiac death: {result.risk_5y_pct:.2f}% "
                                  f"(HCM Risk-SCD, O'Mahony et al. 2014; echo of {date.isoformat()})."])  # fmt: skip
        if has_icd:  # the band only, without the ICD advice written for people without one
            bands = tuple(f"{b.guideline} band: {b.label} ({b.category}); the band's ICD advice is for people "
                          "without an ICD and is not shown" for b in (result.esc2014, result.esc2023) if b)  # fmt: skip
        else:
            bands = tuple(f"{b.guideline} band: {b.wording}" for b in (result.esc2014, result.esc2023) if b)
        return PersonRisk("computed", head, result.risk_5y_pct, inputs, inputs_text, tuple(notes) + tail, bands,
                          **common)  # fmt: skip
    head = " ".join(prefix + ["Not computed: an input is missing, outside the model's validated range, or an "
                              "exclusion applies (reasons below). No figure is given."])  # fmt: skip
    return PersonRisk("refused", head, None, inputs, inputs_text, tuple(notes) + result.refusal_reasons + tail, (),
                      **common)  # fmt: skip
