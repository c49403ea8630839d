"""Paediatric echo z-scores for IVSd, LVPWd and LVIDd (data files
``data/paediatric_sets.csv`` and ``data/paediatric_coefficients.csv``).

Sets (BSA in m2 by Haycock for both [V2]; measurements converted from the
catalogue unit mm to cm, the unit of the published models):

- ``phn2017`` (default): Pediatric Heart Network (Lopez et al., Circ Cardiovasc
  Imaging 2017;10:e006979), Z = (X_cm / BSA^alpha - mean) / SD [V].  Valid
  0-18 y; BSA 0.1-2.2 m2 is an engineering default (derivation BSA range not
  retrieved).
- ``detroit2008``: Detroit data (Pettersen et al., J Am Soc Echocardiogr 2008;
  21:922-34), ln(mean_cm) = b0 + b1*BSA + b2*BSA^2 + b3*BSA^3,
  Z = (ln X_cm - ln mean_cm) / sqrt(MSE) [V2].  Valid 0-18 y, BSA 0.15-2.0 m2.

Outside a set's age or BSA range the result is "outside the reference range"
with no number: nothing is extrapolated.  |z| <= 2 is "within normal limits"
(common practice); the limits reported are the values at z = -2 and +2 (mm).
Never trend z-scores across sets: store the set id with every z.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from tracker.normals.classes import ABOVE, BELOW, NO_REFERENCE, OUTSIDE, WITHIN
from tracker.normals.tables import MM_PER_CM, read_rows, source_text

PHN_2017 = "phn2017"
DETROIT_2008 = "detroit2008"
DEFAULT_SET = PHN_2017

# Common practice: |z| <= 2 is within normal limits.
Z_NORMAL_LIMIT = 2.0

# Measure code -> coefficient row.  Engineering choice: maximal wall thickness
# (any segment) uses the IVSd model, because no set publishes a model for the
# maximal segment and the septum is where HCM thickening is usually maximal.
MODEL_MEASURE = {"ivsd": "ivsd", "lvpwd": "lvpwd", "lvidd": "lvidd", "mwt_echo": "ivsd"}
MWT_NOTE = "maximal wall thickness scored with the IVSd model (engineering choice)"


@dataclass(frozen=True)
class Coefficients:
    """Model coefficients for one measure (X in cm)."""

    measure: str
    alpha: float | None = None  # PHN
    mean: float | None = None
    sd: float | None = None
    b: tuple[float, float, float, float] | None = None  # Detroit
    mse: float | None = None
    source: str = ""


@dataclass(frozen=True)
class PaediatricSet:
    """A paediatric reference set with its validity ranges (years, m2)."""

    set_id: str
    name: str
    model: str  # "allometric" (PHN) or "log_cubic" (Detroit)
    age_min: float
    age_max: float
    bsa_min: float
    bsa_max: float
    bsa_formula: str
    source: str
    range_basis: str
    coefficients: dict[str, Coefficients]


def _f(x: str) -> float | None:
    return float(x) if x.strip() else None


def _load() -> dict[str, PaediatricSet]:
    coef: dict[str, dict[str, Coefficients]] = {}
    for r in read_rows("paediatric_coefficients.csv"):
        if r["unit"] != "cm":
            raise ValueError("paediatric models are published for values in cm")
        b = tuple(_f(r[k]) for k in ("b0", "b1", "b2", "b3"))
        coef.setdefault(r["set_id"], {})[r["measure"]] = Coefficients(
            measure=r["measure"],
            alpha=_f(r["alpha"]),
            mean=_f(r["mean"]),
            sd=_f(r["sd"]),
            b=None if b[0] is None else b,
            mse=_f(r["mse"]),
            source=source_text(r["source"], r["year"], r["table"], r["tag"]),
        )
    sets = {}
    for r in read_rows("paediatric_sets.csv"):
        sets[r["set_id"]] = PaediatricSet(
            set_id=r["set_id"],
            name=r["name"],
            model=r["model"],
            age_min=float(r["age_min"]),
            age_max=float(r["age_max"]),
            bsa_min=float(r["bsa_min"]),
            bsa_max=float(r["bsa_max"]),
            bsa_formula=r["bsa_formula"],
            source=source_text(r["source"], r["year"], r["table"], r["tag"]),
            range_basis=r["range_basis"],
            coefficients=coef.get(r["set_id"], {}),
        )
    return sets


PAEDIATRIC_SETS: dict[str, PaediatricSet] = _load()


def reference_set(set_id: str = DEFAULT_SET) -> PaediatricSet:
    """The named paediatric set (ValueError if unknown)."""
    try:
        return PAEDIATRIC_SETS[set_id]
    except KeyError:
        raise ValueError(f"unknown paediatric set {set_id!r}; choose from {sorted(PAEDIATRIC_SETS)}") from None


def _coefficients(s: PaediatricSet, measure: str) -> Coefficients:
    try:
        return s.coefficients[MODEL_MEASURE[measure]]
    except KeyError:
        raise ValueError(f"{s.set_id} has no model for {measure!r}; models: {sorted(MODEL_MEASURE)}") from None


def source_for(measure: str, set_id: str = DEFAULT_SET) -> str:
    """Source string of the set's model for ``measure``, with the BSA formula and the normal band."""
    s = reference_set(set_id)
    return (
        f"{_coefficients(s, measure).source}; BSA by {s.bsa_formula.capitalize()}; "
        f"|z| <= {Z_NORMAL_LIMIT:g} within normal limits (common practice)"
    )


