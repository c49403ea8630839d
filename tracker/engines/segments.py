"""Left-ventricular segment models and the measure codes of per-segment values.

Models (each has a model id that is stored with segment data; values of
different models are never mixed without an explicit mapping rule):

``aha17``
    AHA 17-segment model (Cerqueira MD et al., Circulation 2002;105:539-42)
    [V2: segment names and numbering as reproduced in the reference notes].
    Basal 1-6, mid 7-12, apical 13-16, apex (apical cap) 17.
``aha16``
    The same numbering without the apical cap (segments 1-16) [V]; the set
    over which mechanical dispersion is defined.
``strain18``
    18-segment strain model: six segments at each of the basal, mid and
    apical levels, named after the basal walls [M] -- from memory, verify.

Measure codes (plain, model in the prefix so a stored code is unambiguous):

==========================  ====================================================  ====
kind                        AHA 17 numbering (also used for ``aha16``)            18
==========================  ====================================================  ====
peak longitudinal strain %  ``ls_seg01`` .. ``ls_seg17``                          ``ls18_seg01`` ..
peak systolic strain %      ``ls_sys_seg01`` .. (most negative before AVC)        ``ls18_sys_seg01`` ..
time to peak, ms            ``ttp_seg01`` .. (QRS onset to peak negative strain)  ``ttp18_seg01`` ..
==========================  ====================================================  ====

Strain is Lagrangian, negative = shortening, in %; the peak is the most
negative value over the whole cycle (post-systolic if after aortic valve
closure, AVC); time to peak is from QRS onset, post-systolic peaks included
(Voigt 2015 task-force terms [M]; Haland 2016 for TTP [V]).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

AHA17 = "aha17"
AHA16 = "aha16"
STRAIN18 = "strain18"
MODEL_IDS = (AHA17, AHA16, STRAIN18)

BASAL = "basal"
MID = "mid"
APICAL = "apical"
APEX = "apex"
LEVELS = (BASAL, MID, APICAL, APEX)

# Kinds of per-segment value.
LS = "ls"  # peak longitudinal strain over the whole cycle, %
LS_SYS = "ls_sys"  # peak systolic longitudinal strain (before AVC), %
TTP = "ttp"  # time from QRS onset to peak negative strain, ms
KINDS = (LS, LS_SYS, TTP)
KIND_UNITS = {LS: "%", LS_SYS: "%", TTP: "ms"}


@dataclass(frozen=True)
class Segment:
    """One segment of a model: its number, level and wall (name = level + wall)."""

    number: int
    level: str
    wall: str

    @property
    def name(self) -> str:
        if self.level == APEX:
            return "apex (apical cap)"
        return f"{self.level} {self.wall}"


_RING6 = ("anterior", "anteroseptal", "inferoseptal", "inferior", "inferolateral", "anterolateral")
_RING4 = ("anterior", "septal", "inferior", "lateral")

# AHA 17-segment model, Cerqueira 2002 [V2].
_AHA17 = (
    tuple(Segment(i + 1, BASAL, w) for i, w in enumerate(_RING6))
    + tuple(Segment(i + 7, MID, w) for i, w in enumerate(_RING6))
    + tuple(Segment(i + 13, APICAL, w) for i, w in enumerate(_RING4))
    + (Segment(17, APEX, "cap"),)
)
# 18-segment strain model: six walls at each level [M] -- from memory, verify.
_STRAIN18 = (
    tuple(Segment(i + 1, BASAL, w) for i, w in enumerate(_RING6))
    + tuple(Segment(i + 7, MID, w) for i, w in enumerate(_RING6))
    + tuple(Segment(i + 13, APICAL, w) for i, w in enumerate(_RING6))
)

SEGMENTS: dict[str, tuple[Segment, ...]] = {
    AHA17: _AHA17,
    AHA16: _AHA17[:16],
    STRAIN18: _STRAIN18,
}


def segments(model_id: str) -> tuple[Segment, ...]:
    """The segments of a model, in number order."""
    try:
        return SEGMENTS[model_id]
    except KeyError:
        raise ValueError(f"unknown segment model {model_id!r}; expected one of {MODEL_IDS}") from None


def segment_numbers(model_id: str, level: str | None = None) -> tuple[int, ...]:
    """Segment numbers of a model, optionally only those of one level."""
    return tuple(s.number for s in segments(model_id) if level is None or s.level == level)


def segment_name(model_id: str, number: int) -> str:
    """Standard name of a segment, e.g. ``segment_name("aha17", 9) == "mid inferoseptal"``."""
    for s in segments(model_id):
        if s.number == number:
            return s.name
    raise ValueError(f"model {model_id!r} has no segment {number}")


# ---------------------------------------------------------------------------
# Bull's-eye neighbours (used for "near-zero segment among normal neighbours").
#
# Definition (an explicit engineering choice, stated here so it can be
# reviewed): neighbours are the adjacent segments of the same ring (the ring
# wraps round) and the segments directly above and below.  Between the
# six-segment mid ring and the four-segment apical ring of the AHA model,
# "directly" follows the wall names: mid anterior-apical anterior,
# mid anteroseptal and mid inferoseptal-apical septal, mid inferior-apical
# inferior, mid inferolateral and mid anterolateral-apical lateral.  The apex
# (17) neighbours the four apical segments.  In the 18-segment model every
# level has six walls, so basal i, mid i and apical i are stacked one to one.
# ---------------------------------------------------------------------------

def _ring_pairs(numbers: tuple[int, ...]) -> list[tuple[int, int]]:
    return [(numbers[i], numbers[(i + 1) % len(numbers)]) for i in range(len(numbers))]


def _build_neighbours(model_id: str) -> dict[int, frozenset[int]]:
    pairs: list[tuple[int, int]] = []
    basal = segment_numbers(model_id, BASAL)
    mid = segment_numbers(model_id, MID)
    apical = segment_numbers(model_id, APICAL)
    for ring in (basal, mid, apical):
        pairs += _ring_pairs(ring)
    pairs += list(zip(basal, mid))
    if model_id == STRAIN18:
        pairs += list(zip(mid, apical))
    else:
        mid_to_apical = {7: 13, 8: 14, 9: 14, 10: 15, 11: 16, 12: 16}
        pairs += list(mid_to_apical.items())
        if model_id == AHA17:
            pairs += [(17, a) for a in apical]
    out: dict[int, set[int]] = {n: set() for n in segment_numbers(model_id)}
    for a, b in pairs:
        out[a].add(b)
        out[b].add(a)
    return {n: frozenset(v) for n, v in out.items()}


NEIGHBOURS: dict[str, dict[int, frozenset[int]]] = {m: _build_neighbours(m) for m in MODEL_IDS}


def neighbours(model_id: str, number: int) -> frozenset[int]:
    """Bull's-eye neighbours of a segment (definition in the comment above)."""
    try:
        return NEIGHBOURS[model_id][number]
    except KeyError:
        raise ValueError(f"model {model_id!r} has no segment {number}") from None


