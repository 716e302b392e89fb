"""Serial dependence of ordered samples."""

from __future__ import annotations

import numpy as np

from tailgauge.core.moments import CentralSums

_BLOCK = 1 << 16


def lag1_autocorrelation(values: np.ndarray, sums: CentralSums) -> float:
    """``r1 = sum_{i<n} (x_i - xbar)(x_{i+1} - xbar) / sum_i (x_i - xbar)**2``.

    This is the definition used for the certified values of the NIST StRD univariate
    datasets. Deviations are the scaled deviations of ``sums`` (the same exact power-of-two
    scaling as its power sums), so the products cannot overflow; the denominator is the
    already-computed second central sum. NaN for constant data.
    """
    denominator = float(sums.sums[2])
    if denominator <= 0.0 or values.size < 2:
        return float("nan")
    numerator = 0.0
    for start in range(0, values.size - 1, _BLOCK):
        chunk = sums.scaled_deviations(values[start : start + _BLOCK + 1])
        numerator += float(np.sum(chunk[:-1] * chunk[1:]))
    return numerator / denominator
