"""The words a normal-limit assessment may return, and the column bundle the
vectorised evaluators fill.

Class strings: within / above / below normal limits, outside the reference
range (the reference set does not cover this person: age or BSA outside its
valid range; no number is given, nothing is extrapolated), no reference (no
reference set applies: measure without encoded limits, sex unknown for a
sex-specific set, age or BSA unknown).
"""

from __future__ import annotations

import numpy as np

WITHIN = "within normal limits"
ABOVE = "above normal limits"
BELOW = "below normal limits"
OUTSIDE = "outside the reference range"
NO_REFERENCE = "no reference"
CLASSES = (WITHIN, ABOVE, BELOW, OUTSIDE, NO_REFERENCE)

MILD, MODERATE, SEVERE = "mild", "moderate", "severe"
GRADES = (MILD, MODERATE, SEVERE)

CAUTION = (
    "Decision support only: the treating clinician decides. "
    "Follow local protocols and the current guideline."
)

FLOAT_COLUMNS = ("z", "lower", "upper")
TEXT_COLUMNS = ("assessment", "grade", "flag", "reference_set", "source", "note")

# Measured values are compared with limits after rounding to 1e-6 of the
# catalogue unit, so that binary floating-point error from a unit conversion
# (1.3 cm -> 13.000000000000002 mm) cannot move a value across a band edge.
COMPARE_DECIMALS = 6


def blank(n: int) -> dict[str, np.ndarray]:
    """Columns for n results: NaN numbers, "no reference", empty texts."""
    cols: dict[str, np.ndarray] = {c: np.full(n, np.nan) for c in FLOAT_COLUMNS}
    for c in TEXT_COLUMNS:
        cols[c] = np.full(n, None, dtype=object)
    cols["assessment"][:] = NO_REFERENCE
    cols["source"][:] = ""
    cols["note"][:] = ""
    return cols


def add_note(cols: dict[str, np.ndarray], mask: np.ndarray, text: str) -> None:
    """Append ``text`` to the note of the rows in ``mask`` (joined by "; ")."""
    if not text or not np.any(mask):
        return
    old = cols["note"][mask]
    cols["note"][mask] = np.where(old == "", text, old + ("; " + text))
