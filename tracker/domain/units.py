"""Units of measured values: the spellings accepted on entry, and conversions to the catalogue unit.

Only conversions between units of the same quantity are made (length,
velocity); a value in a unit of another quantity is refused.  The factors are
exact SI definitions (1 cm = 10 mm, 1 m/s = 100 cm/s).
"""

from __future__ import annotations

_ALIASES = {
    "mm": "mm",
    "cm": "cm",
    "%": "%",
    "percent": "%",
    "ms": "ms",
    "mmhg": "mmHg",
    "mm hg": "mmHg",
    "mm[hg]": "mmHg",  # UCUM (DICOM reports)
    "cm/s": "cm/s",
    "cm/sec": "cm/s",
    "m/s": "m/s",
    "m/sec": "m/s",
    "ml/m2": "mL/m2",
    "ml/m²": "mL/m2",
    "g/m2": "g/m2",
    "g/m²": "g/m2",
    "g": "g",
    "ml": "mL",
    "ratio": "ratio",
    "1": "ratio",
    "{ratio}": "ratio",  # UCUM annotation (DICOM reports)
    "mv": "mV",
}

# (catalogue unit, entered unit) -> factor that turns the entered value into the catalogue unit.
_FACTORS = {
    ("mm", "cm"): 10.0,
    ("cm/s", "m/s"): 100.0,
    ("m/s", "cm/s"): 0.01,
}


def normalise_unit(text: str) -> str | None:
    """The canonical spelling of a unit, or None if the unit is not known."""
    return _ALIASES.get(text.strip().lower())


def conversion_factor(catalogue_unit: str, entered_unit: str) -> float | None:
    """Factor from ``entered_unit`` to ``catalogue_unit`` (1.0 when equal), None if not convertible."""
    if catalogue_unit == entered_unit:
        return 1.0
    return _FACTORS.get((catalogue_unit, entered_unit))


def likely_slip(catalogue_unit: str, code: str, value: float, lo: float, hi: float) -> str | None:
    """Why an out-of-range value is probably a unit or sign slip, if it looks like one."""
    if catalogue_unit == "mm" and lo <= value * 10 <= hi:
        return f"looks like centimetres ({value:g} cm = {value * 10:g} mm): enter mm or give unit cm"
    if catalogue_unit == "cm/s" and lo <= value * 100 <= hi:
        return f"looks like m/s ({value:g} m/s = {value * 100:g} cm/s): enter cm/s or give unit m/s"
    if catalogue_unit == "m/s" and lo <= value / 100 <= hi:
        return f"looks like cm/s ({value:g} cm/s = {value / 100:g} m/s): enter m/s or give unit cm/s"
    if catalogue_unit == "%" and 0 < abs(value) < 1 and lo <= value * 100 <= hi:
        return f"looks like a fraction ({value:g} = {value * 100:g} %): enter a percentage"
    if catalogue_unit == "%" and lo <= -value <= hi:
        return "looks like a lost minus sign (strain is negative for shortening)"
    return None
