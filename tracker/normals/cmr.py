"""Adult CMR reference values (data file ``data/cmr.csv``), in catalogue units.

- LV mass index and LVEF, UK Biobank (Petersen et al., JCMR 2017; 45-74 y,
  1.5 T, papillary muscles in the blood pool): mean +- SD by sex [V]; limits
  computed here as mean +- 2 SD.  Set ``petersen2017``.
- Maximal wall thickness, MESA (Kawel et al., Circ CVI 2012): only the mean
  maximal mid-cavity thickness is recorded (7 mm women, 8 mm men, short axis)
  [V]; no upper limit of normal, so no class is given.  Set ``kawel2012``.
- ECV: mapping ranges must be site-, field- and sequence-specific, so there is
  no default.  Selectable: ``dabir2014_molli_1.5t`` (0.25 +- 0.04) and
  ``dabir2014_molli_3t`` (0.26 +- 0.04), converted from fractions to % [V];
  ``rosmini2018_shmolli`` / ``_molli`` / ``_sasha`` (means 28.4 / 27.3 /
  24.1%, no SD recorded, so no class) [V].
- LGE extent: >= 15% of LV mass is "extensive", an SCD risk marker (2024
  AHA/ACC/AMSSM/HRS/PACES/SCMR guideline, Table 7 [V]); a flag, not a normal
  limit.  Set ``lge_extent``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from tracker.normals.tables import RangeRow, range_rows

FILE = "cmr.csv"
PETERSEN_2017 = "petersen2017"
KAWEL_2012 = "kawel2012"
LGE_EXTENT = "lge_extent"
ECV_NOTE = (
    "ECV ranges are site-, field-strength- and sequence-specific; "
    "choose a reference set (e.g. dabir2014_molli_1.5t) or use the site's own range"
)


def rows() -> tuple[RangeRow, ...]:
    """All CMR reference rows (catalogue units)."""
    return range_rows(FILE)


def ecv_sets() -> tuple[str, ...]:
    """The selectable ECV reference sets."""
    return tuple(r.reference_set for r in rows() if r.measure == "ecv")


def extensive_lge_threshold_pct() -> float:
    """Extensive LGE threshold, % of LV mass (15; AHA 2024 Table 7 [V])."""
    return next(r.upper for r in rows() if r.reference_set == LGE_EXTENT)


def extensive_lge(lge_pct: ArrayLike) -> bool | np.ndarray:
    """True where LGE >= 15% of LV mass (NaN gives False)."""
    a = np.asarray(lge_pct, dtype=float) >= extensive_lge_threshold_pct()
    return bool(a) if a.ndim == 0 else a