def _value_cm_at_z(s: PaediatricSet, c: Coefficients, bsa: np.ndarray, z: float | np.ndarray) -> np.ndarray:
    if s.model == "allometric":
        return (c.mean + z * c.sd) * bsa**c.alpha
    b0, b1, b2, b3 = c.b
    return np.exp(b0 + b1 * bsa + b2 * bsa**2 + b3 * bsa**3 + z * np.sqrt(c.mse))


def z_scores(
    measure: str, value_mm: ArrayLike, bsa_m2: ArrayLike, age_years: ArrayLike, set_id: str = DEFAULT_SET
) -> dict[str, np.ndarray]:
    """Vectorised z-scores (broadcast inputs; NaN = unknown).

    Returns arrays: ``z``, ``predicted_mm`` (z = 0), ``lower_mm`` / ``upper_mm``
    (z = -2 / +2), all NaN where no number is given, and ``assessment``
    (object: class strings) and ``reason`` (object: why no number, or "").
    """
    s = reference_set(set_id)
    c = _coefficients(s, measure)
    v, bsa, age = np.broadcast_arrays(
        np.asarray(value_mm, dtype=float), np.asarray(bsa_m2, dtype=float), np.asarray(age_years, dtype=float)
    )
    shape = v.shape
    reason = np.full(shape, "", dtype=object)
    assessment = np.full(shape, NO_REFERENCE, dtype=object)
    reason[np.isnan(bsa)] = "BSA unknown"
    reason[np.isnan(age)] = "age unknown"
    reason[np.isnan(v) | (v <= 0)] = "no positive value"
    known = reason == ""
    age_out = known & ((age < s.age_min) | (age > s.age_max))
    bsa_out = known & ((bsa < s.bsa_min) | (bsa > s.bsa_max))
    reason[bsa_out] = f"BSA outside the {s.set_id} range {s.bsa_min:g}-{s.bsa_max:g} m2"
    reason[age_out] = f"age outside the {s.set_id} range {s.age_min:g}-{s.age_max:g} y"
    assessment[age_out | bsa_out] = OUTSIDE
    ok = known & ~age_out & ~bsa_out

    z = np.full(shape, np.nan)
    pred, lo, hi = np.full(shape, np.nan), np.full(shape, np.nan), np.full(shape, np.nan)
    b, x_cm = bsa[ok], v[ok] / MM_PER_CM
    if s.model == "allometric":
        z[ok] = (x_cm / b**c.alpha - c.mean) / c.sd
    else:
        b0, b1, b2, b3 = c.b
        z[ok] = (np.log(x_cm) - (b0 + b1 * b + b2 * b**2 + b3 * b**3)) / np.sqrt(c.mse)
    pred[ok] = _value_cm_at_z(s, c, b, 0.0) * MM_PER_CM
    lo[ok] = _value_cm_at_z(s, c, b, -Z_NORMAL_LIMIT) * MM_PER_CM
    hi[ok] = _value_cm_at_z(s, c, b, Z_NORMAL_LIMIT) * MM_PER_CM
    zo = z[ok]
    assessment[ok] = np.where(zo > Z_NORMAL_LIMIT, ABOVE, np.where(zo < -Z_NORMAL_LIMIT, BELOW, WITHIN))
    return {"z": z, "predicted_mm": pred, "lower_mm": lo, "upper_mm": hi, "assessment": assessment, "reason": reason}


