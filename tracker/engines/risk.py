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

def _number(v) -> float | None:
    if v is None or isinstance(v, bool):
        return None
    try:
        x = float(v)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


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