# ---------------------------------------------------------------------------
# Measure codes
# ---------------------------------------------------------------------------

_PREFIX = {
    (AHA17, LS): "ls_seg",
    (AHA17, LS_SYS): "ls_sys_seg",
    (AHA17, TTP): "ttp_seg",
    (STRAIN18, LS): "ls18_seg",
    (STRAIN18, LS_SYS): "ls18_sys_seg",
    (STRAIN18, TTP): "ttp18_seg",
}


def _storage_model(model_id: str) -> str:
    """``aha16`` values are stored under the AHA 17 codes (same numbering)."""
    segments(model_id)  # validates
    return AHA17 if model_id == AHA16 else model_id


def measure_code(model_id: str, kind: str, number: int) -> str:
    """Measure code of one per-segment value, e.g. ``measure_code("aha17", "ls", 3) == "ls_seg03"``."""
    if kind not in KINDS:
        raise ValueError(f"unknown kind {kind!r}; expected one of {KINDS}")
    if number not in segment_numbers(model_id):
        raise ValueError(f"model {model_id!r} has no segment {number}")
    return f"{_PREFIX[(_storage_model(model_id), kind)]}{number:02d}"


def measure_codes(model_id: str, kind: str) -> tuple[str, ...]:
    """All measure codes of one kind for a model, in segment order."""
    return tuple(measure_code(model_id, kind, n) for n in segment_numbers(model_id))


def all_segment_measure_codes() -> tuple[str, ...]:
    """Every per-segment measure code (AHA 17 and 18-segment, all kinds)."""
    return tuple(c for m in (AHA17, STRAIN18) for k in KINDS for c in measure_codes(m, k))


def segment_values(measures: Mapping[str, float | None], model_id: str, kind: str) -> dict[int, float]:
    """Pick one kind of per-segment value out of a study's ``{measure_code: value}``.

    Returns ``{segment_number: value}`` for the segments present with a
    value (None is dropped; non-finite values are kept for the engines to
    reject and count).
    """
    out: dict[int, float] = {}
    for n in segment_numbers(model_id):
        v = measures.get(measure_code(model_id, kind, n))
        if v is not None:
            out[n] = float(v)
    return out


def detect_model(measures: Mapping[str, float | None]) -> str | None:
    """The model whose segment codes appear in ``measures`` (``aha17`` or ``strain18``).

    Returns None when no segment codes are present; raises ValueError when
    codes of both models are present in one study (never blended).
    """
    found = set()
    for m in (AHA17, STRAIN18):
        codes = set(c for k in KINDS for c in measure_codes(m, k))
        if any(measures.get(c) is not None for c in codes):
            found.add(m)
    if len(found) > 1:
        raise ValueError("study holds segment values of both the 17- and the 18-segment model")
    return found.pop() if found else None


# ---------------------------------------------------------------------------
# Explicit 18 -> 17 mapping rule (opt-in only)
# ---------------------------------------------------------------------------

MAP18_TO17_RULE = "apical_pairs_mean"
"""Name of the one 18->17 mapping rule offered here.

Basal and mid segments map one to one (18-model 1-12 -> AHA 1-12); apical
anterior -> 13, apical inferior -> 15; apical septal (14) = mean of apical
anteroseptal and apical inferoseptal; apical lateral (16) = mean of apical
inferolateral and apical anterolateral; the apex (17) is left empty.
Engineering choice, common practice, verify; do not use for time-to-peak
(averaging two times understates dispersion).
"""

_MAP18_TO17 = {
    **{n: (n,) for n in range(1, 13)},
    13: (13,),
    14: (14, 15),
    15: (16,),
    16: (17, 18),
}


def map_strain18_to_aha17(values18: Mapping[int, float]) -> dict[int, float]:
    """Apply rule :data:`MAP18_TO17_RULE` to ``{segment: value}`` of the 18-segment model.

    A 17-model segment is filled only when all of its source segments have a
    value.  The caller must store the rule name with mapped values.
    """
    out: dict[int, float] = {}
    for target, sources in _MAP18_TO17.items():
        vals = [values18.get(s) for s in sources]
        if all(v is not None for v in vals):
            out[target] = float(sum(vals)) / len(vals)  # type: ignore[arg-type]
    return out
