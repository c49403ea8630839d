"""Segmental deformation indices from per-segment longitudinal strain and time to peak.

Inputs are ``{segment_number: value}`` mappings of one model (see
:mod:`tracker.engines.segments`): peak longitudinal strain and peak systolic
strain in % (negative = shortening), time to peak in ms from QRS onset.
A value is valid when it is a finite number (time to peak also >= 0);
invalid or absent segments are left out and counted.

Terms (Voigt JU et al., EHJ-CVI 2015;16:1-11, task-force definitions [M]):
peak strain = most negative strain over the whole cycle; peak systolic strain
= most negative strain before aortic valve closure (AVC); time to peak (TTP)
= QRS onset to peak negative strain, post-systolic peaks included
(Haland 2016; Haugaa 2010 [V]).

Every flag here is decision support only: the treating clinician decides,
following local protocols and the current guideline.  Segmental values
depend on vendor and software; compare like with like.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from tracker.engines import segments as seg

# --- derived measure codes ---
GLS_SEGAVG = "gls_segavg"  # %, mean of valid segmental peak LS
GLS_SEGAVG_N = "gls_segavg_n"  # count of segments in that mean
RELAPS = "relaps"  # ratio
MECH_DISPERSION = "mech_dispersion"  # ms, sample SD of TTP over the 16 LV segments
MECH_DISPERSION_N = "mech_dispersion_n"  # count of segments in that SD
PSI_GLOBAL = "psi_global"  # %
DERIVED_CODES = (GLS_SEGAVG, GLS_SEGAVG_N, RELAPS, MECH_DISPERSION, MECH_DISPERSION_N, PSI_GLOBAL)

CAUTION = (
    "Decision support only: the treating clinician decides; follow local protocols and the "
    "current guideline. Segmental strain is vendor- and software-dependent."
)

# Minimum number of valid segments for a global mean or a dispersion.
# Engineering default (no published minimum found); verify.
DEFAULT_MIN_SEGMENTS = 12

# Relative apical sparing: Phelan D et al., Heart 2012;98:1442-8 -- cut-off >= 1.0 [V].
RELAPS_PATTERN_AT_LEAST = 1.0
RELAPS_CAUTION = (
    "Relative apical sparing ratio >= 1.0 is a pattern flag (Phelan 2012: amyloidosis vs "
    "HCM/aortic-stenosis LVH, sensitivity 93%, specificity 82%). Later multicentre data show "
    "overlap with other causes of hypertrophy (Cotella 2024): a flag for review, not a diagnosis."
)

# Near-zero segment among normally deforming neighbours: thresholds are an
# engineering choice, common practice, verify (no published definition found).
NEAR_ZERO_ABS_PCT = 5.0  # |strain| < 5 % = near zero
NORMAL_NEIGHBOUR_BELOW_PCT = -15.0  # neighbour strain < -15 % = normally deforming
MIN_VALID_NEIGHBOURS = 2

# Mechanical dispersion reference: Haland TF et al., EHJ-CVI 2016;17:613-21 [V].
MD_REFERENCE = (
    "Haland 2016: healthy 36 +/- 13 ms, HCM 64 +/- 22 ms; no universal cut-off. "
    "Stored as a continuous value with its segment count."
)
# Global post-systolic index reference: Brainin P et al., Int J Cardiovasc Imaging 2019 [V].
PSI_REFERENCE = "Brainin 2019 (620 healthy adults): global PSI median 2.0% (IQR 0.7-4.8)."


def _valid(values: Mapping[int, float], numbers: tuple[int, ...], *, nonneg: bool = False) -> dict[int, float]:
    out = {}
    for n in numbers:
        v = values.get(n)
        if v is None:
            continue
        v = float(v)
        if math.isfinite(v) and (not nonneg or v >= 0):
            out[n] = v
    return out


# ---------------------------------------------------------------------------
# From sampled curves
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class CurvePeaks:
    """Peaks of strain curves; arrays have the curves' leading shape."""

    peak_pct: np.ndarray  # most negative strain over the whole cycle
    peak_systolic_pct: np.ndarray  # most negative strain at t <= AVC
    time_to_peak_ms: np.ndarray  # time of peak_pct from QRS onset


