"""The fitted straight line of a per-person trend and its 95% confidence band, for drawing.

Input: one row of :func:`tracker.engines.trends.per_person_ols` (n, mean_age,
mean_value, slope, sxx, resid_sd) and the ages at which to evaluate it.  The
band is the pointwise confidence interval of the mean line,

    y(a) = ybar + b (a - abar)  +/-  t(1 - alpha/2, n - 2) * s * sqrt(1/n + (a - abar)^2 / Sxx),

the usual interval for the regression mean of ordinary least squares (any
regression text; it is the set whose inversion gives the Fieller interval of
:func:`tracker.engines.trends.project_crossings`).  It is for the mean line,
not for the next single study, which scatters further by the residual SD.
With two studies there are no residual degrees of freedom: the line is given
and the band is NaN.

Pure: numbers in, a DataFrame out.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd

from tracker.engines.trends import t_quantile

BAND_COLUMNS = ["age_years", "fit", "low", "high"]


def mean_line_band(ols_row: Mapping[str, float] | pd.Series, ages, level: float = 0.95) -> pd.DataFrame:
    """Fitted value and ``level`` confidence band of the mean line at ``ages`` (years); columns ``BAND_COLUMNS``."""
    a = np.asarray(ages, dtype=float)
    n = float(ols_row["n"])
    b = float(ols_row["slope"])
    abar, ybar = float(ols_row["mean_age"]), float(ols_row["mean_value"])
    sxx, s = float(ols_row["sxx"]), float(ols_row["resid_sd"])
    fit = ybar + b * (a - abar)
    if n > 2 and np.isfinite(s) and sxx > 0:
        t = t_quantile(0.5 + level / 2.0, n - 2.0)
        half = t * s * np.sqrt(1.0 / n + (a - abar) ** 2 / sxx)
    else:
        half = np.full(a.shape, np.nan)
    return pd.DataFrame({"age_years": a, "fit": fit, "low": fit - half, "high": fit + half}, columns=BAND_COLUMNS)