@dataclass(frozen=True)
class PaediatricZ:
    """One paediatric z-score result (mm, m2, years)."""

    measure: str
    set_id: str
    z: float | None
    predicted_mm: float | None
    lower_mm: float | None
    upper_mm: float | None
    assessment: str
    reason: str
    source: str


def paediatric_z(
    measure: str, value_mm: float, bsa_m2: float | None, age_years: float | None, set_id: str = DEFAULT_SET
) -> PaediatricZ:
    """z-score of one value; outside the set's age or BSA range: no number."""
    nan = float("nan")
    r = z_scores(measure, value_mm, nan if bsa_m2 is None else bsa_m2, nan if age_years is None else age_years, set_id)

    def num(key: str) -> float | None:
        x = float(r[key])
        return None if np.isnan(x) else x

    return PaediatricZ(
        measure=measure,
        set_id=set_id,
        z=num("z"),
        predicted_mm=num("predicted_mm"),
        lower_mm=num("lower_mm"),
        upper_mm=num("upper_mm"),
        assessment=str(r["assessment"]),
        reason=str(r["reason"]),
        source=source_for(measure, set_id),
    )


def smallest_z_bsa(measure: str, set_id: str = DEFAULT_SET) -> float:
    """The body surface area (m2) inside the set's BSA range at which a given value has its
    smallest z-score.

    The z-score of a fixed value depends on body size only through the predicted mean, so the
    smallest z over the range is where the prediction is largest: for the allometric model
    (PHN) X / BSA^alpha is monotone in BSA, so an end of the range; for the log-cubic model
    (Detroit) the largest of b0 + b1 BSA + b2 BSA^2 + b3 BSA^3 at the ends of the range or at a
    stationary point inside it (exact, no grid).
    """
    s = reference_set(set_id)
    c = _coefficients(s, measure)
    candidates = [s.bsa_min, s.bsa_max]
    if s.model != "allometric":
        _, b1, b2, b3 = c.b
        roots = np.roots([3 * b3, 2 * b2, b1]) if (b3 or b2) else np.array([])
        candidates += [float(r.real) for r in roots if abs(r.imag) < 1e-12 and s.bsa_min < r.real < s.bsa_max]
    predicted = _value_cm_at_z(s, c, np.asarray(candidates, dtype=float), 0.0)
    return float(candidates[int(np.argmax(predicted))])


def smallest_z(
    measure: str, value_mm: ArrayLike, age_years: ArrayLike, set_id: str = DEFAULT_SET
) -> dict[str, np.ndarray]:
    """The smallest z-score a value can have at any body size the set covers, for people whose
    body size is unknown or outside the set's BSA range (vectorised; NaN = unknown).

    Returns ``z_min`` (NaN where the age is outside the set's age range or the value is
    missing) and ``bsa_m2`` (the BSA at which it is reached, the same for every value).  A value
    whose smallest z is above a z threshold is above it at every body size the set covers; a
    value whose smallest z is not tells nothing (its true z may be higher).
    """
    s = reference_set(set_id)
    v, age = np.broadcast_arrays(np.asarray(value_mm, dtype=float), np.asarray(age_years, dtype=float))
    at = smallest_z_bsa(measure, set_id)
    ok = np.isfinite(v) & (v > 0) & np.isfinite(age) & (age >= s.age_min) & (age <= s.age_max)
    z = z_scores(measure, np.where(ok, v, np.nan), at, np.where(ok, age, np.nan), set_id)["z"]
    return {"z_min": np.where(ok, z, np.nan), "bsa_m2": np.full(v.shape, at)}