def curve_peaks(t_ms: ArrayLike, strain_pct: ArrayLike, avc_ms: float) -> CurvePeaks:
    """Peak strain, peak systolic strain and time to peak from sampled curves.

    ``t_ms``: 1-D sample times from QRS onset (ms); ``strain_pct``: array of
    shape (..., len(t_ms)), one curve per row (e.g. one per segment);
    ``avc_ms``: aortic valve closure time from QRS onset.  Definitions as in
    the module docstring (Voigt 2015 [M]; TTP per Haland 2016 [V]).
    NaN samples are ignored; an all-NaN curve gives NaN.
    """
    t = np.asarray(t_ms, dtype=float)
    e = np.asarray(strain_pct, dtype=float)
    if t.ndim != 1 or e.shape[-1] != t.shape[0]:
        raise ValueError("strain_pct must have the sample axis last, matching t_ms")
    filled = np.where(np.isnan(e), np.inf, e)
    idx = np.argmin(filled, axis=-1)
    peak = np.take_along_axis(filled, idx[..., None], axis=-1)[..., 0]
    all_nan = np.isinf(peak)
    systolic = np.where(t <= avc_ms, filled, np.inf)
    peak_sys = systolic.min(axis=-1)
    return CurvePeaks(
        peak_pct=np.where(all_nan, np.nan, peak),
        peak_systolic_pct=np.where(np.isinf(peak_sys), np.nan, peak_sys),
        time_to_peak_ms=np.where(all_nan, np.nan, t[idx]),
    )


# ---------------------------------------------------------------------------
# Global average longitudinal strain
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class SegmentMean:
    value_pct: float | None  # None when too few valid segments
    n_valid: int
    n_segments: int
    segments_used: tuple[int, ...]
    reason: str | None = None


def global_average_strain(
    values: Mapping[int, float], model_id: str = seg.AHA17, *, min_segments: int = DEFAULT_MIN_SEGMENTS
) -> SegmentMean:
    """Global average longitudinal strain (%) = mean of the valid segmental peak values.

    Averages all segments of the model (the AHA 17 model includes the apex).
    Definition: segment-average global strain (Voigt 2015 task force [M]);
    vendors usually compute GLS from the whole-wall trace, so this may differ
    from the vendor's own GLS value.  Returns the count of segments used.
    """
    numbers = seg.segment_numbers(model_id)
    ok = _valid(values, numbers)
    n = len(ok)
    if n < max(1, min_segments):
        return SegmentMean(None, n, len(numbers), tuple(ok), f"only {n} valid segments (minimum {min_segments})")
    return SegmentMean(statistics.fmean(ok.values()), n, len(numbers), tuple(ok))


# ---------------------------------------------------------------------------
# Relative apical sparing
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class ApicalSparing:
    ratio: float | None
    pattern: bool | None  # ratio >= 1.0; None when not computed
    apical_mean_pct: float | None
    mid_mean_pct: float | None
    basal_mean_pct: float | None
    n_apical: int
    n_mid: int
    n_basal: int
    reason: str | None = None
    caution: str = RELAPS_CAUTION


def relative_apical_sparing(
    values: Mapping[int, float], model_id: str = seg.AHA17, *, min_fraction_per_level: float = 0.5
) -> ApicalSparing:
    """Relative apical sparing ratio (Phelan D et al., Heart 2012;98:1442-8 [V]).

    RELAPS = |mean apical LS| / (|mean basal LS| + |mean mid LS|), on
    magnitudes of the level means of peak longitudinal strain; >= 1.0 sets
    the pattern flag.  Apical level = AHA 13-16 (the apex 17 is not part of
    any level mean) or 18-segment 13-18.  Each level needs at least
    ``min_fraction_per_level`` of its segments valid (engineering default,
    verify).  See :data:`RELAPS_CAUTION`: a flag, not a diagnosis.
    """
    means: dict[str, float | None] = {}
    counts: dict[str, int] = {}
    short = []
    for level in (seg.APICAL, seg.MID, seg.BASAL):
        numbers = seg.segment_numbers(model_id, level)
        ok = _valid(values, numbers)
        counts[level] = len(ok)
        need = max(1, math.ceil(min_fraction_per_level * len(numbers)))
        if len(ok) < need:
            means[level] = None
            short.append(f"{level} {len(ok)}/{len(numbers)}")
        else:
            means[level] = statistics.fmean(ok.values())
    common = dict(
        apical_mean_pct=means[seg.APICAL],
        mid_mean_pct=means[seg.MID],
        basal_mean_pct=means[seg.BASAL],
        n_apical=counts[seg.APICAL],
        n_mid=counts[seg.MID],
        n_basal=counts[seg.BASAL],
    )
    if short:
        return ApicalSparing(None, None, reason="too few valid segments: " + ", ".join(short), **common)
    denominator = abs(means[seg.BASAL]) + abs(means[seg.MID])  # type: ignore[arg-type]
    if denominator == 0:
        return ApicalSparing(None, None, reason="basal and mid strain both zero", **common)
    ratio = abs(means[seg.APICAL]) / denominator  # type: ignore[arg-type]
    return ApicalSparing(ratio, ratio >= RELAPS_PATTERN_AT_LEAST, **common)


