"""What a comparison contrasts, how, and which warnings it emits.

Which descriptors are contrasted and which get a bootstrap interval (and why not) are read from
the descriptor registry; what is the comparison's own lives here: which conventions affect which
members, the effect size's estimator label, the tests' references, and which of the registry's
warning codes a comparison emits. The rest of the package asks this module.
"""

from __future__ import annotations

from tailgauge.core import registry
from tailgauge.core.registry import WarningCode

# Every scalar descriptor has a difference, second minus first; the scales have a ratio too.
DIFFERENCE_DESCRIPTORS = registry.SCALAR_DESCRIPTORS
SCALE_DESCRIPTORS = registry.SCALE_DESCRIPTORS


def no_interval_reason(name: str) -> str | None:
    """Why a contrast of descriptor ``name`` gets no bootstrap interval (the registry's reason for
    the descriptor itself); ``None`` when it gets one."""
    return registry.bootstrap_reason(name)


def no_quantile_interval_reason(probability: float) -> str | None:
    """Why a contrast of the quantile at ``probability`` gets no bootstrap interval (the
    quantiles at 0 and 1 are the extremes); ``None`` when it gets one."""
    return registry.extremes_reason() if probability in (0.0, 1.0) else None


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
# its own warnings); all come from the registry's vocabulary, which gives each its meaning.
COMPARISON_WARNINGS: frozenset[WarningCode] = frozenset({
    WarningCode.DIFFERENCE_UNDEFINED,
    WarningCode.RATIO_UNDEFINED,
    WarningCode.EFFECT_SIZE_UNDEFINED,
    WarningCode.NOT_REPRESENTABLE,
    WarningCode.CONVENTIONS_DIFFER,
    WarningCode.DISTRIBUTION_TEST_TIES,
    WarningCode.CHI_SQUARE_SMALL_EXPECTED,
    WarningCode.BINS_COARSENED,
    WarningCode.BCA_FALLBACK,
    WarningCode.INTERVAL_UNDEFINED,
    WarningCode.INTERVAL_NOT_OFFERED,
})
