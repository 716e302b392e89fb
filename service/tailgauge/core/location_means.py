"""Location beyond the arithmetic mean: trimmed and winsorized means (over the step quantile
function, see :mod:`tailgauge.core.quantile_integrals`) and the geometric and harmonic means,
for one row (the data) and many (resamples, the jackknife).

Trimming cuts g = floor(gamma n) observations from each end for whole counts, as
``scipy.stats.trim_mean`` and ``scipy.stats.mstats.winsorize`` do (``int(proportion * n)``), and
gamma W of the weight for other weights (a boundary value then enters with the fraction of its
weight inside the window). Bins integrate the grouped (linearly interpolated) quantile function.

References
----------
J. W. Tukey and D. H. McLaughlin, "Less vulnerable confidence and significance procedures for
location based on a single sample: trimming/winsorization 1", Sankhya A 25, 331-352, 1963.
"""

from __future__ import annotations

import numpy as np

from tailgauge.core import quantile_integrals as qi
from tailgauge.core.weighted import WeightedData

# Common practice: 10% from each end.
DEFAULT_TRIM_PROPORTION = 0.1


def positive_reason(data: WeightedData) -> str | None:
    """Why the geometric and harmonic means are undefined for ``data`` (``None``: all positive)."""
    if data.binned:
        assert data.weights is not None and data.edges is not None
        held = np.flatnonzero(data.weights > 0)
        lowest = float(data.edges[held[0]])
        if not lowest >= 0.0:
            return "the bins holding data reach below zero (or are open below): positive values only"
        return None
    lowest = float(np.min(data.values)) if data.weights is None else float(data.support.values[0])
    if lowest <= 0.0:
        return "the data hold zero or negative values: positive values only"
    return None


def geometric_rows(view, logs: np.ndarray) -> np.ndarray:
    """exp(sum w ln x / W) of each row (``logs``: ln of each support value)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.exp(qi.dense_sum(view, logs) / np.asarray(view.total, dtype=np.float64))


def harmonic_rows(view, reciprocals: np.ndarray) -> np.ndarray:
    """W / sum w / x of each row (``reciprocals``: 1 / x of each support value)."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return np.asarray(view.total, dtype=np.float64) / qi.dense_sum(view, reciprocals)


def support_columns(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """ln x and 1 / x of positive support values (bins: their midpoints)."""
    with np.errstate(divide="ignore", over="ignore"):
        return np.log(values), 1.0 / values
