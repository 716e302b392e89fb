"""Evidence about the shape: the normality tests from g1 and b2, and the check that a skewness near
zero is not mistaken for symmetry. A p-value is evidence against normality, not a verdict."""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from tailgauge.core import grouped, normality, order_statistics
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.describe.results import Descriptor, NormalityTest
from tailgauge.core.moments import CentralSums
from tailgauge.core.registry import WarningCode
from tailgauge.core.weighted import WeightedData, WeightMeaning


# Rule of thumb for populations (no sampling error): "near zero" and "visibly asymmetric".
POPULATION_SYMMETRY_THRESHOLD = 0.05



def normality_of(
    data: WeightedData, sums: CentralSums | None, basis: Basis, constant: bool, notes: Warnings
) -> list[NormalityTest]:
    """The four tests; a p-value is evidence against normality, not a verdict."""
    reason = None
    if data.meaning is WeightMeaning.PROBABILITY:
        reason = "a probability table is a distribution, not a sample"
    elif data.binned:
        reason = "binned counts give only grouped values; the tests need observations"
    elif not data.integer_weights or data.meaning is WeightMeaning.RELIABILITY:
        reason = "the tests need observations with whole counts"
    return normality_tests(reason, sums, basis, constant, data.total_weight, notes)



def normality_tests(
    reason: str | None, sums: CentralSums | None, basis: Basis, constant: bool, n: float, notes: Warnings
) -> list[NormalityTest]:
    """The tests from g1 and b2 of a sample of ``n`` whole observations, unless ``reason`` says why not."""
    if reason is None and (sums is None or basis.single or constant):
        reason = "the tests need data with spread (at least two distinct values)"
    results = {}
    if reason is None:
        assert sums is not None
        results = normality.tests(sums.standardized_moment(3), sums.standardized_moment(4), n)
        if n < normality.SMALL_SAMPLE_KURTOSIS:
            notes.add(
                WarningCode.NORMALITY_SMALL_SAMPLE,
                f"with n = {n:g} (< {normality.SMALL_SAMPLE_KURTOSIS}) the kurtosis test's normal "
                "approximation is poor, and so is the omnibus test built on it",
                ["normality"],
            )
    out = []
    for name, minimum in normality.MINIMUM_N.items():
        result = results.get(name, reason)
        if isinstance(result, normality.TestResult):
            out.append(
                NormalityTest(
                    name, finite_or_none(result.statistic), finite_or_none(result.p_value), minimum,
                    normality.REFERENCES[name], None,
                )
            )
        else:
            out.append(NormalityTest(name, None, None, minimum, normality.REFERENCES[name], result))
    return out



# Normal-theory standard deviations (times sqrt(n)) of the quartile skewness and of
# (mean - median) / sigma, from the asymptotic covariance of sample quantiles
# Cov(Q_p, Q_q) = p (1 - q) / (n f(x_p) f(x_q)), p <= q (e.g. Serfling 1980, section 2.3.3),
# and Var(median - mean) = (pi / 2 - 1) sigma^2 / n for normal data.
def _quartile_skewness_sd() -> float:
    probabilities = np.array([0.25, 0.5, 0.75])
    density = stats.norm.pdf(stats.norm.ppf(probabilities))
    p, q = np.meshgrid(probabilities, probabilities, indexing="ij")
    covariance = np.minimum(p, q) * (1.0 - np.maximum(p, q)) / np.outer(density, density)
    gradient = np.array([1.0, -2.0, 1.0])
    spread = stats.norm.ppf(0.75) - stats.norm.ppf(0.25)
    return float(math.sqrt(gradient @ covariance @ gradient) / spread)



_QUARTILE_SKEWNESS_SD = _quartile_skewness_sd()



_MEAN_MEDIAN_GAP_SD = math.sqrt(math.pi / 2.0 - 1.0)



def check_symmetry(
    descriptors: dict[str, Descriptor], data: WeightedData, basis: Basis, notes: Warnings
) -> None:
    """Warn when skewness is near zero while quartiles or the mean-median gap show asymmetry."""
    if not _symmetry_checkable(descriptors):
        return
    probabilities = np.array([0.25, 0.5, 0.75])
    if data.binned:
        quartiles = grouped.quantiles(data, probabilities)
    else:
        support = data.support
        quartiles = order_statistics.cdf_quantiles(
            support.values, support.weights, probabilities, average_at_steps=True, cumulative=support.cumulative
        )
    note_asymmetry(descriptors, quartiles, basis, notes)



def _symmetry_checkable(descriptors: dict[str, Descriptor]) -> bool:
    """Whether skewness, mean, median and a non-zero standard deviation are all defined."""
    values = [descriptors[name].value for name in ("skewness", "mean", "median")]
    return all(v is not None for v in values) and bool(descriptors["standard_deviation"].value)



def note_asymmetry(
    descriptors: dict[str, Descriptor], quartiles: np.ndarray, basis: Basis, notes: Warnings
) -> None:
    """The comparison behind ``check_symmetry``, given Q1, Q2, Q3 by whatever rule the data allow."""
    if not _symmetry_checkable(descriptors):
        return
    skew = descriptors["skewness"].value
    mean, sd = descriptors["mean"].value, descriptors["standard_deviation"].value
    assert skew is not None and mean is not None and sd is not None
    q1, q2, q3 = np.asarray(quartiles, dtype=np.float64)  # numpy scalars: no ZeroDivisionError or OverflowError
    if not (math.isfinite(q1) and math.isfinite(q3)) or q3 == q1:
        return
    with np.errstate(over="ignore", invalid="ignore"):
        # Halves first: quartiles near +-1.8e308 must not overflow before the ratio.
        quartile_skewness = float((0.5 * q3 + 0.5 * q1 - q2) / (0.5 * q3 - 0.5 * q1))
        # The gap uses the same averaged median as the quartiles, so a symmetric table reads as such.
        gap = float((0.5 * mean - 0.5 * q2) / (0.5 * sd))
    if not (math.isfinite(quartile_skewness) and math.isfinite(gap)):
        return
    if basis.population or basis.sample_size is None:
        near_zero = abs(skew) <= POPULATION_SYMMETRY_THRESHOLD
        limit_quartile = limit_gap = POPULATION_SYMMETRY_THRESHOLD
        rule = f"rule of thumb for a population: |skewness| <= {POPULATION_SYMMETRY_THRESHOLD}, others beyond it"
    else:
        n = basis.sample_size
        error = descriptors["skewness"].standard_error_under_normality
        if error is None:
            error = math.sqrt(6.0 * (n - 2.0) / ((n + 1.0) * (n + 3.0))) if n > 2 else math.inf
        near_zero = abs(skew) <= 2.0 * error
        limit_quartile = 2.0 * _QUARTILE_SKEWNESS_SD / math.sqrt(n)
        limit_gap = 2.0 * _MEAN_MEDIAN_GAP_SD / math.sqrt(n)
        rule = "two normal-theory standard errors (common practice)"
    disagree = []
    if abs(quartile_skewness) > limit_quartile:
        disagree.append(f"quartile skewness {quartile_skewness:.3g}")
    if abs(gap) > limit_gap:
        disagree.append(f"(mean - median) / sd = {gap:.3g}")
    if near_zero and disagree:
        notes.add(
            WarningCode.ASYMMETRY_DESPITE_SMALL_SKEWNESS,
            f"skewness {skew:.3g} is near zero, yet {' and '.join(disagree)} show asymmetry "
            f"(threshold: {rule}); a zero third moment does not make a distribution symmetric",
            ["skewness"],
        )
