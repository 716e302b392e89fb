"""Each outcome's share of the standardized third and fourth moments (service/tailgauge/core/tail.py).

Outside reference: scipy.stats.skew and scipy.stats.kurtosis (scipy 1.17.1, pinned), plug-in
forms (``bias=True``; ``fisher=False`` for b2), on the repeated sample. The shares must sum to
them, since sum_i w_i z_i^k / W is the standardized moment by definition.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tailgauge.core.moments import central_sums
from tailgauge.core.tail import contributions

# A fictional courier's delivery times (minutes) with how many parcels took each: a long right tail.
MINUTES = np.array([18.0, 22.0, 25.0, 27.0, 31.0, 38.0, 55.0, 95.0])
PARCELS = np.array([40.0, 120.0, 210.0, 160.0, 90.0, 30.0, 6.0, 1.0])


def test_shares_sum_to_the_plug_in_skewness_and_kurtosis():
    sums = central_sums(MINUTES, PARCELS, 4)
    found = contributions(MINUTES, PARCELS, sums, limit=100, largest_only=False)
    repeated = np.repeat(MINUTES, PARCELS.astype(int))
    assert found.complete
    np.testing.assert_array_equal(found.values, MINUTES)
    assert np.sum(found.third) == pytest.approx(stats.skew(repeated, bias=True), rel=1e-12)
    assert np.sum(found.fourth) == pytest.approx(stats.kurtosis(repeated, fisher=False, bias=True), rel=1e-12)
    # The right tail carries the skewness: the slowest delivery's share is the largest and positive.
    assert int(np.argmax(found.third)) == MINUTES.size - 1 and found.third[-1] > 0
    assert np.all(found.fourth >= 0)


def test_the_largest_by_tail_weight_are_kept_in_value_order():
    sums = central_sums(MINUTES, PARCELS, 4)
    every = contributions(MINUTES, PARCELS, sums, limit=100, largest_only=False)
    top = contributions(MINUTES, PARCELS, sums, limit=3, largest_only=False)
    want = np.sort(np.argsort(-every.fourth)[:3])
    assert not top.complete
    np.testing.assert_array_equal(top.values, MINUTES[want])
    np.testing.assert_array_equal(top.fourth, every.fourth[want])
    # largest_only with room for all keeps all (complete) but still by the same rule.
    assert contributions(MINUTES, PARCELS, sums, limit=100, largest_only=True).complete


def test_a_tiny_share_far_out_keeps_its_representable_contribution():
    """z^3 overflows at 2e120 sd while share z^3 is representable: roots of the share first.

    By hand: W = 2 + 1e-300, mean = 0.5 (to 1e-180), m2 = 0.25 (to 1e-60), so sigma = 0.5; the far
    value has z = 2e120 and share 1e-300 / 2, giving 0.5e-300 x 8e360 = 4e60 and
    0.5e-300 x 1.6e481 = 8e180."""
    values = np.array([0.0, 1.0, 1e120])
    weights = np.array([1.0, 1.0, 1e-300])
    sums = central_sums(values, weights, 4)
    found = contributions(values, weights, sums, limit=10, largest_only=False)
    assert found.third[2] == pytest.approx(4e60, rel=1e-9)
    assert found.fourth[2] == pytest.approx(8e180, rel=1e-9)
    np.testing.assert_allclose(found.third[:2], [-0.5, 0.5], rtol=1e-9)


@pytest.mark.parametrize("case", ["continuous", "ties", "counts", "one_far_outlier", "offset"])
def test_the_tails_only_path_lists_what_computing_every_value_lists(case, monkeypatch):
    """The largest contributions from the two tails equal those of every value computed and
    selected (the path below the size where only the tails are computed), bit for bit."""
    from tailgauge.core import tail
    from tailgauge.core.weighted import from_samples

    rng = np.random.default_rng(hash(case) % 2**32)
    x = rng.lognormal(0.0, 0.7, 20_000)
    weights = None
    if case == "ties":
        x = np.round(x, 1)
    elif case == "counts":
        weights = rng.integers(1, 50, x.size).astype(float)
    elif case == "one_far_outlier":
        x[17] = 1e6
    elif case == "offset":
        x = 1e9 + x
    data = from_samples(list(x), omit_missing=False, weights=None if weights is None else list(weights))
    support = data.support
    sums = central_sums(data.values, data.weights, 4)
    for limit in (1, 10, 200):
        fast = tail.contributions(support.values, support.weights, sums, limit=limit, largest_only=True)
        monkeypatch.setattr(tail, "_TAILS_FROM", 10**12)
        every = tail.contributions(support.values, support.weights, sums, limit=limit, largest_only=True)
        monkeypatch.undo()
        for field in ("values", "weights", "third", "fourth"):
            assert np.array_equal(getattr(fast, field), getattr(every, field)), (limit, field)
        assert fast.complete is every.complete
