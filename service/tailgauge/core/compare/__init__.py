"""Two distributions side by side.

:func:`compare` describes both inputs by the same options and contrasts them: differences
(second minus first) of every scalar descriptor, ratios of the scale descriptors, the
standardized mean difference (Cohen's d and Hedges' g), quantile shifts, both sets of quantiles
on the z scale, a two-sample test, and bootstrap intervals for every contrast from independent
resampling of the two inputs.

Like ``describe``, nothing here returns NaN: an undefined contrast is ``None`` with a warning
saying why.

Modules (each imports only those above it; none imports this package's ``__init__``):

    vocabulary    the comparison's copies of descriptor facts and its warning codes (the
                  descriptor registry's stand-in: switching to it changes this module alone)
    warnings      the warnings collector, why a contrast is undefined or has no interval
    paired        the two inputs' resamples paired into replicates of a contrast, and its interval
    contrasts     differences, ratios, quantile shifts, standardized quantiles
    effect_size   Cohen's d and Hedges' g, Welch's interval of the difference of means
    two_sample    Kolmogorov-Smirnov and chi-square tests of equal distributions
    assembly      compare(): describe both, contrast, gather the warnings

Scores of values against one description (:func:`~tailgauge.core.scoring.standardize`) compare
nothing; they live in :mod:`tailgauge.core.scoring`.

References
----------
L. V. Hedges and I. Olkin, *Statistical Methods for Meta-Analysis*, Academic Press, 1985, ch. 5
(the standardized mean difference and its exact small-sample correction).
M. Borenstein, L. V. Hedges, J. P. T. Higgins and H. R. Rothstein, *Introduction to
Meta-Analysis*, Wiley, 2009, ch. 4 (the variance of d and of g = J d).
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
ch. 2 and 8 (two-sample bootstrap: each sample resampled on its own), ch. 14 (BCa).
B. L. Welch, Biometrika 34, 1947 (the t interval for a difference of means with unequal variances).
"""

from tailgauge.core.compare.assembly import Comparison, Contrasts, compare, contrast, restricted_comparison, side_seeds
from tailgauge.core.compare.contrasts import Difference, QuantileShift, StandardizedPair, StandardizedQuantile
from tailgauge.core.compare.effect_size import StandardizedMeanDifference, hedges_correction
from tailgauge.core.compare.warnings import ComparisonWarning
from tailgauge.core.compare.two_sample import KS_EXACT_LIMIT, SMALL_EXPECTED_COUNT, DistributionTest
from tailgauge.core.compare.vocabulary import COMPARISON_WARNINGS, SCALE_DESCRIPTORS

__all__ = [
    "restricted_comparison",
    "COMPARISON_WARNINGS",
    "KS_EXACT_LIMIT",
    "SCALE_DESCRIPTORS",
    "SMALL_EXPECTED_COUNT",
    "Comparison",
    "Contrasts",
    "ComparisonWarning",
    "Difference",
    "DistributionTest",
    "QuantileShift",
    "StandardizedMeanDifference",
    "StandardizedPair",
    "StandardizedQuantile",
    "compare",
    "contrast",
    "hedges_correction",
    "side_seeds",
]
