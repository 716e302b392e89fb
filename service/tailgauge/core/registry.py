"""The descriptor registry: every descriptor, response member and warning code of the service, once.

Each descriptor is named here with its family, what it needs (the power sums, the extremes, the
quantiles, the values themselves, their order, whole counts), whether the bootstrap gives it an
interval (and why not), whether it has a classical interval, whether it is a scale in the data's
units, and its catalog text (definition, conventions, when it is undefined, reference) as served
by GET /v1/catalog. The descriptor lists the rest of the core uses (``SCALAR_DESCRIPTORS`` and its
subsets, the interval eligibility, what partial states cannot give) are derived from this table,
so a new descriptor is one entry here plus the code that computes it.

This module is a data table and exceeds the house's ~500-line guide on purpose: splitting the
table would only spread one fact over several files. The warning codes, a second table, are in
``warning_codes`` and re-exported here.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

# The warning codes' vocabulary lives in its own module (a table of its own); it is part of this
# registry and imported from here.
from tailgauge.core.warning_codes import WarningCode  # noqa: F401

Family = Literal["location", "spread", "shape", "extremes", "serial", "robust_shape", "l_moment", "tail"]
# What a descriptor is computed from. "sums": the shifted central power sums (what partial states
# carry); "extremes": the minimum and maximum; "quantiles": order statistics (a quantile sketch
# can stand in); "values": the observed values themselves; "order": their order of observation;
# "whole_counts": observations with whole counts (not fractional weights).
Need = Literal["sums", "extremes", "quantiles", "values", "order", "whole_counts"]

_SUMS: frozenset[Need] = frozenset({"sums"})
_EXTREMES: frozenset[Need] = frozenset({"extremes"})
_QUANTILES: frozenset[Need] = frozenset({"quantiles"})
_VALUES: frozenset[Need] = frozenset({"values"})

# Why the ordinary bootstrap gives some descriptors no interval (Bickel & Freedman 1981 for extremes).
_INCONSISTENT_FOR_EXTREMES = "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)"
_SERIAL_ORDER_DESTROYED = "resampling independent observations destroys the serial order it measures"
# The half-sample mode is a mode estimator. No result we know of establishes that the ordinary
# bootstrap is consistent for it, and for mode estimators it is known to fail: Romano, "Bootstrapping
# the mode", Ann. Inst. Statist. Math. 40(3), 565-586, 1988 (kernel estimates of the mode resampled
# from the empirical distribution, unless the bandwidth is suboptimal), and Leger & MacGibbon, "On the
# bootstrap in cube root asymptotics", CRM-2561, 1998 (Chernoff's mode estimator, which converges at
# n^(1/3)); both abstracts read when this was written. That no nonparametric mode estimator reaches
# the root-n rate is recalled, not looked up.
_MODE_NOT_ESTABLISHED = (
    "the ordinary bootstrap is not known to be consistent for the half-sample mode, and it is inconsistent "
    "for mode estimators that converge slower than root-n (Romano 1988; Leger & MacGibbon 1998)"
)
NOT_RESAMPLED = "bootstrap intervals are not offered for this descriptor"
# Why the engine leaves out a descriptor it resamples when the request is large (see
# ``resample.budget.costly_left_out``); the descriptor's facts mark it ``costly``.
TOO_COSTLY = "resampling it is too costly for these data within the budget"
# Why the bag of little bootstraps leaves out Hill's index: each resample repeats a subset of
# n^0.7 values, so its k largest are few values tied many times, which inflates the estimate.
FEW_TAIL_VALUES = "the bag of little bootstraps draws from subsets whose largest values repeat: Hill's index is biased there"


@dataclass(frozen=True)
class CatalogEntry:
    """One entry of GET /v1/catalog: exactly the fields served, in the order served."""

    name: str
    member: str  # where it appears in a descriptor response
    definition: str
    conventions: tuple[str, ...]
    undefined_when: tuple[str, ...]
    reference: str


@dataclass(frozen=True)
class DescriptorFacts:
    """Everything the service states about one scalar descriptor."""

    name: str
    family: Family
    needs: frozenset[Need]
    # The bootstrap engine resamples it; ``bootstrap_fails`` says why it must not where the
    # ordinary bootstrap is known to fail or not known to be consistent.
    bootstrap: bool
    bootstrap_fails: str | None
    classical: bool  # a classical (t, chi-square or order-statistic) interval exists for it
    scale: bool  # a spread in the data's own units: two inputs compare by ratio too
    definition: str
    conventions: tuple[str, ...]
    undefined_when: tuple[str, ...]
    reference: str

    @property
    def undefined_for_one(self) -> bool:
        """A single observation (sample convention) leaves it undefined."""
        return _ONE in self.undefined_when

    @property
    def undefined_for_constant(self) -> bool:
        """Constant data (zero spread) leave it undefined."""
        return _CONSTANT in self.undefined_when

    def catalog_entry(self) -> CatalogEntry:
        return CatalogEntry(
            self.name, "descriptors", self.definition, self.conventions, self.undefined_when, self.reference
        )


def _descriptor(
    name: str,
    definition: str,
    conventions: tuple[str, ...],
    undefined_when: tuple[str, ...],
    reference: str,
    *,
    family: Family,
    needs: frozenset[Need],
    bootstrap: bool = True,
    bootstrap_fails: str | None = None,
    classical: bool = False,
    scale: bool = False,
) -> DescriptorFacts:
    resampled = bootstrap and bootstrap_fails is None
    return DescriptorFacts(
        name, family, needs, resampled, bootstrap_fails, classical, scale, definition, conventions, undefined_when,
        reference,
    )


_ONE = "a single observation (sample convention)"
_CONSTANT = "constant data (zero spread)"
_OPEN = "an open-ended bin holds data"

# In the order of every response's ``descriptors`` and of the catalog.
DESCRIPTORS: tuple[DescriptorFacts, ...] = (
    _descriptor(
        "mean", "sum w x / sum w (bins: at their midpoints; a histogram with its sum: sum / count, exact, even "
          "while an open-ended bin holds data)", (), (_OPEN,),
          "arithmetic mean; shifted-data summation (Chan, Golub & LeVeque 1983)",
        family="location", needs=_SUMS, classical=True,
    ),
    _descriptor(
        "median", "average of the two middle order statistics; weighted: smallest x with F(x) >= 1/2 (averaged at an "
          "exact half); probabilities: smallest x with F(x) >= 1/2; bins: interpolated within the bin holding N/2",
          ("weights",), ("bins: the median falls inside an open-ended bin",), "Hyndman & Fan 1996",
        family="location", needs=_QUANTILES, classical=True,
    ),
    _descriptor(
        "variance", "sum w (x - mean)^2 / divisor; divisor n - 1 (sample), n (population), V1 - V2/V1 (reliability weights)",
          ("convention", "weights", "sheppard_correction"), (_ONE, _OPEN),
          "Bessel's correction; reliability weights: e.g. GNU Scientific Library manual, weighted samples; Sheppard "
          "1898 for bins of equal width h: s^2 - h^2/12 (sample), m2 - h^2/12 (population)",
        family="spread", needs=_SUMS, classical=True, scale=True,
    ),
    _descriptor(
        "standard_deviation", "square root of the variance", ("convention", "weights"), (_ONE, _OPEN),
          "as variance",
        family="spread", needs=_SUMS, classical=True, scale=True,
    ),
    _descriptor(
        "coefficient_of_variation", "standard deviation / mean", ("convention",),
          (_ONE, _OPEN, "negative values (not a ratio scale)", "mean zero"), "Pearson 1896",
        family="spread", needs=_SUMS,
    ),
    _descriptor(
        "skewness", "g1 = m3 / m2^1.5; G1 = g1 sqrt(n(n-1))/(n-2); b1 = g1 ((n-1)/n)^1.5",
          ("convention", "skewness_estimator"), (_ONE, _CONSTANT, "n < 3 (G1; g1 and b1 need n >= 2)", _OPEN),
          "Joanes & Gill, The Statistician 47, 1998",
        family="shape", needs=_SUMS,
    ),
    _descriptor(
        "kurtosis", "excess kurtosis + 3 (normal = 3)", ("convention", "kurtosis_estimator"),
          (_ONE, _CONSTANT, "n < 4 (G2; g2 and b2 need n >= 2)", _OPEN), "Joanes & Gill 1998",
        family="shape", needs=_SUMS,
    ),
    _descriptor(
        "excess_kurtosis", "g2 = m4 / m2^2 - 3; G2 = (n-1)/((n-2)(n-3)) ((n+1) g2 + 6); b2 = (g2 + 3)((n-1)/n)^2 - 3",
          ("convention", "kurtosis_estimator"), (_ONE, _CONSTANT, "n < 4 (G2; g2 and b2 need n >= 2)", _OPEN),
          "Joanes & Gill 1998",
        family="shape", needs=_SUMS,
    ),
    _descriptor(
        "minimum", "smallest value (a histogram's min when it sends one)", (),
          ("bins (values unknown), unless a histogram sends its min",), "order statistic x(1)",
        family="extremes", needs=_EXTREMES, bootstrap_fails=_INCONSISTENT_FOR_EXTREMES,
    ),
    _descriptor(
        "maximum", "largest value (a histogram's max when it sends one)", (),
          ("bins (values unknown), unless a histogram sends its max",), "order statistic x(n)",
        family="extremes", needs=_EXTREMES, bootstrap_fails=_INCONSISTENT_FOR_EXTREMES,
    ),
    _descriptor(
        "range", "maximum - minimum", (), (_ONE, "bins"), "order statistics",
        family="spread", needs=_EXTREMES, bootstrap_fails=_INCONSISTENT_FOR_EXTREMES, scale=True,
    ),
    _descriptor(
        "interquartile_range", "Q(0.75) - Q(0.25) by the quantile rule in use",
          ("quantile_type",), (_ONE, "a quartile in an open bin", "types 3-9 with fractional weights"),
          "Hyndman & Fan 1996",
        family="spread", needs=_QUANTILES, scale=True,
    ),
    _descriptor(
        "median_absolute_deviation", "median of |x - median| (raw)", ("weights",),
          (_ONE, "bins: it reaches into an open bin"), "Hampel 1974",
        family="spread", needs=_VALUES, scale=True,
    ),
    _descriptor(
        "median_absolute_deviation_normal", "1.482602218505602 x median |x - median| = MAD / Phi^-1(3/4), consistent for the normal sigma", (),
          (_ONE,), "Hampel 1974; Rousseeuw & Croux 1993",
        family="spread", needs=_VALUES, scale=True,
    ),
    _descriptor(
        "lag1_autocorrelation", "r(1) = sum_{i<n} (x_i - mean)(x_{i+1} - mean) / sum (x_i - mean)^2", (),
          (_ONE, _CONSTANT, "weighted data, tables and bins (no observation order)"),
          "NIST StRD univariate summary statistics",
        family="serial", needs=frozenset({"values", "order"}), bootstrap_fails=_SERIAL_ORDER_DESTROYED,
    ),
    _descriptor(
        "quartile_skewness", "(Q3 + Q1 - 2 Q2) / (Q3 - Q1)", ("quantile_type",),
          (_ONE, _CONSTANT, "Q3 = Q1"), "Bowley 1901",
        family="robust_shape", needs=_QUANTILES,
    ),
    _descriptor(
        "octile_kurtosis", "((E7 - E5) + (E3 - E1)) / (E6 - E2), E_i the i/8 quantile",
          ("quantile_type",), (_ONE, _CONSTANT, "E6 = E2"), "Moors, The Statistician 37, 1988",
        family="robust_shape", needs=_QUANTILES,
    ),
    _descriptor(
        "octile_excess_kurtosis", "octile kurtosis - 1.2330951... (its value for any normal)",
          ("quantile_type",), (_ONE, _CONSTANT, "E6 = E2"), "Moors 1988",
        family="robust_shape", needs=_QUANTILES,
    ),
    _descriptor(
        "medcouple", "median of h(l, u) = ((u - m) + (l - m)) / (u - l) over l <= m <= u; sign kernel for ties at the median",
          (), (_ONE, _CONSTANT, "bins (values unknown)"), "Brys, Hubert & Struyf, JCGS 13, 2004",
        family="robust_shape", needs=_VALUES,
    ),
    _descriptor(
        "half_sample_mode", "repeatedly keep the shortest window holding half the observations; mean of the final two or "
          "closest pair of three", (), ("bins, probabilities and fractional weights",),
          "Bickel & Fruhwirth, CSDA 50, 2006",
        family="location", needs=frozenset({"values", "whole_counts"}), bootstrap_fails=_MODE_NOT_ESTABLISHED,
    ),
    _descriptor(
        "mean_median_gap", "(mean - median) / standard deviation", ("convention",),
          (_ONE, _CONSTANT, _OPEN), "Pearson's second skewness coefficient / 3",
        family="robust_shape", needs=frozenset({"sums", "quantiles"}),
    ),
    _descriptor(
        "l_location", "l1 = b0 (PWM b_r = n^-1 sum C(j-1, r)/C(n-1, r) x_(j))", ("weights",),
          ("n < 4 (sample estimators)", _OPEN), "Hosking, JRSS-B 52, 1990",
        family="l_moment", needs=_VALUES,
    ),
    _descriptor(
        "l_scale", "l2 = 2 b1 - b0", ("weights",), (_ONE, "n < 4", _OPEN), "Hosking 1990",
        family="l_moment", needs=_VALUES, scale=True,
    ),
    _descriptor(
        "l_skewness", "t3 = l3 / l2, l3 = 6 b2 - 6 b1 + b0", ("weights",),
          (_ONE, _CONSTANT, "n < 4", _OPEN), "Hosking 1990",
        family="l_moment", needs=_VALUES,
    ),
    _descriptor(
        "l_kurtosis", "t4 = l4 / l2, l4 = 20 b3 - 30 b2 + 12 b1 - b0", ("weights",),
          (_ONE, _CONSTANT, "n < 4", _OPEN), "Hosking 1990",
        family="l_moment", needs=_VALUES,
    ),
)


_TRIM = "g = floor(gamma n) per side for whole counts (scipy.stats.trim_mean's rule), gamma W for other weights"
_OPEN_WINDOW = "its window reaches an open-ended bin holding data"
# Location beyond the arithmetic mean and Hill's tail index (core/location_means.py, core/tail_measures.py).
DESCRIPTORS += (
    _descriptor(
        "trimmed_mean", f"(1/(W - 2g)) integral of the step quantile function Q over (g, W - g]; {_TRIM}; bins: the "
          "interpolated grouped quantile function", ("trim_proportion", "weights"), (_OPEN_WINDOW,),
          "Tukey & McLaughlin, Sankhya A 25, 1963",
        family="location", needs=_VALUES,
    ),
    _descriptor(
        "winsorized_mean", f"(g Q(g+) + integral_g^(W-g) Q + g Q(W - g)) / W: the g smallest set to x(g+1), the g "
          f"largest to x(n-g); {_TRIM}", ("trim_proportion", "weights"), (_OPEN_WINDOW,),
          "Tukey & McLaughlin 1963; scipy.stats.mstats.winsorize",
        family="location", needs=_VALUES,
    ),
    _descriptor(
        "geometric_mean", "exp(sum w ln x / W) (bins: at their midpoints)", ("weights",),
          ("zero or negative values (bins: reaching below zero)", _OPEN), "scipy.stats.gmean",
        family="location", needs=_VALUES,
    ),
    _descriptor(
        "harmonic_mean", "W / sum (w / x) (bins: at their midpoints)", ("weights",),
          ("zero or negative values (bins: reaching below zero)", _OPEN), "scipy.stats.hmean",
        family="location", needs=_VALUES,
    ),
    _descriptor(
        "upper_tail_index", "Hill's alpha = k / sum_{i=1..k} ln(X_(n-i+1) / X_(n-k)) over the k largest observations, "
          "k = options.tail_count or round(sqrt(n)) (a common rule of thumb); asymptotic standard error alpha / "
          "sqrt(k). A smaller index is a heavier tail: below 4 the population kurtosis does not exist, below 2 the "
          "variance does not", ("tail_count",),
          ("fewer than 50 observations", "X_(n-k) <= 0 (a non-positive tail threshold)", _CONSTANT,
           "bins, probabilities, reliability or fractional weights"),
          "Hill, Annals of Statistics 3, 1975; asymptotic normality: Hall, JRSS-B 44, 1982",
        family="tail", needs=frozenset({"values", "whole_counts"}), classical=True,
    ),
)


# The response members beside the scalar descriptors, as the catalog describes them.
MEMBERS: tuple[CatalogEntry, ...] = (
    CatalogEntry("moments.raw", "moments", "plug-in E[x^k], k = 1 .. moment_order", ("moment_order",),
          (_OPEN, "beyond float64's range"), "moments about zero"),
    CatalogEntry("moments.central", "moments", "plug-in E[(x - mean)^k]", ("moment_order", "sheppard_correction"),
          (_OPEN, "beyond float64's range"), "central moments; Sheppard 1898 for orders 2 and 4 of bins"),
    CatalogEntry("moments.standardized", "moments", "E[(x - mean)^k] / sigma^k (plug-in sigma)", ("moment_order",),
          (_ONE, _CONSTANT, _OPEN), "standardized moments"),
    CatalogEntry("quantiles", "quantiles", "Q(p) at each requested probability by the quantile rule in use",
          ("probabilities", "quantile_type"), ("p falls in an open bin", "types 3-9 with fractional weights"),
          "Hyndman & Fan, The American Statistician 50, 1996"),
    CatalogEntry("modes", "modes",
          "every value with the largest count; bins: the interpolated mode of each modal class (largest density)",
          (), ("every value occurs once",), "grouped mode: Kendall & Stuart, vol. 1"),
    CatalogEntry("shape_estimators", "shape_estimators", "g1, G1, b1 and g2, G2, b2 side by side, with normal-theory "
          "standard errors", (), (_ONE, _CONSTANT, "n < 2; G1: n < 3; G2: n < 4"), "Joanes & Gill 1998"),
    CatalogEntry("tail_contributions", "tail_contributions",
          "per outcome: third = w (x - mean)^3 / (W sigma^3), fourth = w (x - mean)^4 / (W sigma^4); they sum to "
          "g1 and g2 + 3", (), (_ONE, _CONSTANT, _OPEN), "decomposition of the plug-in standardized moments"),
    CatalogEntry("grouping", "grouping", "bins and open ends as sent, bin width, modal classes, whether Sheppard's "
          "corrections applied (central moments m2 - h^2/12 and m4 - h^2 m2/2 + 7 h^4/240; the variance s^2 - h^2/12 "
          "under the sample convention, m2 - h^2/12 under the population one)",
          ("sheppard_correction",), ("input other than bins or a histogram",), "Sheppard, Proc. London Math. Soc. 29, 1898"),
    CatalogEntry("grouping.known_summary", "grouping",
          "a histogram's own count, sum, min and max as sent, and the descriptors taken from them, exact (exact): "
          "the mean as sum / count (with every bin closed, each bin's midpoint moved by one shift to that mean, so "
          "its interval and the moments agree), the minimum, maximum and range; min and max also close the outer "
          "buckets. Histogram layouts: cumulative (le bounds, cumulative counts), explicit (bounds, one more "
          "count), exponential (bucket k covers (base^k, base^(k+1)], base = 2^(2^-scale), boundaries correctly "
          "rounded; a zero bucket of threshold 0 is spread over [-w, w], w the nearest boundary)", (),
          ("bins sent as bins", "no sum, min or max sent"),
          "OpenMetrics histogram exposition; OpenTelemetry metrics data model (histogram and exponential "
          "histogram data points)"),
    CatalogEntry("normality.skewness_test", "normality", "D'Agostino's z transform of g1", (),
          ("n < 8", "not a sample with whole counts"), "D'Agostino, Biometrika 57, 1970"),
    CatalogEntry("normality.kurtosis_test", "normality", "Anscombe & Glynn's z transform of b2", (),
          ("n < 5", "not a sample with whole counts"), "Anscombe & Glynn, Biometrika 70, 1983"),
    CatalogEntry("normality.omnibus_k2", "normality", "K^2 = Z_skew^2 + Z_kurt^2, chi-square(2)", (),
          ("n < 8", "not a sample with whole counts"), "D'Agostino & Pearson, Biometrika 60, 1973"),
    CatalogEntry("normality.jarque_bera", "normality", "JB = n/6 (g1^2 + (b2 - 3)^2 / 4), chi-square(2)", (),
          ("n < 2", "not a sample with whole counts"), "Jarque & Bera, Economics Letters 6, 1980"),
    CatalogEntry("interval", "descriptors.*, quantiles[*]",
          "bootstrap interval: percentile, basic (2 estimate - reversed percentile) or BCa", ("interval",),
          ("no options.interval", "minimum, maximum, range, p = 0 or 1 (the bootstrap is inconsistent for extremes)",
           "lag-1 autocorrelation (resampling destroys the order)",
           "half-sample mode (the bootstrap is not known to be consistent for it)",
           "medcouple, when resampling it is too costly for the data within the budget",
           "upper_tail_index under the bag of little bootstraps (subsets repeat their largest values)",
           "a probability table (a population)"),
          "Efron & Tibshirani 1993 (eq. 14.10); bag of little bootstraps: Kleiner et al., JRSS-B 76, 2014"),
    CatalogEntry("standard_error", "descriptors.*, quantiles[*]", "standard deviation of the bootstrap replicates",
          ("interval",), ("no options.interval",), "Efron & Tibshirani 1993"),
    CatalogEntry("classical_interval", "descriptors.*, quantiles[*]",
          "Student's t (mean; for a series sent with order as_sent, student_t_effective_n: the effective n in place "
          "of n, and no other classical interval), chi-square (variance, sd; normal data only), order statistics x(l), x(u) with "
          "coverage P(l <= Binomial(n, p) <= u - 1) (median, quantiles)", ("interval",),
          ("no options.interval", "weights that are not whole counts", "n too small for the level"),
          "Conover, Practical Nonparametric Statistics, 3rd ed., section 3.2"),
    CatalogEntry("effective_n", "size",
          "reliability weights: Kish's (sum w)^2 / sum w^2; a series sent with order as_sent: n / tau, tau = (-c0 + "
          "2 sum_m (c_2m + c_2m+1)) / c0 over the initial pairs that stay positive (c_k the autocovariances, divisor "
          "n), tau at least 1 / log10(n) (1 for n <= 10): above n when neighbours are negatively correlated, at "
          "most n log10 n", ("order",),
          ("unweighted values without order as_sent", "tables, bins, probabilities", "constant data"),
          "Kish, Survey Sampling, 1965; Geyer, Statistical Science 7, 1992 (initial positive sequence)"),
    CatalogEntry("block_resampling", "resampling, descriptors.*, quantiles[*]",
          "with order as_sent each resample joins blocks of neighbours in the order sent: stationary (lengths "
          "geometric with mean L, wrapping), circular (length L, wrapping) or moving (length L, within the series); "
          "by default L = (2 G^2 / D)^(1/3) n^(1/3), G = sum lambda(k/M) |k| c_k, D = 2 g^2 (stationary) or "
          "4/3 g^2, g = sum lambda(k/M) c_k, lambda the flat-top window; BCa falls back to percentile (its "
          "jackknife assumes independent observations)", ("order", "block_scheme", "block_length", "interval"),
          ("no options.interval", "order exchangeable (single values are resampled)"),
          "Politis & Romano, JASA 89, 1994; Kunsch, Annals of Statistics 17, 1989; Politis & White, Econometric "
          "Reviews 23, 2004, corrected by Patton, Politis & White, Econometric Reviews 28, 2009"),
    CatalogEntry("differences", "comparison",
          "second minus first, for every scalar descriptor; interval from independent resampling of both inputs "
          "(replicate k: stat(second*_k) - stat(first*_k)); Welch's t interval for the mean", ("interval",),
          ("either input leaves the descriptor undefined",),
          "Efron & Tibshirani 1993, ch. 8 (two-sample bootstrap); Welch, Biometrika 34, 1947"),
    CatalogEntry("ratios", "comparison", "second / first, for the scale descriptors (variance, sd, range, IQR, MAD, "
          "l_scale)", ("interval",), ("the first input's value is zero", "either input leaves it undefined"),
          "Efron & Tibshirani 1993, ch. 8"),
    CatalogEntry("standardized_mean_difference", "comparison",
          "Hedges' g = J(m) (mean2 - mean1) / s_pooled, J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), "
          "m = n1 + n2 - 2; Cohen's d without J; n = counts, Kish's effective n for reliability weights",
          ("interval",), ("a probability table (no sample size)", "no spread in either input", "m <= 1"),
          "Hedges & Olkin, Statistical Methods for Meta-Analysis, 1985, ch. 5; Borenstein et al. 2009, ch. 4"),
    CatalogEntry("quantile_shifts", "comparison", "q2(p) - q1(p) at each requested probability", ("probabilities",),
          ("a quantile of either input is undefined",), "Doksum, Annals of Statistics 2, 1974 (shift function)"),
    CatalogEntry("standardized_quantiles", "comparison",
          "each input's quantiles as (q - mean) / sd and (q - median) / normal-consistent MAD, and second minus "
          "first: shapes compared free of location and scale", ("probabilities",),
          ("zero or undefined spread",), "standardization; Hampel 1974 for the MAD"),
    CatalogEntry("distribution_test", "comparison",
          "two-sample Kolmogorov-Smirnov (whole counts; exact up to 10000 per input, else asymptotic) or, when "
          "either input is binned (bins, histogram), Pearson's chi-square test of homogeneity on the common "
          "coarsening: cells between the finite edges both binned inputs share (observations counted into the "
          "bins' cells, upper edges included), listed in cell_edges", (),
          ("probabilities, reliability or fractional weights", "fewer than two cells holding data"),
          "scipy.stats.ks_2samp, scipy.stats.chi2_contingency; Hodges, Arkiv for Matematik 3, 1958"),
    CatalogEntry("exceedances", "exceedances",
          "per threshold t: proportion_above = weight of values > t / W, proportion_at_or_below, count_above (whole "
          "counts), and a Clopper-Pearson interval of proportion_above: exact for whole counts, on Kish's effective n "
          "for reliability weights, on the total weight for fractional counts; bins: the count above a threshold "
          "inside a bin is interpolated (even spread within it), labelled interpolated", ("thresholds", "interval"),
          ("the threshold falls in an open-ended bin holding data", "interval: a probability table (exact)",
           "interval: weights so large (from about 1e16) that float64 cannot resolve the bounds"),
          "Clopper & Pearson, Biometrika 26, 1934; Korn & Graubard, Survey Methodology 24, 1998"),
    CatalogEntry("tail_means", "tail_means",
          "per level alpha: upper = (1/(1 - alpha)) integral_alpha^1 q(u) du and lower = (1/(1 - alpha)) "
          "integral_0^(1-alpha) q(u) du, q the step quantile function (the boundary observation enters with its "
          "fractional weight); bins: the interpolated grouped quantile function; bootstrap intervals", ("tail_levels",
          "interval"), ("the tail reaches an open-ended bin holding data",),
          "Acerbi & Tasche, Journal of Banking & Finance 26, 2002 (expected shortfall)"),
    CatalogEntry("scores", "scores", "z = (x - mean) / sd and robust z = (x - median) / normal-consistent MAD",
          ("convention",), ("zero or undefined spread",), "standard scores; Hampel 1974 for the MAD"),
    CatalogEntry("partial_state", "partial_state",
          "count n, mean, central sums M_j = sum (x - mean)^j for j = 2 .. p (p = max(4, moment_order)), minimum, "
          "maximum; two states merge by M_p = M_p,a + M_p,b + sum_{k=1}^{p-2} C(p,k) [(-n_b/n)^k M_{p-k},a + "
          "(n_a/n)^k M_{p-k},b] d^k + (n_a n_b d / n)^p [n_b^(1-p) - (-n_a)^(1-p)], d = mean_b - mean_a", ("partial_state", "moment_order"),
          ("reliability weights, probability tables or bins (no count of observations)",),
          "Chan, Golub & LeVeque 1979; Pebay, Sandia report SAND2008-6212, 2008"),
    CatalogEntry("plot_data", "plot_data",
          "histogram (Freedman-Diaconis width 2 IQR n^(-1/3), at most 120 bins; one bin per outcome for a sample of "
          "at most 30 distinct values or a table of at most 200 outcomes; bins as sent, regrouped beyond 400) and the "
          "empirical distribution function (every step up to 512 points, else where F first reaches k / 511)",
          ("plot_data",), ("merged partial states (no values)",),
          "Freedman & Diaconis, Z. Wahrscheinlichkeitstheorie verw. Gebiete 57, 1981; Sturges, JASA 21, 1926"),
    CatalogEntry("sketches", "sketches",
          "quantiles of the pooled KLL sketches by the inclusive rank rule; rank error at most "
          "normalized_rank_error x n with 99% confidence", ("probabilities",),
          ("no sketches sent with the states",),
          "Karnin, Lang & Liberty, FOCS 2016; Apache DataSketches KLL"),
)


# --- derived lists -------------------------------------------------------------------------

BY_NAME: dict[str, DescriptorFacts] = {facts.name: facts for facts in DESCRIPTORS}


def names(*families: Family, where: Callable[[DescriptorFacts], bool] = lambda facts: True) -> tuple[str, ...]:
    """Descriptor names family by family in the order given (every family if none), each family in
    response order, keeping those ``where`` accepts."""
    chosen = families or tuple(dict.fromkeys(facts.family for facts in DESCRIPTORS))
    return tuple(facts.name for family in chosen for facts in DESCRIPTORS if facts.family == family and where(facts))


SCALAR_DESCRIPTORS = tuple(facts.name for facts in DESCRIPTORS)
SPREAD_DESCRIPTORS = names("spread")
SHAPE_DESCRIPTORS = names("shape")
# The robust shape measures and the L-moments beyond location: what a single observation leaves
# undefined besides spread and moment shape.
ROBUST_SHAPE_DESCRIPTORS = names("robust_shape", "l_moment", where=lambda facts: facts.undefined_for_one)
# Computed from the central power sums alone (so also from merged partial states).
MOMENT_DESCRIPTORS = tuple(facts.name for facts in DESCRIPTORS if facts.needs == _SUMS)
# Spreads in the data's own units: a comparison reports their ratio second / first too.
SCALE_DESCRIPTORS = tuple(facts.name for facts in DESCRIPTORS if facts.scale)
# What the bootstrap engine resamples (its statistics must cover exactly these).
BOOTSTRAP_DESCRIPTORS = tuple(facts.name for facts in DESCRIPTORS if facts.bootstrap)
# Where the ordinary bootstrap is known to fail, and why.
BOOTSTRAP_FAILS = {facts.name: facts.bootstrap_fails for facts in DESCRIPTORS if facts.bootstrap_fails is not None}
CLASSICAL_DESCRIPTORS = tuple(facts.name for facts in DESCRIPTORS if facts.classical)
# Undefined for a single observation, and for constant data, in the order the warnings list them.
UNDEFINED_FOR_ONE = names(
    "spread", "shape", "robust_shape", "l_moment", "serial", where=lambda facts: facts.undefined_for_one
)
UNDEFINED_FOR_CONSTANT = names(
    "shape", "robust_shape", "l_moment", "serial", "tail", where=lambda facts: facts.undefined_for_constant
)
# Undefined while an open-ended bin holds data (its values are unknown), in response order.
UNDEFINED_FOR_OPEN_BIN = tuple(facts.name for facts in DESCRIPTORS if _OPEN in facts.undefined_when)
# What partial states cannot give: descriptors needing the values (serial order last), and those
# that a quantile sketch of the same data can stand in for.
NEEDS_VALUES = tuple(
    facts.name for facts in DESCRIPTORS if "values" in facts.needs and "order" not in facts.needs
) + tuple(facts.name for facts in DESCRIPTORS if "order" in facts.needs)
FROM_QUANTILES = tuple(
    facts.name for facts in DESCRIPTORS if "quantiles" in facts.needs and "values" not in facts.needs
)


def bootstrap_reason(name: str) -> str | None:
    """Why ``name`` gets no bootstrap interval (``None`` when the engine resamples it)."""
    facts = BY_NAME[name]
    if facts.bootstrap:
        return None
    return facts.bootstrap_fails or NOT_RESAMPLED


def extremes_reason() -> str:
    """Why quantiles at p = 0 or 1 (the minimum and maximum again) get no bootstrap interval."""
    return _INCONSISTENT_FOR_EXTREMES


def catalog_descriptors() -> tuple[CatalogEntry, ...]:
    return tuple(facts.catalog_entry() for facts in DESCRIPTORS)


def catalog_warnings() -> dict[str, str]:
    return {code.value: code.meaning for code in WarningCode}
