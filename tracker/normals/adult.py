"""Adult echo normal limits (data file ``data/adult_echo.csv``), in catalogue units.

- ASE/EACVI chamber quantification 2015 (Lang et al., J Am Soc Echocardiogr
  2015;28:1-39), sex-specific: IVSd, LVPWd, LVIDd, LVIDs, biplane LVEF,
  LV mass and LV mass index (linear method), RWT, LA volume index [V2].
  Normal ranges are the 2015 values; the mild/moderate/severe partitions for
  thickness, mass and RWT are the 2005 partitions carried forward [V2].
  Wall thickness and diameters are published in cm and converted to mm.
- LA anteroposterior diameter: older ranges, 3.0-4.0 cm men, 2.7-3.8 cm
  women [M: from memory, verify]; kept because HCM Risk-SCD uses LA diameter.
- GLS lower limit of normal, NORRE (Sugimoto et al., EHJ-CVI 2017): -16.7% men,
  -17.8% women [V].

Reference set ids: ``lang2015``, ``la_diam_older``, ``norre2017``.  The
limits apply from 18 y (adult guidelines; 18 y is the engineering boundary).
"""

from __future__ import annotations

from tracker.normals.tables import RangeRow, range_rows

FILE = "adult_echo.csv"
LANG_2015 = "lang2015"
LA_DIAM_OLDER = "la_diam_older"
NORRE_2017 = "norre2017"


def rows() -> tuple[RangeRow, ...]:
    """All adult echo reference rows (catalogue units)."""
    return range_rows(FILE)


def limits(measure: str, sex: str, reference_set: str = LANG_2015) -> RangeRow:
    """The row for one measure and sex ("female"/"male"; LAVI rows are "any")."""
    for row in rows():
        if row.measure == measure and row.reference_set == reference_set and row.sex in (sex, "any"):
            return row
    raise KeyError(f"no {reference_set} limits for {measure!r}, sex {sex!r}")


def lvmi_upper_normal_g_m2(sex: str) -> float:
    """Upper limit of normal LV mass index, linear method, g/m2 (Lang 2015 [V2])."""
    return limits("lvmi_echo", sex).upper


def rwt_upper_normal(sex: str) -> float:
    """Upper limit of normal relative wall thickness (0.42; Lang 2015 [V2])."""
    return limits("rwt", sex).upper
