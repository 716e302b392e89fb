"""The comparison's copies of facts about descriptors and warnings, gathered in one place.

Everything here restates what the descriptor registry is to own once (which descriptors are
contrasted and how, which get a bootstrap interval and why not, estimator labels and test
references, and the closed vocabulary of warning codes). The rest of the package asks this
module, never ``describe`` or ``resample`` directly, so switching to the registry changes this
module alone.
"""

from __future__ import annotations

from typing import Literal, get_args

from tailgauge.core import resample
from tailgauge.core.describe import SCALAR_DESCRIPTORS

# Every scalar descriptor has a difference, second minus first.
DIFFERENCE_DESCRIPTORS = SCALAR_DESCRIPTORS
# Descriptors measuring spread in the data's own units: their ratio second / first is reported too.
SCALE_DESCRIPTORS = (
    "variance",
    "standard_deviation",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "l_scale",
)

# Why some contrasts get no bootstrap interval (the rules ``describe`` applies to descriptors).
EXTREMES = "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)"
NOT_RESAMPLED = {
    "minimum": EXTREMES,
    "maximum": EXTREMES,
    "range": EXTREMES,
    "lag1_autocorrelation": "resampling independent observations destroys the serial order it measures",
}
NO_RULE = "the resampling engine does not resample this descriptor (describe gives it no interval either)"


def no_interval_reason(name: str) -> str | None:
    """Why a contrast of descriptor ``name`` gets no bootstrap interval; ``None`` when it gets one."""
    if name in resample.INTERVAL_DESCRIPTORS:
        return None
    return NOT_RESAMPLED.get(name, NO_RULE)


def no_quantile_interval_reason(probability: float) -> str | None:
    """Why a contrast of the quantile at ``probability`` gets no bootstrap interval (the
    quantiles at 0 and 1 are the extremes); ``None`` when it gets one."""
    return EXTREMES if probability in (0.0, 1.0) else None


# Which differences mix definitions when the two inputs' estimators differ: for each of the
# descriptions' conventions, its label and the members it affects ("quantile_shifts" as a
# whole, the others as differences.<name>).
CONVENTION_MEMBERS = (
    ("convention", "convention", ("variance", "standard_deviation", "coefficient_of_variation")),
    ("skewness", "skewness estimator", ("skewness",)),
    ("kurtosis", "kurtosis estimator", ("kurtosis", "excess_kurtosis")),
    ("quantile_definition", "quantile definition", ("median", "interquartile_range", "quantile_shifts")),
)

EFFECT_ESTIMATOR = (
    "Hedges' g = J(m) (mean2 - mean1) / s_pooled, s_pooled^2 = ((n1 - 1) s1^2 + (n2 - 1) s2^2) / m, "
    "m = n1 + n2 - 2, J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (Hedges & Olkin 1985); "
    "uncorrected: Cohen's d = g / J(m)"
)
WELCH_ASSUMPTIONS = "normal data, or samples large enough for each mean to be normal; variances may differ"
KS_REFERENCE = (
    "Kolmogorov-Smirnov two-sample test; scipy.stats.ks_2samp (Hodges, Arkiv for Matematik 3, 1958)"
)
CHI_SQUARE_REFERENCE = (
    "Pearson chi-square test of homogeneity, no continuity correction; scipy.stats.chi2_contingency"
)

# The warning codes the comparison emits for its own contrasts (each input's description brings
# its own warnings), each with its meaning in catalog.py.
ComparisonWarning = Literal[
    "difference_undefined",
    "ratio_undefined",
    "effect_size_undefined",
    "not_representable",
    "conventions_differ",
    "distribution_test_ties",
    "chi_square_small_expected",
    "bca_fallback",
    "interval_undefined",
    "interval_not_offered",
]
COMPARISON_WARNINGS: frozenset[str] = frozenset(get_args(ComparisonWarning))
