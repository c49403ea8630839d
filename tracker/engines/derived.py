"""Derived echo and ECG indices, computed from entered values (never typed in).

Units: wall thicknesses and diameters in mm (converted to cm where the
published equation is in cm), velocities in cm/s, BSA in m2, ECG amplitudes
in mm at the standard calibration of 10 mm/mV, entered as magnitudes
(positive numbers, also for S waves).

Every array function accepts scalars or array-likes and broadcasts
(numpy); missing values are NaN and propagate; an impossible denominator
(zero or negative) gives NaN.  :func:`derive_study` works on one study's
``{measure_code: value}`` and returns only the indices it can compute.

Sources and confidence tags ([V] primary source seen, [V2] secondary copy
only, [M] from memory -- verify):

- LV mass, ASE-corrected cube formula (Devereux), LV mass index, relative
  wall thickness, geometry classes: Lang RM et al., J Am Soc Echocardiogr
  2015;28:1-39 (equations section; limits in its LV mass table, table
  number from memory, verify) [V2].
- Average E/e': Nagueh SF et al., J Am Soc Echocardiogr 2016;29:277-314 [V2].
- Sokolow-Lyon voltage: Sokolow M, Lyon TP, Am Heart J 1949;37:161-86
  (bibliographic details from memory, verify) -- criterion S V1 + R V5 or V6
  (larger) >= 35 mm [V2: secondary copies only; original not seen].
- Cornell voltage: Casale PN et al., J Am Coll Cardiol 1985;6:572-80 and
  Circulation 1987;75:565-72 (bibliographic details from memory, verify) --
  R aVL + S V3 > 28 mm men, > 20 mm women [V2: secondary copies only;
  original not seen].
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
from numpy.typing import ArrayLike, NDArray

# --- measure codes: inputs (existing catalogue + ECG amplitudes added here) ---
IVSD = "ivsd"  # mm
LVIDD = "lvidd"  # mm
LVPWD = "lvpwd"  # mm
MV_E = "mv_e"  # cm/s
E_PRIME_SEPTAL = "e_prime_septal"  # cm/s
E_PRIME_LATERAL = "e_prime_lateral"  # cm/s
S_V1 = "s_v1"  # mm
R_V5 = "r_v5"  # mm
R_V6 = "r_v6"  # mm
R_AVL = "r_avl"  # mm
S_V3 = "s_v3"  # mm

# --- measure codes: derived ---
LV_MASS = "lv_mass"  # g, echo linear method
LVMI_ECHO = "lvmi_echo"  # g/m2
RWT = "rwt"  # ratio
SEPTAL_POSTERIOR_RATIO = "septal_posterior_ratio"  # ratio
E_OVER_E_PRIME = "e_over_e_prime"  # ratio (average e')
SOKOLOW_LYON = "sokolow_lyon"  # mm
CORNELL_VOLTAGE = "cornell_voltage"  # mm

DERIVED_CODES = (
    LV_MASS,
    LVMI_ECHO,
    RWT,
    SEPTAL_POSTERIOR_RATIO,
    E_OVER_E_PRIME,
    SOKOLOW_LYON,
    CORNELL_VOLTAGE,
)
ECG_INPUT_CODES = (S_V1, R_V5, R_V6, R_AVL, S_V3)

# --- thresholds ---
# Lang 2015: RWT > 0.42 = concentric [V2].
RWT_CONCENTRIC_ABOVE = 0.42
# Lang 2015, LV mass table (Table 6: number from memory, verify), LVMI linear method,
# upper normal limit (g/m2) [V2].
LVMI_UPPER_NORMAL = {"male": 115.0, "female": 95.0}
# Sokolow & Lyon 1949: >= 35 mm [V2; original not seen, from memory, verify].
SOKOLOW_LYON_AT_LEAST_MM = 35.0
# Casale 1985/1987: > 28 mm men, > 20 mm women [V2; original not seen, from memory, verify].
CORNELL_ABOVE_MM = {"male": 28.0, "female": 20.0}

NORMAL = "normal"
CONCENTRIC_REMODELLING = "concentric remodelling"
CONCENTRIC_HYPERTROPHY = "concentric hypertrophy"
ECCENTRIC_HYPERTROPHY = "eccentric hypertrophy"
GEOMETRY_CLASSES = (NORMAL, CONCENTRIC_REMODELLING, CONCENTRIC_HYPERTROPHY, ECCENTRIC_HYPERTROPHY)

SEXES = ("male", "female")


def _f(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def _out(a: NDArray):
    """0-d arrays come back as numpy scalars, others as arrays."""
    return a[()] if a.ndim == 0 else a


def _safe_div(num: NDArray[np.float64], den: NDArray[np.float64]) -> NDArray[np.float64]:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


# ---------------------------------------------------------------------------
# Echo
# ---------------------------------------------------------------------------

def lv_mass_g(ivsd_mm: ArrayLike, lvidd_mm: ArrayLike, lvpwd_mm: ArrayLike):
    """LV mass (g), ASE-corrected cube formula (Devereux), linear method.

    LVM = 0.8 x 1.04 x [(IVSd + LVIDd + LVPWd)^3 - LVIDd^3] + 0.6, with the
    dimensions in cm (inputs here in mm are divided by 10).
    Lang 2015, equations section [V2].  Non-positive dimensions give NaN.
    """
    ivs, lvid, pw = (_f(v) / 10.0 for v in (ivsd_mm, lvidd_mm, lvpwd_mm))
    ok = (ivs > 0) & (lvid > 0) & (pw > 0)
    mass = 0.8 * 1.04 * ((ivs + lvid + pw) ** 3 - lvid**3) + 0.6
    return _out(np.where(ok, mass, np.nan))


def lv_mass_index_g_m2(lv_mass: ArrayLike, bsa_m2: ArrayLike):
    """LV mass index (g/m2) = LV mass / BSA (Lang 2015 [V2]).

    The caller records which BSA formula gave ``bsa_m2``.
    """
    return _out(_safe_div(_f(lv_mass), _f(bsa_m2)))


def relative_wall_thickness(lvpwd_mm: ArrayLike, lvidd_mm: ArrayLike):
    """Relative wall thickness = 2 x LVPWd / LVIDd (unitless; Lang 2015 [V2])."""
    return _out(_safe_div(2.0 * _f(lvpwd_mm), _f(lvidd_mm)))


def septal_posterior_ratio(ivsd_mm: ArrayLike, lvpwd_mm: ArrayLike):
    """Septal-to-posterior wall ratio IVSd / LVPWd (unitless).

    Plain ratio of the two end-diastolic thicknesses (LOINC 18155-2, IVS/PW
    ratio).  Interpretation thresholds are not applied here.
    """
    return _out(_safe_div(_f(ivsd_mm), _f(lvpwd_mm)))


def average_e_over_e_prime(e_cm_s: ArrayLike, e_prime_septal_cm_s: ArrayLike, e_prime_lateral_cm_s: ArrayLike):
    """Average E/e' = E / mean(septal e', lateral e') (unitless; Nagueh 2016 [V2]).

    Both e' velocities are required; a missing one gives NaN.
    """
    mean_e_prime = (_f(e_prime_septal_cm_s) + _f(e_prime_lateral_cm_s)) / 2.0
    e = _f(e_cm_s)
    return _out(np.where(e >= 0, _safe_div(e, mean_e_prime), np.nan))


def geometry_class(lvmi_g_m2: ArrayLike, rwt: ArrayLike, sex: ArrayLike):
    """LV geometry class from LVMI (linear method) and RWT, Lang 2015 [V2].

    - LVMI normal and RWT <= 0.42: ``"normal"``
    - LVMI normal and RWT > 0.42: ``"concentric remodelling"``
    - LVMI high and RWT > 0.42: ``"concentric hypertrophy"``
    - LVMI high and RWT <= 0.42: ``"eccentric hypertrophy"``

    LVMI is high above 115 g/m2 in men and 95 g/m2 in women (Lang 2015
    LV mass table, linear method [V2]).  ``sex`` is ``"male"`` or ``"female"``
    (sex at birth); any other value, or a missing LVMI/RWT, gives None.
    Returns a string (scalar inputs) or an object array of strings/None.
    """
    lvmi_a, rwt_a = np.broadcast_arrays(_f(lvmi_g_m2), _f(rwt))
    sex_a = np.broadcast_to(np.asarray(sex, dtype=object), lvmi_a.shape)
    out = np.empty(lvmi_a.shape, dtype=object)
    for idx in np.ndindex(lvmi_a.shape):
        m, r, s = lvmi_a[idx], rwt_a[idx], sex_a[idx]
        if s not in LVMI_UPPER_NORMAL or not (math.isfinite(m) and math.isfinite(r)):
            out[idx] = None
            continue
        high = m > LVMI_UPPER_NORMAL[s]
        concentric = r > RWT_CONCENTRIC_ABOVE
        if high:
            out[idx] = CONCENTRIC_HYPERTROPHY if concentric else ECCENTRIC_HYPERTROPHY
        else:
            out[idx] = CONCENTRIC_REMODELLING if concentric else NORMAL
    return out[()] if out.ndim == 0 else out


# ---------------------------------------------------------------------------
# ECG voltage (amplitudes in mm at 10 mm/mV, magnitudes)
# ---------------------------------------------------------------------------

def sokolow_lyon_mm(s_v1_mm: ArrayLike, r_v5_mm: ArrayLike, r_v6_mm: ArrayLike):
    """Sokolow-Lyon voltage (mm) = S V1 + the larger of R V5 and R V6.

    Sokolow & Lyon, Am Heart J 1949 [V2 secondary copies; original not
    seen, from memory, verify].  Both R V5 and R V6 are required (NaN
    propagates), so the "larger of" is never taken over one lead only.
    """
    s1, r5, r6 = _f(s_v1_mm), _f(r_v5_mm), _f(r_v6_mm)
    total = s1 + np.maximum(r5, r6)
    return _out(np.where((s1 >= 0) & (r5 >= 0) & (r6 >= 0), total, np.nan))


def cornell_voltage_mm(r_avl_mm: ArrayLike, s_v3_mm: ArrayLike):
    """Cornell voltage (mm) = R aVL + S V3.

    Casale et al. 1985/1987 [V2 secondary copies; original not seen, from
    memory, verify].
    """
    ra, s3 = _f(r_avl_mm), _f(s_v3_mm)
    return _out(np.where((ra >= 0) & (s3 >= 0), ra + s3, np.nan))


def sokolow_lyon_criterion(sokolow_lyon: float | None) -> bool | None:
    """True when the Sokolow-Lyon voltage is >= 35 mm; None when the value is missing.

    Threshold: Sokolow & Lyon 1949 [V2; original not seen, from memory, verify].
    A voltage flag for review, not a diagnosis of LV hypertrophy.
    """
    if sokolow_lyon is None or not math.isfinite(sokolow_lyon):
        return None
    return bool(sokolow_lyon >= SOKOLOW_LYON_AT_LEAST_MM)


def cornell_criterion(cornell_voltage: float, sex: str) -> bool | None:
    """True when Cornell voltage > 28 mm (men) or > 20 mm (women).

    Casale et al. 1985/1987 [V2; original not seen, from memory, verify].
    Returns None when sex is not ``"male"``/``"female"`` or the value is
    missing.  A voltage flag for review, not a diagnosis.
    """
    if sex not in CORNELL_ABOVE_MM or cornell_voltage is None or not math.isfinite(cornell_voltage):
        return None
    return bool(cornell_voltage > CORNELL_ABOVE_MM[sex])


# ---------------------------------------------------------------------------
# One study
# ---------------------------------------------------------------------------

def _get(values: Mapping[str, float | None], code: str) -> float | None:
    v = values.get(code)
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def derive_study(values: Mapping[str, float | None], *, bsa_m2: float | None = None) -> dict[str, float]:
    """Derived indices of one study from ``{measure_code: value}`` (catalogue units).

    Returns ``{derived_code: value}`` for the indices whose inputs are all
    present (a missing input means that index is not computed; nothing is
    guessed):

    - ``lv_mass`` (g): needs ivsd, lvidd, lvpwd (mm)
    - ``lvmi_echo`` (g/m2): needs lv_mass and ``bsa_m2``
    - ``rwt``: needs lvpwd, lvidd
    - ``septal_posterior_ratio``: needs ivsd, lvpwd
    - ``e_over_e_prime`` (average): needs mv_e, e_prime_septal, e_prime_lateral (cm/s)
    - ``sokolow_lyon`` (mm): needs s_v1, r_v5, r_v6
    - ``cornell_voltage`` (mm): needs r_avl, s_v3

    ``bsa_m2`` comes from the study's height and weight; the caller stores
    the BSA formula used beside the index.  Values are full precision;
    round only for display.
    """
    inputs = (IVSD, LVIDD, LVPWD, MV_E, E_PRIME_SEPTAL, E_PRIME_LATERAL, *ECG_INPUT_CODES)
    g = {code: _get(values, code) for code in inputs}
    out: dict[str, float] = {}

    def put(code: str, value) -> None:
        v = float(value)
        if math.isfinite(v):
            out[code] = v

    if None not in (g[IVSD], g[LVIDD], g[LVPWD]):
        put(LV_MASS, lv_mass_g(g[IVSD], g[LVIDD], g[LVPWD]))
        if LV_MASS in out and bsa_m2 is not None:
            put(LVMI_ECHO, lv_mass_index_g_m2(out[LV_MASS], bsa_m2))
    if None not in (g[LVPWD], g[LVIDD]):
        put(RWT, relative_wall_thickness(g[LVPWD], g[LVIDD]))
    if None not in (g[IVSD], g[LVPWD]):
        put(SEPTAL_POSTERIOR_RATIO, septal_posterior_ratio(g[IVSD], g[LVPWD]))
    if None not in (g[MV_E], g[E_PRIME_SEPTAL], g[E_PRIME_LATERAL]):
        put(E_OVER_E_PRIME, average_e_over_e_prime(g[MV_E], g[E_PRIME_SEPTAL], g[E_PRIME_LATERAL]))
    if None not in (g[S_V1], g[R_V5], g[R_V6]):
        put(SOKOLOW_LYON, sokolow_lyon_mm(g[S_V1], g[R_V5], g[R_V6]))
    if None not in (g[R_AVL], g[S_V3]):
        put(CORNELL_VOLTAGE, cornell_voltage_mm(g[R_AVL], g[S_V3]))
    return out
