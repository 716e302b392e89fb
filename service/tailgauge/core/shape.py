"""Skewness and kurtosis in the three estimator families of Joanes & Gill (1998).

With ``g1 = m3 / m2**1.5`` and ``g2 = m4 / m2**2 - 3`` from plug-in central moments:

* ``g1``, ``g2`` — the plug-in (population) estimators;
* ``G1 = g1 * sqrt(n (n - 1)) / (n - 2)`` and
  ``G2 = (n - 1) / ((n - 2)(n - 3)) * ((n + 1) g2 + 6)`` — the "adjusted Fisher-Pearson"
  estimators (unbiased for the normal in the case of G2), defined for n >= 3 and n >= 4
  (the other four need only n >= 2: two distinct values give g1 = 0 and g2 = -2);
* ``b1 = g1 ((n - 1) / n)**1.5`` and ``b2 = (g2 + 3)((n - 1) / n)**2 - 3`` — moments
  standardized by the sample standard deviation.

Standard errors are the exact standard deviations of each estimator for normal samples:
``var(g1) = 6 (n - 2) / ((n + 1)(n + 3))`` and
``var(g2) = 24 n (n - 2)(n - 3) / ((n + 1)**2 (n + 3)(n + 5))`` (Pearson; Joanes & Gill 1998,
eqs. for the variances), scaled by the square of each family's factor.

References
----------
D. N. Joanes and C. A. Gill, "Comparing measures of sample skewness and kurtosis",
Journal of the Royal Statistical Society, Series D (The Statistician) 47(1), 183-189, 1998.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

SKEWNESS_FAMILIES = ("g1", "G1", "b1")
KURTOSIS_FAMILIES = ("g2", "G2", "b2")
# Smallest n for which each estimator and its normal-theory standard error is defined. At n = 2
# every sample gives g1 = 0 and g2 = -2 (and at n = 3, g2 = -1.5), so the exact variances below
# are 0 there, as they should be; G1 and G2 divide by n - 2 and n - 3.
SKEWNESS_MIN_N = {"g1": 2, "G1": 3, "b1": 2}
KURTOSIS_MIN_N = {"g2": 2, "G2": 4, "b2": 2}


@dataclass(frozen=True)
class Estimate:
    """An estimate and its standard error under normality (arrays when n or g are arrays)."""

    value: float | np.ndarray
    standard_error: float | np.ndarray


def _skewness_factor(family: str, n: float) -> float:
    if family == "g1":
        return 1.0
    if family == "G1":
        return np.sqrt(n) * np.sqrt(n - 1.0) / (n - 2.0)
    return ((n - 1.0) / n) ** 1.5


# The formulas are written as products of ratios so that no power of n overflows, whatever the
# total weight of a count table.


def skewness(g1: float, n: float, family: str) -> Estimate:
    """Skewness of ``family`` from the plug-in ``g1`` of a sample of size ``n`` (``SKEWNESS_MIN_N``)."""
    factor = _skewness_factor(family, n)
    variance_g1 = 6.0 * ((n - 2.0) / (n + 1.0)) / (n + 3.0)
    return Estimate(value=factor * g1, standard_error=factor * np.sqrt(variance_g1))


def excess_kurtosis(g2: float, n: float, family: str) -> Estimate:
    """Excess kurtosis of ``family`` from the plug-in ``g2`` of a sample of size ``n`` (``KURTOSIS_MIN_N``)."""
    # + 0.0: at n = 2 the product is -0.0 (a zero times n - 3 < 0), whose square root prints as -0.
    variance_g2 = 24.0 * (n / (n + 1.0)) * ((n - 2.0) / (n + 1.0)) * ((n - 3.0) / (n + 3.0)) / (n + 5.0) + 0.0
    if family == "g2":
        value, factor = g2, 1.0
    elif family == "G2":
        factor = ((n - 1.0) / (n - 2.0)) * ((n + 1.0) / (n - 3.0))
        value = ((n - 1.0) / (n - 2.0)) * (((n + 1.0) / (n - 3.0)) * g2 + 6.0 / (n - 3.0))
    else:
        factor = ((n - 1.0) / n) ** 2
        value = (g2 + 3.0) * factor - 3.0
    # A total frequency weight between 2 and 3 (fractional counts) has no normal-theory variance
    # (the formula turns negative): its standard error is NaN, which the caller reports as null.
    with np.errstate(invalid="ignore"):
        error = factor * np.sqrt(variance_g2)
    return Estimate(value=value, standard_error=error)