# ---------------------------------------------------------------------------
# Near-zero segment among normally deforming neighbours
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class NearZeroSegment:
    number: int
    name: str
    strain_pct: float
    neighbour_strain_pct: dict[int, float]


def near_zero_among_normal(
    values: Mapping[int, float],
    model_id: str = seg.AHA17,
    *,
    near_zero_abs_pct: float = NEAR_ZERO_ABS_PCT,
    normal_below_pct: float = NORMAL_NEIGHBOUR_BELOW_PCT,
    min_valid_neighbours: int = MIN_VALID_NEIGHBOURS,
) -> list[NearZeroSegment]:
    """Segments with near-zero strain whose neighbours all deform normally.

    A segment is listed when |strain| < ``near_zero_abs_pct`` (default 5 %)
    and every valid bull's-eye neighbour (see
    :func:`tracker.engines.segments.neighbours`: same-ring adjacent and
    directly above/below) has strain < ``normal_below_pct`` (default -15 %),
    with at least ``min_valid_neighbours`` valid neighbours.  Thresholds are
    an engineering choice, common practice, verify (no published
    definition found).  A prompt to review the tracking and the images
    (a tracking artefact is a frequent cause), not a diagnosis.
    """
    ok = _valid(values, seg.segment_numbers(model_id))
    found = []
    for n, v in ok.items():
        if abs(v) >= near_zero_abs_pct:
            continue
        nb = {m: ok[m] for m in sorted(seg.neighbours(model_id, n)) if m in ok}
        if len(nb) >= min_valid_neighbours and all(x < normal_below_pct for x in nb.values()):
            found.append(NearZeroSegment(n, seg.segment_name(model_id, n), v, nb))
    return found


# ---------------------------------------------------------------------------
# Mechanical dispersion
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Dispersion:
    sd_ms: float | None
    n_valid: int
    mean_ttp_ms: float | None
    segments_used: tuple[int, ...]
    reason: str | None = None
    reference: str = MD_REFERENCE


def mechanical_dispersion(
    ttp_ms: Mapping[int, float], model_id: str = seg.AHA17, *, min_segments: int = DEFAULT_MIN_SEGMENTS
) -> Dispersion:
    """Mechanical dispersion (ms) = SD of time to peak over the 16 LV segments.

    Definition: Haugaa KH et al., JACC Cardiovasc Imaging 2010;3:247-56 and
    Haland TF et al., EHJ-CVI 2016;17:613-21 [V] (16 LV segments, apex cap
    excluded).  Sample SD (n - 1), stored with the count of valid segments.
    Defined for AHA numbering only (``aha17``/``aha16``); 18-segment data
    are refused rather than remapped.  Reference: :data:`MD_REFERENCE`.
    """
    if model_id not in (seg.AHA17, seg.AHA16):
        return Dispersion(None, 0, None, (), "defined on the 16 LV segments of the AHA model")
    ok = _valid(ttp_ms, seg.segment_numbers(seg.AHA16), nonneg=True)
    n = len(ok)
    if n < max(2, min_segments):
        return Dispersion(None, n, None, tuple(ok), f"only {n} valid segments (minimum {max(2, min_segments)})")
    vals = list(ok.values())
    return Dispersion(statistics.stdev(vals), n, statistics.fmean(vals), tuple(ok))


# ---------------------------------------------------------------------------
# Post-systolic index
# ---------------------------------------------------------------------------

def post_systolic_index(peak_pct: ArrayLike, peak_systolic_pct: ArrayLike):
    """Post-systolic index (%) = 100 x (peak - peak systolic) / peak.

    Definition [V2] (Brainin 2019 uses it on the global curve [V]); 0 when
    the peak precedes AVC (peak == peak systolic).  NaN when the peak is
    not negative (no shortening) or the peak systolic strain is more
    negative than the whole-cycle peak (inconsistent entry).  Vectorised.
    Isolated post-systolic shortening is common in health (Voigt 2003 [V]).
    """
    p = np.asarray(peak_pct, dtype=float)
    s = np.asarray(peak_systolic_pct, dtype=float)
    ok = (p < 0) & (s >= p)
    with np.errstate(divide="ignore", invalid="ignore"):
        psi = np.where(ok, 100.0 * (p - s) / np.where(p < 0, p, -1.0), np.nan)
    psi = np.where(ok & (s == p), 0.0, psi)
    return psi[()] if psi.ndim == 0 else psi


