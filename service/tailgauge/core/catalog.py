"""What every result of the service means: its response name, definition, conventions, when it is
undefined and its published reference. Served by GET /v1/catalog; tests keep it and the responses
in step (every name a response can carry is here, and every name here is returned)."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Entry:
    name: str
    member: str  # where it appears in a descriptor response
    definition: str
    conventions: tuple[str, ...]
    undefined_when: tuple[str, ...]
    reference: str


_ONE = "a single observation (sample convention)"
_CONSTANT = "constant data (zero spread)"
_OPEN = "an open-ended bin holds data"

DESCRIPTORS = (
    Entry("mean", "descriptors", "sum w x / sum w (bins: at their midpoints)", (), (_OPEN,),
          "arithmetic mean; shifted-data summation (Chan, Golub & LeVeque 1983)"),
    Entry("median", "descriptors",
          "average of the two middle order statistics; weighted: smallest x with F(x) >= 1/2 (averaged at an "
          "exact half); probabilities: smallest x with F(x) >= 1/2; bins: interpolated within the bin holding N/2",
          ("weights",), ("bins: the median falls inside an open-ended bin",), "Hyndman & Fan 1996"),
    Entry("variance", "descriptors",
          "sum w (x - mean)^2 / divisor; divisor n - 1 (sample), n (population), V1 - V2/V1 (reliability weights)",
          ("convention", "weights", "sheppard_correction"), (_ONE, _OPEN),
          "Bessel's correction; reliability weights: e.g. GNU Scientific Library manual, weighted samples"),
    Entry("standard_deviation", "descriptors", "square root of the variance", ("convention", "weights"), (_ONE, _OPEN),
          "as variance"),
    Entry("coefficient_of_variation", "descriptors", "standard deviation / mean", ("convention",),
          (_ONE, _OPEN, "negative values (not a ratio scale)", "mean zero"), "Pearson 1896"),
    Entry("skewness", "descriptors",
          "g1 = m3 / m2^1.5; G1 = g1 sqrt(n(n-1))/(n-2); b1 = g1 ((n-1)/n)^1.5",
          ("convention", "skewness_estimator"), (_ONE, _CONSTANT, "n < 3 (sample estimators)", _OPEN),
          "Joanes & Gill, The Statistician 47, 1998"),
    Entry("kurtosis", "descriptors", "excess kurtosis + 3 (normal = 3)", ("convention", "kurtosis_estimator"),
          (_ONE, _CONSTANT, "n < 4 (sample estimators)", _OPEN), "Joanes & Gill 1998"),
    Entry("excess_kurtosis", "descriptors",
          "g2 = m4 / m2^2 - 3; G2 = (n-1)/((n-2)(n-3)) ((n+1) g2 + 6); b2 = (g2 + 3)((n-1)/n)^2 - 3",
          ("convention", "kurtosis_estimator"), (_ONE, _CONSTANT, "n < 4 (sample estimators)", _OPEN),
          "Joanes & Gill 1998"),
    Entry("minimum", "descriptors", "smallest value", (), ("bins (values unknown)",), "order statistic x(1)"),
    Entry("maximum", "descriptors", "largest value", (), ("bins (values unknown)",), "order statistic x(n)"),
    Entry("range", "descriptors", "maximum - minimum", (), (_ONE, "bins"), "order statistics"),
    Entry("interquartile_range", "descriptors", "Q(0.75) - Q(0.25) by the quantile rule in use",
          ("quantile_type",), (_ONE, "a quartile in an open bin", "types 3-9 with fractional weights"),
          "Hyndman & Fan 1996"),
    Entry("median_absolute_deviation", "descriptors", "median of |x - median| (raw)", ("weights",),
          (_ONE, "bins: it reaches into an open bin"), "Hampel 1974"),
    Entry("median_absolute_deviation_normal", "descriptors",
          "1.482602218505602 x median |x - median| = MAD / Phi^-1(3/4), consistent for the normal sigma", (),
          (_ONE,), "Hampel 1974; Rousseeuw & Croux 1993"),
    Entry("lag1_autocorrelation", "descriptors",
          "r(1) = sum_{i<n} (x_i - mean)(x_{i+1} - mean) / sum (x_i - mean)^2", (),
          (_ONE, _CONSTANT, "weighted data, tables and bins (no observation order)"),
          "NIST StRD univariate summary statistics"),
    Entry("quartile_skewness", "descriptors", "(Q3 + Q1 - 2 Q2) / (Q3 - Q1)", ("quantile_type",),
          (_ONE, _CONSTANT, "Q3 = Q1"), "Bowley 1901"),
    Entry("octile_kurtosis", "descriptors", "((E7 - E5) + (E3 - E1)) / (E6 - E2), E_i the i/8 quantile",
          ("quantile_type",), (_ONE, _CONSTANT, "E6 = E2"), "Moors, The Statistician 37, 1988"),
    Entry("octile_excess_kurtosis", "descriptors", "octile kurtosis - 1.2330951... (its value for any normal)",
          ("quantile_type",), (_ONE, _CONSTANT, "E6 = E2"), "Moors 1988"),
    Entry("medcouple", "descriptors",
          "median of h(l, u) = ((u - m) + (l - m)) / (u - l) over l <= m <= u; sign kernel for ties at the median",
          (), (_ONE, _CONSTANT, "bins (values unknown)"), "Brys, Hubert & Struyf, JCGS 13, 2004"),
    Entry("half_sample_mode", "descriptors",
          "repeatedly keep the shortest window holding half the observations; mean of the final two or "
          "closest pair of three", (), ("bins, probabilities and fractional weights",),
          "Bickel & Fruhwirth, CSDA 50, 2006"),
    Entry("mean_median_gap", "descriptors", "(mean - median) / standard deviation", ("convention",),
          (_ONE, _CONSTANT, _OPEN), "Pearson's second skewness coefficient / 3"),
    Entry("l_location", "descriptors", "l1 = b0 (PWM b_r = n^-1 sum C(j-1, r)/C(n-1, r) x_(j))", ("weights",),
          ("n < 4 (sample estimators)", _OPEN), "Hosking, JRSS-B 52, 1990"),
    Entry("l_scale", "descriptors", "l2 = 2 b1 - b0", ("weights",), (_ONE, "n < 4", _OPEN), "Hosking 1990"),
    Entry("l_skewness", "descriptors", "t3 = l3 / l2, l3 = 6 b2 - 6 b1 + b0", ("weights",),
          (_ONE, _CONSTANT, "n < 4", _OPEN), "Hosking 1990"),
    Entry("l_kurtosis", "descriptors", "t4 = l4 / l2, l4 = 20 b3 - 30 b2 + 12 b1 - b0", ("weights",),
          (_ONE, _CONSTANT, "n < 4", _OPEN), "Hosking 1990"),
)

MEMBERS = (
    Entry("moments.raw", "moments", "plug-in E[x^k], k = 1 .. moment_order", ("moment_order",),
          (_OPEN, "beyond float64's range"), "moments about zero"),
    Entry("moments.central", "moments", "plug-in E[(x - mean)^k]", ("moment_order", "sheppard_correction"),
          (_OPEN, "beyond float64's range"), "central moments; Sheppard 1898 for orders 2 and 4 of bins"),
    Entry("moments.standardized", "moments", "E[(x - mean)^k] / sigma^k (plug-in sigma)", ("moment_order",),
          (_ONE, _CONSTANT, _OPEN), "standardized moments"),
    Entry("quantiles", "quantiles", "Q(p) at each requested probability by the quantile rule in use",
          ("probabilities", "quantile_type"), ("p falls in an open bin", "types 3-9 with fractional weights"),
          "Hyndman & Fan, The American Statistician 50, 1996"),
    Entry("modes", "modes",
          "every value with the largest count; bins: the interpolated mode of each modal class (largest density)",
          (), ("every value occurs once",), "grouped mode: Kendall & Stuart, vol. 1"),
    Entry("shape_estimators", "shape_estimators", "g1, G1, b1 and g2, G2, b2 side by side, with normal-theory "
          "standard errors", (), (_ONE, _CONSTANT, "n < 3 or 4"), "Joanes & Gill 1998"),
    Entry("tail_contributions", "tail_contributions",
          "per outcome: third = w (x - mean)^3 / (W sigma^3), fourth = w (x - mean)^4 / (W sigma^4); they sum to "
          "g1 and g2 + 3", (), (_ONE, _CONSTANT, _OPEN), "decomposition of the plug-in standardized moments"),
    Entry("grouping", "grouping", "bin width, open ends, modal classes, whether Sheppard's corrections applied",
          ("sheppard_correction",), ("input other than bins",), "Sheppard, Proc. London Math. Soc. 29, 1898"),
    Entry("normality.skewness_test", "normality", "D'Agostino's z transform of g1", (),
          ("n < 8", "not a sample with whole counts"), "D'Agostino, Biometrika 57, 1970"),
    Entry("normality.kurtosis_test", "normality", "Anscombe & Glynn's z transform of b2", (),
          ("n < 5", "not a sample with whole counts"), "Anscombe & Glynn, Biometrika 70, 1983"),
    Entry("normality.omnibus_k2", "normality", "K^2 = Z_skew^2 + Z_kurt^2, chi-square(2)", (),
          ("n < 8", "not a sample with whole counts"), "D'Agostino & Pearson, Biometrika 60, 1973"),
    Entry("normality.jarque_bera", "normality", "JB = n/6 (g1^2 + (b2 - 3)^2 / 4), chi-square(2)", (),
          ("n < 2", "not a sample with whole counts"), "Jarque & Bera, Economics Letters 6, 1980"),
    Entry("interval", "descriptors.*, quantiles[*]",
          "bootstrap interval: percentile, basic (2 estimate - reversed percentile) or BCa", ("interval",),
          ("no options.interval", "minimum, maximum, range, lag-1 autocorrelation, p = 0 or 1",
           "a probability table (a population)"),
          "Efron & Tibshirani 1993 (eq. 14.10); bag of little bootstraps: Kleiner et al., JRSS-B 76, 2014"),
    Entry("standard_error", "descriptors.*, quantiles[*]", "standard deviation of the bootstrap replicates",
          ("interval",), ("no options.interval",), "Efron & Tibshirani 1993"),
    Entry("classical_interval", "descriptors.*, quantiles[*]",
          "Student's t (mean), chi-square (variance, sd; normal data only), order statistics x(l), x(u) with "
          "coverage P(l <= Binomial(n, p) <= u - 1) (median, quantiles)", ("interval",),
          ("no options.interval", "weights that are not whole counts", "n too small for the level"),
          "Conover, Practical Nonparametric Statistics, 3rd ed., section 3.2"),
    Entry("differences", "comparison",
          "second minus first, for every scalar descriptor; interval from independent resampling of both inputs "
          "(replicate k: stat(second*_k) - stat(first*_k)); Welch's t interval for the mean", ("interval",),
          ("either input leaves the descriptor undefined",),
          "Efron & Tibshirani 1993, ch. 8 (two-sample bootstrap); Welch, Biometrika 34, 1947"),
    Entry("ratios", "comparison", "second / first, for the scale descriptors (variance, sd, range, IQR, MAD, "
          "l_scale)", ("interval",), ("the first input's value is zero", "either input leaves it undefined"),
          "Efron & Tibshirani 1993, ch. 8"),
    Entry("standardized_mean_difference", "comparison",
          "Hedges' g = J(m) (mean2 - mean1) / s_pooled, J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), "
          "m = n1 + n2 - 2; Cohen's d without J; n = counts, Kish's effective n for reliability weights",
          ("interval",), ("a probability table (no sample size)", "no spread in either input", "m <= 1"),
          "Hedges & Olkin, Statistical Methods for Meta-Analysis, 1985, ch. 5; Borenstein et al. 2009, ch. 4"),
    Entry("quantile_shifts", "comparison", "q2(p) - q1(p) at each requested probability", ("probabilities",),
          ("a quantile of either input is undefined",), "Doksum, Annals of Statistics 2, 1974 (shift function)"),
    Entry("standardized_quantiles", "comparison",
          "each input's quantiles as (q - mean) / sd and (q - median) / normal-consistent MAD, and second minus "
          "first: shapes compared free of location and scale", ("probabilities",),
          ("zero or undefined spread",), "standardization; Hampel 1974 for the MAD"),
    Entry("distribution_test", "comparison",
          "two-sample Kolmogorov-Smirnov (whole counts; exact up to 10000 per input, else asymptotic) or Pearson's "
          "chi-square test of homogeneity (bins on the same edges)", (),
          ("probabilities, reliability or fractional weights", "bins against other kinds or other edges"),
          "scipy.stats.ks_2samp, scipy.stats.chi2_contingency; Hodges, Arkiv for Matematik 3, 1958"),
    Entry("scores", "scores", "z = (x - mean) / sd and robust z = (x - median) / normal-consistent MAD",
          ("convention",), ("zero or undefined spread",), "standard scores; Hampel 1974 for the MAD"),
    Entry("partial_state", "partial_state",
          "count n, mean, central sums M_j = sum (x - mean)^j for j = 2 .. p (p = max(4, moment_order)), minimum, "
          "maximum; two states merge by M_p = M_p,a + M_p,b + sum_{k=1}^{p-2} C(p,k) [(-n_b/n)^k M_{p-k},a + "
          "(n_a/n)^k M_{p-k},b] d^k + (n_a n_b d / n)^p [n_b^(1-p) - (-n_a)^(1-p)], d = mean_b - mean_a", ("partial_state", "moment_order"),
          ("reliability weights, probability tables or bins (no count of observations)",),
          "Chan, Golub & LeVeque 1979; Pebay, Sandia report SAND2008-6212, 2008"),
    Entry("sketches", "sketches",
          "quantiles of the pooled KLL sketches by the inclusive rank rule; rank error at most "
          "normalized_rank_error x n with 99% confidence", ("probabilities",),
          ("no sketches sent with the states",),
          "Karnin, Lang & Liberty, FOCS 2016; Apache DataSketches KLL"),
)

WARNINGS = {
    "missing_values_omitted": "nulls in values were dropped under options.missing = omit",
    "zero_weights_dropped": "entries of weight zero were left out",
    "probabilities_normalized": "probabilities not summing to 1 were divided by their sum on request",
    "single_observation": "one observation: spread and shape are undefined",
    "single_bin": "every count in one bin: the spread within it is unknown",
    "constant_data": "all values equal: shape and standardized quantities are undefined",
    "too_few_observations": "n below what an estimator needs",
    "coefficient_of_variation_undefined": "negative values, a zero mean, or an unrepresentable spread",
    "not_representable": "a result outside float64's range",
    "undefined_for_these_data": "a ratio's denominator is zero or outside float64's range",
    "no_repeated_values": "every value occurs once: no mode",
    "modes_truncated": "more tied modes than the server lists",
    "no_observation_order": "lag-1 autocorrelation needs unweighted observations in order",
    "plug_in_estimator": "no bias-corrected form for reliability weights; the plug-in value is given",
    "integer_counts_required": "a quantile type that needs whole counts was asked for fractional weights",
    "open_bin_holds_data": "moments are undefined while an open-ended bin holds data",
    "quantile_in_open_bin": "a quantile falls inside an open-ended bin",
    "quantile_spread_zero": "quartiles or octiles coincide: the robust ratio is undefined",
    "needs_values": "a descriptor that needs observed values was asked of bins or distributions",
    "grouped_extremes": "bins hide the minimum and maximum",
    "grouped_mode_undefined": "a modal class has unknown or tied neighbours",
    "sheppard_not_applicable": "unequal widths or bins too wide: no Sheppard correction",
    "asymmetry_despite_small_skewness": "skewness near zero while quartiles or the mean-median gap show asymmetry",
    "normality_small_sample": "n < 20: the kurtosis test's approximation is poor",
    "bca_fallback": "BCa could not be computed; the percentile interval is given",
    "interval_undefined": "some resamples leave the descriptor undefined",
    "interval_not_offered": "the bootstrap fails for this descriptor (extremes, serial order), or the engine does "
    "not resample it (comparisons)",
    "resampling_scheme": "how fractional weights were resampled",
    "bootstrap_small_sample": "n < 20: intervals may cover less than their level",
    "bootstrap_discrete": "few distinct values: order-statistic intervals are coarse",
    "not_available_from_states": "merged partial states carry no values: order statistics, L-moments and "
    "resampling are undefined",
    "approximate_quantiles": "quantiles from KLL sketches: within the stated normalized rank error, not exact",
    "beyond_state_order": "a moment above the highest order the partial states carry",
    "difference_undefined": "a contrast of two inputs is undefined because an input leaves its descriptor undefined",
    "ratio_undefined": "the first input's value is zero: the ratio second / first is undefined",
    "effect_size_undefined": "no sample sizes (probabilities) or no spread: no standardized mean difference",
    "conventions_differ": "the two inputs are described by different estimators",
    "distribution_test_ties": "ties in the pooled data: the Kolmogorov-Smirnov p-value is conservative",
    "chi_square_small_expected": "expected counts below 5: the chi-square approximation may be poor",
    "score_undefined": "the reference's spread is zero or undefined: no z-score",
}
