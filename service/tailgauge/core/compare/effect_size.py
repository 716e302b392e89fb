"""The standardized mean difference (Cohen's d, Hedges' g) and Welch's interval for the
difference of means: the contrasts that need each input's sample size.

References
----------
L. V. Hedges and I. Olkin, *Statistical Methods for Meta-Analysis*, Academic Press, 1985, ch. 5
(the standardized mean difference and its exact small-sample correction).
M. Borenstein, L. V. Hedges, J. P. T. Higgins and H. R. Rothstein, *Introduction to
Meta-Analysis*, Wiley, 2009, ch. 4 (the variance of d and of g = J d).
B. L. Welch, Biometrika 34, 1947 (the t interval for a difference of means with unequal variances).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from tailgauge.core.classical import ClassicalInterval
from tailgauge.core.compare.contrasts import Difference
from tailgauge.core.compare.warnings import IntervalWarnings, Warnings, finite_or_none
from tailgauge.core.compare.paired import Resampled, Stats
from tailgauge.core.compare.vocabulary import EFFECT_ESTIMATOR, WELCH_ASSUMPTIONS
from tailgauge.core.describe import Description
from tailgauge.core.resample import Interval, IntervalOptions
from tailgauge.core.weighted import WeightedData, WeightMeaning
from tailgauge.core.registry import WarningCode


@dataclass(frozen=True)
class StandardizedMeanDifference:
    """Hedges' g (``value``) and Cohen's d (``uncorrected``), second minus first over the pooled sd.

    ``standard_error_under_normality`` is the large-sample normal-theory standard error of g;
    ``interval`` and ``standard_error`` come from independent resampling of the two inputs.
    """

    value: float | None
    uncorrected: float | None
    correction_factor: float | None
    pooled_standard_deviation: float | None
    degrees_of_freedom: float | None
    first_n: float | None
    second_n: float | None
    standard_error_under_normality: float | None
    estimator: str
    interval: Interval | None = None
    standard_error: float | None = None


def hedges_correction(m: float) -> float:
    """Hedges' exact small-sample factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m > 1.

    Hedges & Olkin (1985), ch. 5; close to the usual approximation 1 - 3/(4m - 1). The gamma
    ratio is Pochhammer's symbol (x)_(1/2) = Gamma(x + 1/2) / Gamma(x), x = (m - 1)/2, which
    stays accurate for large m (a difference of log-gammas loses the factor's closeness to 1).
    """
    if m > 1e8:
        # The approximation's error is O(m^-2): below float64's resolution here, where the
        # gamma ratio itself would overflow for m near float64's limit.
        return 1.0 - 3.0 / (4.0 * m - 1.0)
    return float(special.poch((m - 1.0) / 2.0, 0.5)) / math.sqrt(m / 2.0)


def _sample_size(description: Description) -> float | None:
    """n of the effect size and of Welch's interval: the count of observations (the total count for
    tables and bins), Kish's effective size for reliability weights, none for probabilities."""
    meaning = description.conventions.weights
    if meaning == WeightMeaning.PROBABILITY.value:
        return None
    if meaning == WeightMeaning.RELIABILITY.value:
        return description.size.effective_n
    return description.size.n


def _sample_sd(sd, n: float, population: bool):
    """The sample standard deviation (divisor n - 1) from a description's sd (either convention)."""
    return sd * math.sqrt(n / (n - 1.0)) if population else sd


