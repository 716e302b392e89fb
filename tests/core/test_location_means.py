"""Trimmed, winsorized, geometric and harmonic means (service/tailgauge/core/location_means.py,
quantile_integrals.py, describe/tails.py).

Outside references (scipy 1.17.1, pinned): ``scipy.stats.trim_mean`` and
``scipy.stats.mstats.winsorize(...).mean()``, which both cut int(proportion x n) = floor(gamma n)
observations from each end: the service's rule for whole counts, so the values must agree to
rounding; ``scipy.stats.gmean`` and ``scipy.stats.hmean`` (with ``weights``). For weights that
are not whole counts the trimming is gamma W of the weight, checked against the integral
definition in exact rationals (fractions.Fraction).
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from scipy.stats import mstats
from tailgauge.core import (
    DescribeOptions,
    WeightMeaning,
    describe,
    from_array,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core.registry import WarningCode
from tests.core.warning_lookup import codes_by_descriptor


@pytest.mark.parametrize("n", [1, 2, 5, 9, 10, 11, 37, 100, 1001])
@pytest.mark.parametrize("proportion", [0.0, 0.05, 0.1, 0.2, 0.25, 0.3, 0.49])
def test_trimmed_and_winsorized_means_match_scipy(n, proportion):
    """Source: scipy.stats.trim_mean and scipy.stats.mstats.winsorize(limits=(g, g)).mean()."""
    x = np.random.default_rng(n).standard_t(2.0, n) * 10.0 + 100.0
    found = describe(from_array(x), DescribeOptions(trim_proportion=proportion), kind="samples").descriptors
    assert found["trimmed_mean"].value == pytest.approx(stats.trim_mean(x, proportion), rel=1e-12)
    winsorized = float(mstats.winsorize(x, limits=(proportion, proportion)).mean())
    assert found["winsorized_mean"].value == pytest.approx(winsorized, rel=1e-12)


def test_ties_and_count_tables_are_the_repeated_sample():
    """A count table trims exactly as its repeated sample (scipy on the repeated values)."""
    values = np.array([1.0, 2.0, 3.0, 7.0, 50.0])
    counts = np.array([4.0, 1.0, 3.0, 2.0, 3.0])
    repeated = np.repeat(values, counts.astype(int))
    found = describe(from_table(values, counts, probabilities=False, normalise=False),
                     DescribeOptions(trim_proportion=0.2), kind="table").descriptors
    assert found["trimmed_mean"].value == pytest.approx(stats.trim_mean(repeated, 0.2), rel=1e-14)
    assert found["winsorized_mean"].value == pytest.approx(float(mstats.winsorize(repeated, (0.2, 0.2)).mean()), rel=1e-14)
    assert "g = floor(0.2 x 13) = 2" in found["trimmed_mean"].estimator


def _exact_trimmed(values, weights, proportion: Fraction) -> tuple[Fraction, Fraction]:
    """Trimmed and winsorized means of the step quantile function with gamma W cut from each end."""
    pairs = sorted(zip(values, weights))
    total = sum(w for _, w in pairs)
    cut = proportion * total
    middle = Fraction(0)
    below = Fraction(0)
    low_value = high_value = None
    for x, w in pairs:
        start, stop = below, below + w
        middle += x * max(Fraction(0), min(stop, total - cut) - max(start, cut))
        if low_value is None and stop > cut:
            low_value = x
        if high_value is None and stop >= total - cut:
            high_value = x
        below = stop
    return middle / (total - 2 * cut), (cut * low_value + middle + cut * high_value) / total


@pytest.mark.parametrize("meaning", [WeightMeaning.FREQUENCY, WeightMeaning.RELIABILITY])
def test_fractional_weights_trim_a_share_of_the_weight(meaning):
    """Source: the definition in exact rationals (fractions.Fraction): the boundary value enters
    with the part of its weight inside the window."""
    values = [3.0, -1.0, 8.0, 2.5, 40.0, 6.0]
    weights = [0.75, 1.5, 2.25, 0.5, 1.0, 3.0]
    found = describe(from_samples(values, omit_missing=False, weights=weights, meaning=meaning),
                     DescribeOptions(trim_proportion=0.15), kind="samples").descriptors
    trimmed, winsorized = _exact_trimmed([Fraction(v) for v in values], [Fraction(w) for w in weights], Fraction(15, 100))
    assert found["trimmed_mean"].value == pytest.approx(float(trimmed), rel=1e-13)
    assert found["winsorized_mean"].value == pytest.approx(float(winsorized), rel=1e-13)


def test_bins_trim_the_interpolated_quantile_function():
    """Bins (0, 10], (10, 20], (20, 40] with 4, 4, 2 counts; g = floor(0.1 x 10) = 1 from each end:
    the first count spread over (0, 2.5] and the last over (30, 40] are cut, so the trimmed mean
    is (3 x 6.25 + 4 x 15 + 1 x 25) / 8 (the kept part of each bin at its midpoint)."""
    found = describe(from_bins([0.0, 10.0, 20.0, 40.0], [4.0, 4.0, 2.0]), DescribeOptions(), kind="bins").descriptors
    assert found["trimmed_mean"].value == pytest.approx((3 * 6.25 + 4 * 15 + 25) / 8, rel=1e-14)
    # Winsorized: the cut count at each end takes the kept boundary value, 2.5 and 30.
    assert found["winsorized_mean"].value == pytest.approx((2.5 + 3 * 6.25 + 4 * 15 + 25 + 30) / 10, rel=1e-14)


def test_geometric_and_harmonic_means_match_scipy():
    """Source: scipy.stats.gmean and scipy.stats.hmean, unweighted and with weights."""
    x = np.random.default_rng(3).lognormal(2.0, 1.2, 500)
    w = np.random.default_rng(4).integers(1, 6, 500).astype(float)
    plain = describe(from_array(x), DescribeOptions(), kind="samples").descriptors
    assert plain["geometric_mean"].value == pytest.approx(stats.gmean(x), rel=1e-12)
    assert plain["harmonic_mean"].value == pytest.approx(stats.hmean(x), rel=1e-12)
    for meaning in (WeightMeaning.FREQUENCY, WeightMeaning.RELIABILITY):
        weighted = describe(from_samples(list(x), omit_missing=False, weights=list(w), meaning=meaning),
                            DescribeOptions(), kind="samples").descriptors
        assert weighted["geometric_mean"].value == pytest.approx(stats.gmean(x, weights=w), rel=1e-12)
        assert weighted["harmonic_mean"].value == pytest.approx(stats.hmean(x, weights=w), rel=1e-12)


def test_bins_take_their_midpoints():
    found = describe(from_bins([1.0, 3.0, 7.0], [2.0, 6.0]), DescribeOptions(), kind="bins").descriptors
    assert found["geometric_mean"].value == pytest.approx(stats.gmean([2.0, 5.0], weights=[2.0, 6.0]), rel=1e-14)
    assert found["harmonic_mean"].value == pytest.approx(stats.hmean([2.0, 5.0], weights=[2.0, 6.0]), rel=1e-14)


@pytest.mark.parametrize("data", [
    from_array(np.array([3.0, 0.0, 5.0])),
    from_array(np.array([3.0, -2.0, 5.0])),
    from_bins([-1.0, 1.0, 3.0], [2.0, 3.0]),
])
def test_zero_or_negative_data_leave_them_null_with_a_reason(data):
    result = describe(data, DescribeOptions(), kind="bins" if data.binned else "samples")
    for name in ("geometric_mean", "harmonic_mean"):
        assert result.descriptors[name].value is None
        assert WarningCode.POSITIVE_VALUES_REQUIRED in codes_by_descriptor(result)[name]
    # The trimmed and winsorized means need no positivity.
    assert result.descriptors["trimmed_mean"].value is not None


def test_an_open_bin_holding_data_leaves_them_null():
    result = describe(from_bins([0.0, 10.0, None], [8.0, 2.0]), DescribeOptions(trim_proportion=0.25), kind="bins")
    named = codes_by_descriptor(result)
    assert result.descriptors["geometric_mean"].value is None and WarningCode.OPEN_BIN_HOLDS_DATA in named["geometric_mean"]
    # g = floor(0.25 x 10) = 2 cuts the open bin away: the trimmed mean is defined (counts 2 to 8 of
    # the first bin, spread over (2.5, 10], mean 6.25), the winsorized mean is not.
    assert result.descriptors["trimmed_mean"].value == pytest.approx(6.25, rel=1e-14)
    assert result.descriptors["winsorized_mean"].value is None
    assert WarningCode.TAIL_IN_OPEN_BIN in named["winsorized_mean"]
