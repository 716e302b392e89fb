"""Histograms as metrics systems export them (tailgauge.core.histograms) against their definitions.

Sources named beside each check:
- cumulative buckets: the OpenMetrics / Prometheus exposition, where bucket ``le=u_i`` counts the
  observations at or below u_i, so bucket i alone holds c_i - c_(i-1);
- explicit and exponential buckets: the OpenTelemetry metrics data model (explicit bucket i covers
  (bounds[i-1], bounds[i]]; exponential bucket index k covers (base^k, base^(k+1)], base =
  2^(2^-scale)), with boundaries computed here with exact rationals (fractions.Fraction and
  integer arithmetic), independently of the service's code;
- the mean of a histogram with a sum: sum / count, by definition, compared with ==.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from tailgauge.core import DescribeOptions, IntervalOptions, UncomputableInput, describe, from_bins
from tailgauge.core import histograms

LATENCY_BOUNDS = [0.025, 0.05, 0.1, 0.2, 0.3, 0.5, 1.0, 2.5]
LATENCY_CUMULATIVE = [118, 523, 1094, 1346, 1402, 1416, 1420, 1421]


def _same_description(a, b) -> None:
    """Every descriptor, quantile, mode and interval of two descriptions equal (bit for bit)."""
    assert a.descriptors.keys() == b.descriptors.keys()
    for name in a.descriptors:
        assert a.descriptors[name] == b.descriptors[name], name
    assert a.quantiles == b.quantiles
    assert a.modes == b.modes
    assert a.moments == b.moments
    assert a.normality == b.normality
    assert [(w.code, w.descriptors) for w in a.warnings] == [(w.code, w.descriptors) for w in b.warnings]


@pytest.mark.parametrize("lower_bound", [None, 0.0])
@pytest.mark.parametrize("interval", [None, IntervalOptions(method="bca", level=0.9, resamples=400, seed=11)])
def test_a_cumulative_histogram_equals_the_same_data_sent_as_bins(lower_bound, interval):
    # OpenMetrics: bucket le=u_i holds c_i - c_(i-1) observations; the last bound null is +Inf.
    bounds = [*LATENCY_BOUNDS, None]
    cumulative = [*LATENCY_CUMULATIVE, 1424]
    counts = np.diff(np.array(cumulative, dtype=float), prepend=0.0)
    histogram = histograms.from_cumulative(bounds, cumulative, lower_bound=lower_bound, count=1424)
    bins = from_bins([lower_bound, *LATENCY_BOUNDS, None], list(counts))
    options = DescribeOptions(interval=interval, probabilities=(0.1, 0.5, 0.9, 0.99))
    _same_description(describe(histogram, options, kind="histogram"), describe(bins, options, kind="bins"))


def test_a_closed_cumulative_histogram_equals_bins_in_every_moment():
    bounds, cumulative = LATENCY_BOUNDS, LATENCY_CUMULATIVE
    counts = np.diff(np.array(cumulative, dtype=float), prepend=0.0)
    options = DescribeOptions(interval=IntervalOptions(method="percentile", level=0.95, resamples=300, seed=5))
    a = describe(histograms.from_cumulative(bounds, cumulative, lower_bound=0.0), options, kind="histogram")
    b = describe(from_bins([0.0, *bounds], list(counts)), options, kind="bins")
    _same_description(a, b)
    assert a.descriptors["variance"].value is not None and a.grouping.known_summary.exact == []


def test_known_sum_gives_the_exact_mean_and_keeps_the_central_moments():
    total = 133.7  # any value the buckets allow: sum / count is the mean by definition
    counts = np.diff(np.array(LATENCY_CUMULATIVE, dtype=float), prepend=0.0)
    with_sum = histograms.from_cumulative(LATENCY_BOUNDS, LATENCY_CUMULATIVE, lower_bound=0.0, total=total)
    options = DescribeOptions(interval=IntervalOptions(method="bca", level=0.95, resamples=500, seed=3))
    a = describe(with_sum, options, kind="histogram")
    b = describe(from_bins([0.0, *LATENCY_BOUNDS], list(counts)), options, kind="bins")
    assert a.descriptors["mean"].value == total / 1421
    assert "exact" in a.descriptors["mean"].estimator
    shift = total / 1421 - b.descriptors["mean"].value
    # The bins move by one shift: the spread and shape are those of the midpoints (shift-invariant).
    for name in ("variance", "skewness", "excess_kurtosis", "median", "interquartile_range"):
        assert a.descriptors[name].value == pytest.approx(b.descriptors[name].value, rel=1e-9, abs=1e-12), name
    # ... and the mean's interval moves with it (same resamples, same seed).
    for end in ("low", "high"):
        moved = getattr(b.descriptors["mean"].interval, end) + shift
        assert getattr(a.descriptors["mean"].interval, end) == pytest.approx(moved, rel=1e-9)
    assert a.descriptors["mean"].interval.low < a.descriptors["mean"].value < a.descriptors["mean"].interval.high
    assert a.grouping.known_summary.exact == ["mean"]


def test_known_sum_gives_the_mean_while_an_open_bin_holds_data():
    # A Prometheus histogram whose +Inf bucket holds 3 observations: moments are unknown, the mean is not.
    data = histograms.from_cumulative([*LATENCY_BOUNDS, None], [*LATENCY_CUMULATIVE, 1424], total=140.25, count=1424)
    result = describe(data, DescribeOptions(), kind="histogram")
    assert result.descriptors["mean"].value == 140.25 / 1424
    assert result.descriptors["variance"].value is None
    open_bin = next(w for w in result.warnings if w.code == "open_bin_holds_data")
    assert "mean" not in open_bin.descriptors and "variance" in open_bin.descriptors


def test_known_min_and_max_give_the_extremes_and_close_the_open_buckets():
    # OpenTelemetry explicit buckets: (-inf, 0], (0, 5], (5, 10], (10, 25], (25, 50], (50, +inf).
    data = histograms.from_explicit([0, 5, 10, 25, 50], [0, 30, 50, 15, 4, 1], total=700.0, minimum=0.5, maximum=72.0)
    assert list(data.edges) == [0.5, 5.0, 10.0, 25.0, 50.0, 72.0]  # the empty (-inf, 0] left out
    result = describe(data, DescribeOptions(probabilities=(0.0, 1.0)), kind="histogram")
    values = {name: d.value for name, d in result.descriptors.items()}
    assert (values["minimum"], values["maximum"], values["range"]) == (0.5, 72.0, 71.5)
    assert values["mean"] == 7.0 and values["variance"] is not None
    assert [q.value for q in result.quantiles] == [0.5, 72.0]
    assert not any(w.code == "grouped_extremes" for w in result.warnings)
    assert result.grouping.known_summary.exact == ["mean", "minimum", "maximum", "range"]
    assert not result.grouping.open_lower and not result.grouping.open_upper


def test_a_min_alone_leaves_the_maximum_unknown_and_says_so():
    data = histograms.from_explicit([0, 5, 10], [0, 3, 4, 2], minimum=1.0)
    result = describe(data, DescribeOptions(), kind="histogram")
    assert result.descriptors["minimum"].value == 1.0 and result.descriptors["maximum"].value is None
    extremes = next(w for w in result.warnings if w.code == "grouped_extremes")
    assert extremes.descriptors == ["maximum", "range"]


# ---- exponential boundaries against the OpenTelemetry definition, exactly ----


def _exact_power(k: int, scale: int) -> Fraction:
    """base^k for scale <= 0: 2^(k 2^-scale), an exact power of two."""
    return Fraction(2) ** (k * 2 ** (-scale))


def _sign_of_power(midpoint: Fraction, scale: int, k: int, bits: int = 256) -> int:
    """sign(midpoint^(2^scale) - 2^k), from integer floor/ceil bounds of the repeated squares
    (written here independently of the service; more bits until decided)."""
    while True:
        low = high = midpoint.numerator
        exponent = -(midpoint.denominator.bit_length() - 1)
        for _ in range(scale):
            low, high, exponent = low * low, high * high, 2 * exponent
            cut = max(0, high.bit_length() - bits)
            low, high, exponent = low >> cut, -((-high) >> cut), exponent + cut
        # compare low 2^exponent and high 2^exponent with 2^k by shifting integers
        if k >= exponent:
            target = 1 << (k - exponent)
            if low > target:
                return 1
            if high < target:
                return -1
        else:
            if low << (exponent - k) > 1:
                return 1
            if high << (exponent - k) < 1:
                return -1
        bits *= 2


def _is_correctly_rounded(value: float, k: int, scale: int) -> bool:
    """value is the float64 nearest to 2^(k / 2^scale): the midpoints to its neighbours bracket it.

    With k = q 2^scale + r, value = 2^q f exactly (normal range), so f must be the float64 nearest
    to 2^(r / 2^scale) in [1, 2), which is what is checked.
    """
    q = k >> scale
    value, k = math.ldexp(value, -q), k - (q << scale)
    below = (Fraction(value) + Fraction(math.nextafter(value, 0.0))) / 2
    above = (Fraction(value) + Fraction(math.nextafter(value, math.inf))) / 2
    if scale <= 12:  # small enough for the exact powers themselves
        n = 2**scale
        return below**n < Fraction(2) ** k < above**n
    return _sign_of_power(below, scale, k) < 0 < _sign_of_power(above, scale, k)


@pytest.mark.parametrize("scale", [-10, -4, -1, 0])
def test_exponential_boundaries_at_scales_up_to_zero_are_exact_powers_of_two(scale):
    step = 2 ** (-scale)
    indices = np.arange(-1022 // step, 1023 // step + 1)
    found = histograms.boundaries(scale, indices)
    assert all(Fraction(float(b)) == _exact_power(int(k), scale) for k, b in zip(indices, found))


@pytest.mark.parametrize(("scale", "start", "count"), [(1, -2040, 60), (3, -37, 200), (8, 300, 520), (12, -9000, 150),
                                                         (16, 2**16 * 5 - 40, 90), (20, -(2**20) * 3 - 25, 60),
                                                         (20, 2**20 * 700 + 12345, 60)])
def test_exponential_boundaries_at_positive_scales_are_correctly_rounded(scale, start, count):
    # base^k = 2^(k / 2^scale): the float64 nearest to it, checked by exact integer comparisons.
    indices = np.arange(start, start + count)
    found = histograms.boundaries(scale, indices)
    assert all(_is_correctly_rounded(float(b), int(k), scale) for k, b in zip(indices, found))


def test_the_extended_precision_path_agrees_with_the_exact_rule_on_many_scale_20_boundaries():
    rng = np.random.default_rng(20)
    remainders = rng.integers(0, 2**20, 3000)
    fast = histograms.rounded_fractions(remainders, 20)
    exact = [histograms.rounded_power_of_two(int(r), 20) for r in remainders]  # math.exp2 as the first guess
    assert list(fast) == exact
    assert all(_is_correctly_rounded(float(v), int(r), 20) for r, v in zip(remainders[:40], fast[:40]))


def test_an_exponential_histogram_is_the_bins_of_its_boundaries():
    # scale 2: base = 2^(1/4). positive offset 3: buckets (2^(3/4), 2^1], (2^1, 2^(5/4)], ...
    data = histograms.from_exponential(2, 0, positive=histograms.Buckets(3, [4, 10, 7, 1]))
    expected = [float(Fraction(2) ** 0.75), 2.0, 2.0**1.25, 2.0**1.5, 2.0**1.75]
    assert _is_correctly_rounded(data.edges[0], 3, 2) and list(data.edges[1:4]) == expected[1:4]
    assert all(_is_correctly_rounded(float(e), k, 2) for k, e in zip(range(3, 8), data.edges))
    bins = from_bins(list(data.edges), [4, 10, 7, 1])
    _same_description(describe(data, DescribeOptions(), kind="histogram"), describe(bins, DescribeOptions(), kind="bins"))


def test_negative_buckets_mirror_the_positive_ones_around_the_zero_bucket():
    data = histograms.from_exponential(
        0, 5, zero_threshold=0.5, positive=histograms.Buckets(0, [3, 2]), negative=histograms.Buckets(1, [4, 1]),
    )
    # negative bucket i covers [-2^(1+i+1), -2^(1+i)); an empty gap [-2, -0.5] and [0.5, 1] beside the zero bucket
    assert list(data.edges) == [-8.0, -4.0, -2.0, -0.5, 0.5, 1.0, 2.0, 4.0]
    assert list(data.weights) == [1.0, 4.0, 0.0, 5.0, 0.0, 3.0, 2.0]


def test_a_zero_bucket_of_threshold_zero_is_centred_on_zero():
    data = histograms.from_exponential(1, 6, positive=histograms.Buckets(-2, [3, 2]))
    assert data.edges[0] == -data.edges[1] == -0.5 and data.values[0] == 0.0


def test_boundaries_beyond_float64_are_clamped_at_the_outer_ends_only():
    edges = histograms.side_boundaries(-10, -1, 2, "positive")
    assert list(edges) == [0.0, 1.0, histograms.LARGEST]
    with pytest.raises(UncomputableInput) as caught:
        histograms.side_boundaries(-10, 0, 2, "positive")
    assert caught.value.locations[0].path == "positive.bucket_counts[1]"
    with pytest.raises(UncomputableInput) as caught:
        histograms.side_boundaries(20, 2**31 - 1, 1, "negative")
    assert caught.value.locations[0].path == "negative.offset"


@pytest.mark.parametrize(
    ("make", "path"),
    [
        (lambda: histograms.from_cumulative([1, 2, 3], [5, 4, 6]), "cumulative_counts[1]"),
        (lambda: histograms.from_cumulative([1, 3, 2], [1, 2, 3]), "upper_bounds[2]"),
        (lambda: histograms.from_cumulative([1, None, 2], [1, 2, 3]), "upper_bounds[1]"),
        (lambda: histograms.from_cumulative([1, 2], [1, 2, 3]), "cumulative_counts"),
        (lambda: histograms.from_cumulative([1, 2], [1, 2], count=3), "count"),
        (lambda: histograms.from_cumulative([1, 2], [1, 2], lower_bound=1), "lower_bound"),
        (lambda: histograms.from_cumulative([1, 2], [0, 0]), "cumulative_counts"),
        (lambda: histograms.from_cumulative([1, 2], [1, 2], lower_bound=0, total=5), "sum"),
        (lambda: histograms.from_cumulative([1, 2], [1, 2], total=10), "sum"),  # open below: only the top checks
        (lambda: histograms.from_explicit([1, 2], [1, 2]), "bucket_counts"),
        (lambda: histograms.from_explicit([2, 2], [1, 2, 3]), "explicit_bounds[1]"),
        (lambda: histograms.from_explicit([1, 2], [1, 2, 3], minimum=3, maximum=2), "min"),
        (lambda: histograms.from_explicit([1, 2], [0, 2, 3], minimum=0.5), "min"),
        (lambda: histograms.from_explicit([1, 2], [1, 2, 0], maximum=2.5), "max"),
        (lambda: histograms.from_explicit([1, 2], [0, 4, 0], minimum=1.2, maximum=1.8, total=8), "sum"),
        (lambda: histograms.from_explicit([], [5]), "bucket_counts"),
        (lambda: histograms.from_exponential(21, 0), "scale"),
        (lambda: histograms.from_exponential(0, 2, zero_threshold=3.0, positive=histograms.Buckets(1, [1])),
         "zero_threshold"),
        (lambda: histograms.from_exponential(0, 2), "zero_count"),
        (lambda: histograms.from_exponential(0, 0, positive=histograms.Buckets(2000, [1])), "positive.offset"),
        (lambda: histograms.from_exponential(0, 0, negative=histograms.Buckets(-3000, [1])), "negative.offset"),
    ],
)
def test_every_histogram_rule_names_its_field(make, path):
    with pytest.raises(UncomputableInput) as caught:
        make()
    assert [location.path for location in caught.value.locations] == [path]