def standardized_mean_difference(
    described: tuple[Description, Description],
    estimates: tuple[Stats, Stats],
    resampled: Resampled | None,
    notes: Warnings,
    pending: IntervalWarnings,
) -> StandardizedMeanDifference:
    """Cohen's d and Hedges' g of second minus first.

    d = (mean2 - mean1) / s_pooled with the pooled sample variance
    s_pooled^2 = ((n1 - 1) s1^2 + (n2 - 1) s2^2) / (n1 + n2 - 2), s_i the sample standard
    deviations (divisor n_i - 1, whatever convention the descriptors use); g = J(m) d with
    Hedges' exact factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m = n1 + n2 - 2
    (Hedges & Olkin 1985, ch. 5, who call the uncorrected ratio g and the corrected one d; here
    the names follow the now usual Cohen's d and Hedges' g). J(m) is close to the usual
    approximation 1 - 3/(4m - 1). n is the count of observations for raw samples, the total
    count for tables and bins, Kish's effective size for reliability weights; probabilities
    have no sample size, so nothing is defined for them.

    ``standard_error_under_normality`` is J sqrt((n1 + n2)/(n1 n2) + d^2 / (2 (n1 + n2)))
    (the large-sample variance of d, Hedges & Olkin 1985, ch. 5; Var(g) = J^2 Var(d),
    Borenstein et al. 2009, ch. 4). The bootstrap interval resamples both inputs with n1, n2
    and J fixed at the data's values.

    Undefined (``effect_size_undefined``): a probability table, n1 + n2 - 2 <= 1, an undefined
    mean or standard deviation, or zero spread in both inputs; ``not_representable`` when a
    result overflows float64.
    """
    n1, n2 = (_sample_size(description) for description in described)

    def undefined(why: str) -> StandardizedMeanDifference:
        notes.add(WarningCode.EFFECT_SIZE_UNDEFINED, f"the standardized mean difference is undefined: {why}",
                  ["standardized_mean_difference"])
        m = None if n1 is None or n2 is None else n1 + n2 - 2.0
        return StandardizedMeanDifference(None, None, None, None, m, n1, n2, None, EFFECT_ESTIMATOR)

    if n1 is None or n2 is None:
        return undefined("a probability table is a population and has no sample size for the pooled variance")
    m = n1 + n2 - 2.0
    if not math.isfinite(m):
        notes.add(WarningCode.NOT_REPRESENTABLE, "n1 + n2 is beyond float64's range, so the standardized mean "
                  "difference is not computed", ["standardized_mean_difference"])
        return StandardizedMeanDifference(None, None, None, None, None, n1, n2, None, EFFECT_ESTIMATOR)
    if m <= 1.0:
        return undefined(f"Hedges' correction needs n1 + n2 - 2 > 1; here it is {m:g}")
    first, second = estimates
    means = (first["mean"], second["mean"])
    sds = (first["standard_deviation"], second["standard_deviation"])
    if None in means or None in sds:
        return undefined("a mean or standard deviation of an input is undefined (see its warnings)")
    populations = tuple(d.conventions.convention == "population" for d in described)
    sizes = (n1, n2)

    def pooled(a: Stats, b: Stats):
        # A defined standard deviation implies n > 1 (one observation leaves it undefined).
        s1 = _sample_sd(a["standard_deviation"], n1, populations[0])
        s2 = _sample_sd(b["standard_deviation"], n2, populations[1])
        largest = np.maximum(s1, s2)
        r1, r2 = s1 / largest, s2 / largest
        return largest * np.sqrt(((n1 - 1.0) * r1 * r1 + (n2 - 1.0) * r2 * r2) / m)

    correction = hedges_correction(m)

    def hedges_g(a: Stats, b: Stats):
        return correction * (b["mean"] - a["mean"]) / pooled(a, b)

    if sds[0] == 0.0 and sds[1] == 0.0:
        return undefined("both inputs have zero spread, so there is no standard deviation to scale by")
    with np.errstate(all="ignore"):
        spread = float(pooled(first, second))
        d = float((np.float64(second["mean"]) - np.float64(first["mean"])) / spread)
    if not (math.isfinite(spread) and math.isfinite(d)):
        notes.add(WarningCode.NOT_REPRESENTABLE, "the standardized mean difference is outside the range of float64",
                  ["standardized_mean_difference"])
        return StandardizedMeanDifference(
            None, None, correction, finite_or_none(spread), m, n1, n2, None, EFFECT_ESTIMATOR
        )
    g = correction * d
    total = sizes[0] + sizes[1]
    # 1/n1 + 1/n2 and (d / sqrt(2 total))^2: neither n1 n2 nor d^2 is formed, so huge counts
    # or a huge d cannot overflow into inf / inf.
    q = d / math.sqrt(2.0 * total)
    error = correction * math.sqrt(1.0 / sizes[0] + 1.0 / sizes[1] + q * q)
    if not math.isfinite(error):
        notes.add(WarningCode.NOT_REPRESENTABLE, "the standard error of the standardized mean difference is outside "
                  "float64's range", ["standardized_mean_difference"])
        error = None
    result = StandardizedMeanDifference(g, d, correction, spread, m, n1, n2, error, EFFECT_ESTIMATOR)
    if resampled is not None:
        bootstrapped = resampled.interval(hedges_g, g)
        pending.record("standardized_mean_difference", bootstrapped)
        result = dataclasses.replace(
            result, interval=bootstrapped.interval, standard_error=bootstrapped.standard_error
        )
    return result


def welch(
    differences: dict[str, Difference],
    described: tuple[Description, Description],
    data: tuple[WeightedData, WeightedData],
    interval: IntervalOptions | None,
) -> None:
    """Welch's t interval for the difference of means, beside the bootstrap one (Welch 1947).

    se = sqrt(s1^2/n1 + s2^2/n2) with the sample variances; degrees of freedom by
    Welch-Satterthwaite. Only for counted observations (raw samples, count tables, bins), n >= 2
    each, and when intervals are asked for, as ``describe`` does for the t interval of a mean.
    Sets ``differences["mean"]``'s classical interval and standard error in place; otherwise
    (including any non-finite result) leaves it without one.
    """
    mean = differences["mean"]
    if interval is None or mean.value is None:
        return
    if not all(d.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY) for d in data):
        return
    sizes = [_sample_size(d) for d in described]
    sds = [d.descriptors["standard_deviation"].value for d in described]
    if any(n is None or n < 2 for n in sizes) or any(sd is None for sd in sds):
        return
    errors = [
        _sample_sd(sd, n, d.conventions.convention == "population") / math.sqrt(n)
        for sd, n, d in zip(sds, sizes, described)
    ]
    largest = max(errors)
    if largest == 0.0 or not math.isfinite(largest):
        return
    r1, r2 = errors[0] / largest, errors[1] / largest
    se = largest * math.hypot(r1, r2)
    dof = (r1 * r1 + r2 * r2) ** 2 / (r1**4 / (sizes[0] - 1.0) + r2**4 / (sizes[1] - 1.0))
    half = float(stats.t.ppf(0.5 + interval.level / 2.0, dof)) * se
    low, high = finite_or_none(mean.value - half), finite_or_none(mean.value + half)
    if low is None or high is None or not math.isfinite(se):
        return
    differences["mean"] = dataclasses.replace(
        mean,
        classical_interval=ClassicalInterval(low, high, interval.level, "welch_t", None, WELCH_ASSUMPTIONS),
        classical_standard_error=se,
    )