def segment_psi(
    peak_pct: Mapping[int, float], peak_systolic_pct: Mapping[int, float], model_id: str = seg.AHA17
) -> dict[int, float]:
    """Post-systolic index (%) per segment, for segments where it is defined."""
    out = {}
    for n in seg.segment_numbers(model_id):
        p, s = peak_pct.get(n), peak_systolic_pct.get(n)
        if p is None or s is None:
            continue
        v = float(post_systolic_index(p, s))
        if math.isfinite(v):
            out[n] = v
    return out


@dataclass(frozen=True)
class GlobalPSI:
    value_pct: float | None
    n_valid: int
    reason: str | None = None
    reference: str = PSI_REFERENCE


def global_psi(
    peak_pct: Mapping[int, float],
    peak_systolic_pct: Mapping[int, float],
    model_id: str = seg.AHA17,
    *,
    min_segments: int = DEFAULT_MIN_SEGMENTS,
) -> GlobalPSI:
    """Global post-systolic index (%) from segment values.

    PSI of the segment-averaged peak and peak-systolic strain, over the
    segments where both are valid and consistent:
    100 x (mean peak - mean peak systolic) / mean peak.  This approximates
    the global-curve form of Brainin 2019 [V] (a vendor's global peak and
    global peak-systolic values, when available, go straight into
    :func:`post_systolic_index`).  Reference: :data:`PSI_REFERENCE`.
    """
    both = []
    for n in seg.segment_numbers(model_id):
        p, s = peak_pct.get(n), peak_systolic_pct.get(n)
        if p is None or s is None:
            continue
        if math.isfinite(float(post_systolic_index(p, s))):
            both.append((float(p), float(s)))
    n = len(both)
    if n < max(1, min_segments):
        reason = f"only {n} segments with valid peak and peak-systolic strain (minimum {min_segments})"
        return GlobalPSI(None, n, reason)
    mp = statistics.fmean(p for p, _ in both)
    ms = statistics.fmean(s for _, s in both)
    return GlobalPSI(float(post_systolic_index(mp, ms)), n)


# ---------------------------------------------------------------------------
# One study
# ---------------------------------------------------------------------------

def derive_deformation(
    measures: Mapping[str, float | None], *, min_segments: int = DEFAULT_MIN_SEGMENTS
) -> dict[str, float]:
    """Derived deformation measures of one study from ``{measure_code: value}``.

    Reads the per-segment codes (``ls_segNN``, ``ls_sys_segNN``,
    ``ttp_segNN`` or the 18-segment ``ls18_...`` codes) and returns the
    derived codes it can compute: ``gls_segavg`` and ``gls_segavg_n``,
    ``relaps``, ``mech_dispersion`` and ``mech_dispersion_n`` (AHA numbering
    only), ``psi_global``.  Pattern flags (apical sparing, near-zero
    segments) are not measures; call the functions above for them.
    Raises ValueError when one study mixes 17- and 18-segment codes.
    """
    model = seg.detect_model(measures)
    if model is None:
        return {}
    ls = seg.segment_values(measures, model, seg.LS)
    ls_sys = seg.segment_values(measures, model, seg.LS_SYS)
    ttp = seg.segment_values(measures, model, seg.TTP)
    out: dict[str, float] = {}
    g = global_average_strain(ls, model, min_segments=min_segments)
    if g.value_pct is not None:
        out[GLS_SEGAVG] = g.value_pct
        out[GLS_SEGAVG_N] = float(g.n_valid)
    r = relative_apical_sparing(ls, model)
    if r.ratio is not None:
        out[RELAPS] = r.ratio
    d = mechanical_dispersion(ttp, model, min_segments=min_segments)
    if d.sd_ms is not None:
        out[MECH_DISPERSION] = d.sd_ms
        out[MECH_DISPERSION_N] = float(d.n_valid)
    p = global_psi(ls, ls_sys, model, min_segments=min_segments)
    if p.value_pct is not None:
        out[PSI_GLOBAL] = p.value_pct
    return out
