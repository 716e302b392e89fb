"""Evidence about normality from the sample skewness and kurtosis (statistics and p-values).

All tests take the plug-in ``g1 = m3 / m2^1.5`` and ``b2 = m4 / m2^2`` and the sample size,
so count tables are tested without expanding them. A p-value is evidence against normality,
not a verdict: a large one does not show the data are normal, a small one with huge n may
reflect a departure too small to matter.

* D'Agostino's skewness test (1970), n >= 8;
* the Anscombe & Glynn kurtosis test (1983), n >= 5 (its normal approximation is poor below 20);
* D'Agostino & Pearson's omnibus K^2 = Z_skew^2 + Z_kurt^2 (1973), chi-square with 2 degrees of
  freedom, n >= 8;
* Jarque & Bera (1980): JB = n/6 (g1^2 + (b2 - 3)^2 / 4), asymptotically chi-square(2), n >= 2.

The formulas follow the papers as implemented in scipy.stats (skewtest, kurtosistest,
normaltest, jarque_bera), which the tests use as the reference.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy import special

# Below this n the Anscombe & Glynn approximation is poor (the limit scipy.stats warns at).
SMALL_SAMPLE_KURTOSIS = 20
MINIMUM_N = {"skewness_test": 8, "kurtosis_test": 5, "omnibus_k2": 8, "jarque_bera": 2}
REFERENCES = {
    "skewness_test": "R. B. D'Agostino, Biometrika 57, 679-681, 1970",
    "kurtosis_test": "F. J. Anscombe and W. J. Glynn, Biometrika 70, 227-234, 1983",
    "omnibus_k2": "R. D'Agostino and E. S. Pearson, Biometrika 60, 613-622, 1973",
    "jarque_bera": "C. M. Jarque and A. K. Bera, Economics Letters 6, 255-259, 1980",
}


@dataclass(frozen=True)
class TestResult:
    statistic: float
    p_value: float


def two_sided_normal(z: float) -> float:
    """``2 P(Z > |z|)`` for a standard normal Z: ``scipy.stats.norm.sf`` is ``special.ndtr(-x)``,
    called here without the distribution object's argument handling (the same number)."""
    return float(2.0 * special.ndtr(-abs(z)))


def chi_square_2_upper(x: float) -> float:
    """``P(X > x)`` for chi-square with 2 degrees of freedom: ``special.chdtrc``, the function
    ``scipy.stats.chi2.sf`` calls (the same number). ``exp(-x / 2)``, its closed form, differs
    from it by up to a few 1e-14 relative, so it is not used."""
    return float(special.chdtrc(2.0, x))


def skewness_z(g1: float, n: float) -> float:
    y = g1 * math.sqrt(((n + 1.0) * (n + 3.0)) / (6.0 * (n - 2.0)))
    beta2 = (
        3.0 * (n * n + 27.0 * n - 70.0) * (n + 1.0) * (n + 3.0)
        / ((n - 2.0) * (n + 5.0) * (n + 7.0) * (n + 9.0))
    )
    w2 = -1.0 + math.sqrt(2.0 * (beta2 - 1.0))
    delta = 1.0 / math.sqrt(0.5 * math.log(w2))
    alpha = math.sqrt(2.0 / (w2 - 1.0))
    if y == 0.0:
        return 0.0
    ratio = y / alpha
    return delta * math.log(ratio + math.sqrt(ratio * ratio + 1.0))


def kurtosis_z(b2: float, n: float) -> float:
    expected = 3.0 * (n - 1.0) / (n + 1.0)
    variance = 24.0 * n * (n - 2.0) * (n - 3.0) / ((n + 1.0) ** 2 * (n + 3.0) * (n + 5.0))
    x = (b2 - expected) / math.sqrt(variance)
    root_beta1 = (
        6.0 * (n * n - 5.0 * n + 2.0) / ((n + 7.0) * (n + 9.0))
        * math.sqrt((6.0 * (n + 3.0) * (n + 5.0)) / (n * (n - 2.0) * (n - 3.0)))
    )
    a = 6.0 + 8.0 / root_beta1 * (2.0 / root_beta1 + math.sqrt(1.0 + 4.0 / root_beta1**2))
    first = 1.0 - 2.0 / (9.0 * a)
    denominator = 1.0 + x * math.sqrt(2.0 / (a - 4.0))
    if denominator == 0.0:
        return math.nan
    second = math.copysign(abs((1.0 - 2.0 / a) / denominator) ** (1.0 / 3.0), denominator)
    return (first - second) / math.sqrt(2.0 / (9.0 * a))


def tests(g1: float, b2: float, n: float) -> dict[str, TestResult | str]:
    """Each test's statistic and two-sided p-value, or the reason it cannot be computed."""
    results: dict[str, TestResult | str] = {}
    for name, minimum in MINIMUM_N.items():
        if n < minimum:
            results[name] = f"needs at least {minimum} observations; n = {n:g}"
    if "skewness_test" not in results:
        z = skewness_z(g1, n)
        results["skewness_test"] = TestResult(z, two_sided_normal(z))
    if "kurtosis_test" not in results:
        z = kurtosis_z(b2, n)
        results["kurtosis_test"] = TestResult(z, two_sided_normal(z))
    if "omnibus_k2" not in results:
        skew, kurt = results["skewness_test"], results["kurtosis_test"]
        assert isinstance(skew, TestResult) and isinstance(kurt, TestResult)
        k2 = skew.statistic**2 + kurt.statistic**2
        results["omnibus_k2"] = TestResult(k2, chi_square_2_upper(k2))
    if "jarque_bera" not in results:
        jb = n / 6.0 * (g1 * g1 + (b2 - 3.0) ** 2 / 4.0)
        results["jarque_bera"] = TestResult(jb, chi_square_2_upper(jb))
    return results
