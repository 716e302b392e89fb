"""The closed vocabulary of warning codes, each with its meaning: part of the registry
(:mod:`tailgauge.core.registry` re-exports :class:`WarningCode`), kept apart because it is a table of
its own. GET /v1/catalog serves it; collectors accept only its members.
"""

from __future__ import annotations

import enum


class WarningCode(enum.StrEnum):
    """The closed vocabulary of warning codes, each with its meaning (served by GET /v1/catalog).

    A member is its code string (``WarningCode.CONSTANT_DATA == "constant_data"``), so responses
    carry the plain code. Codes are API: never rename one; add instead.
    """

    meaning: str

    def __new__(cls, code: str, meaning: str) -> WarningCode:
        member = str.__new__(cls, code)
        member._value_ = code
        member.meaning = meaning
        return member

    MISSING_VALUES_OMITTED = "missing_values_omitted", "nulls in values were dropped under options.missing = omit"
    ZERO_WEIGHTS_DROPPED = "zero_weights_dropped", "entries of weight zero were left out"
    PROBABILITIES_NORMALIZED = (
        "probabilities_normalized",
        "probabilities not summing to 1 were divided by their sum on request",
    )
    SINGLE_OBSERVATION = "single_observation", "one observation: spread and shape are undefined"
    SINGLE_BIN = "single_bin", "every count in one bin: the spread within it is unknown"
    CONSTANT_DATA = "constant_data", "all values equal: shape and standardized quantities are undefined"
    TOO_FEW_OBSERVATIONS = "too_few_observations", "n below what an estimator needs"
    COEFFICIENT_OF_VARIATION_UNDEFINED = (
        "coefficient_of_variation_undefined",
        "negative values, a zero mean, or an unrepresentable spread",
    )
    NOT_REPRESENTABLE = "not_representable", "a result outside float64's range"
    UNDEFINED_FOR_THESE_DATA = "undefined_for_these_data", "a ratio's denominator is zero or outside float64's range"
    NO_REPEATED_VALUES = "no_repeated_values", "every value occurs once: no mode"
    MODES_TRUNCATED = "modes_truncated", "more tied modes than the server lists"
    NO_OBSERVATION_ORDER = "no_observation_order", "lag-1 autocorrelation needs unweighted observations in order"
    PLUG_IN_ESTIMATOR = (
        "plug_in_estimator",
        "no bias-corrected form for reliability weights; the plug-in value is given",
    )
    INTEGER_COUNTS_REQUIRED = (
        "integer_counts_required",
        "a quantile type that needs whole counts was asked for fractional weights",
    )
    OPEN_BIN_HOLDS_DATA = "open_bin_holds_data", "moments are undefined while an open-ended bin holds data"
    QUANTILE_IN_OPEN_BIN = "quantile_in_open_bin", "a quantile falls inside an open-ended bin"
    QUANTILE_SPREAD_ZERO = "quantile_spread_zero", "quartiles or octiles coincide: the robust ratio is undefined"
    NEEDS_VALUES = "needs_values", "a descriptor that needs observed values was asked of bins or distributions"
    GROUPED_EXTREMES = "grouped_extremes", "bins hide the minimum and maximum"
    GROUPED_MODE_UNDEFINED = "grouped_mode_undefined", "a modal class has unknown or tied neighbours"
    SHEPPARD_NOT_APPLICABLE = "sheppard_not_applicable", "unequal widths or bins too wide: no Sheppard correction"
    ASYMMETRY_DESPITE_SMALL_SKEWNESS = (
        "asymmetry_despite_small_skewness",
        "skewness near zero while quartiles or the mean-median gap show asymmetry",
    )
    NORMALITY_SMALL_SAMPLE = "normality_small_sample", "n < 20: the kurtosis test's approximation is poor"
    BCA_FALLBACK = "bca_fallback", "BCa could not be computed; the percentile interval is given"
    INTERVAL_UNDEFINED = "interval_undefined", "some resamples leave the descriptor undefined"
    INTERVAL_NOT_OFFERED = (
        "interval_not_offered",
        "the bootstrap is inconsistent, or not known to be consistent, for this descriptor (extremes, "
        "serial order, the half-sample mode), or resampling it is too costly for these data within the "
        "budget (the medcouple), or biased by the bag of little bootstraps (Hill's index), or the data are a "
        "whole population (a probability table's exceedances)",
    )
    RESAMPLING_SCHEME = "resampling_scheme", "how fractional weights were resampled"
    SERIAL_DEPENDENCE = (
        "serial_dependence",
        "intervals that assume independent observations: named when the lag-1 autocorrelation of the "
        "values in the order sent is significant at the 1 % level (send options.order as_sent), or left "
        "out for a series sent with options.order as_sent",
    )
    BOOTSTRAP_SMALL_SAMPLE = "bootstrap_small_sample", "n < 20: intervals may cover less than their level"
    BOOTSTRAP_DISCRETE = "bootstrap_discrete", "few distinct values: order-statistic intervals are coarse"
    NOT_AVAILABLE_FROM_STATES = (
        "not_available_from_states",
        "merged partial states carry no values: order statistics, L-moments and resampling are undefined",
    )
    APPROXIMATE_QUANTILES = (
        "approximate_quantiles",
        "quantiles from KLL sketches: within the stated normalized rank error, not exact",
    )
    BEYOND_STATE_ORDER = "beyond_state_order", "a moment above the highest order the partial states carry"
    DIFFERENCE_UNDEFINED = (
        "difference_undefined",
        "a contrast of two inputs is undefined because an input leaves its descriptor undefined",
    )
    RATIO_UNDEFINED = "ratio_undefined", "the first input's value is zero: the ratio second / first is undefined"
    EFFECT_SIZE_UNDEFINED = (
        "effect_size_undefined",
        "no sample sizes (probabilities) or no spread: no standardized mean difference",
    )
    CONVENTIONS_DIFFER = "conventions_differ", "the two inputs are described by different estimators"
    DISTRIBUTION_TEST_TIES = (
        "distribution_test_ties",
        "ties in the pooled data: the Kolmogorov-Smirnov p-value is conservative",
    )
    CHI_SQUARE_SMALL_EXPECTED = (
        "chi_square_small_expected",
        "expected counts below 5: the chi-square approximation may be poor",
    )
    BINS_COARSENED = (
        "bins_coarsened",
        "binned inputs on different edges were tested in the coarser cells between the edges both share",
    )
    SCORE_UNDEFINED = "score_undefined", "the reference's spread is zero or undefined: no z-score"
    TAIL_INDEX_UNDEFINED = (
        "tail_index_undefined",
        "Hill's tail index needs 50 or more observations with whole counts and a positive tail threshold X_(n-k)",
    )
    KURTOSIS_MAY_NOT_EXIST = (
        "kurtosis_may_not_exist",
        "the estimated upper tail index is below 4: the population kurtosis may not exist, so the sample kurtosis "
        "may estimate nothing finite",
    )
    POSITIVE_VALUES_REQUIRED = "positive_values_required", "geometric and harmonic means need positive values"
    EXCEEDANCE_INTERPOLATED = (
        "exceedance_interpolated",
        "a threshold falls inside a bin: the count above it is interpolated (even spread within the bin)",
    )
    TAIL_IN_OPEN_BIN = (
        "tail_in_open_bin",
        "a threshold, a tail or a trimming window reaches an open-ended bin holding data, whose values are unknown",
    )
