"""The median absolute deviation's rules (tailgauge.core.deviation_rules) over many rows at once,
row by row against numpy and against the point estimate of each row as its own sample.
"""

from __future__ import annotations

import numpy as np
import pytest

from tailgauge.core import WeightMeaning, central_sums, from_samples, from_table
from tailgauge.core.resample.draws import plan_of
from tailgauge.core.resample.rows import Rows
from tailgauge.core.resample.statistics import Statistics


MAD_SUPPORTS = {
    "continuous": np.sort(np.random.default_rng(41).gamma(2.0, 3.0, 300)),
    "few values": np.arange(7, dtype=np.float64),
    "huge magnitude, tiny spread": 1e16 + np.arange(0.0, 64.0, 2.0),
    "mixed signs and scales": np.array([-3e5, -2.5, -1e-9, 0.0, 1e-9, 0.5, 2.5, 7.0, 1e3, 4e8]),
}


@pytest.mark.parametrize("support", list(MAD_SUPPORTS))
def test_batched_mad_of_whole_count_rows_matches_numpy_row_by_row(support):
    # Reference: numpy's median of |x - median(x)| of each row's counts written out (np.repeat).
    values = MAD_SUPPORTS[support]
    rng = np.random.default_rng(17)
    data = from_table(values, np.ones(values.size), probabilities=False, normalise=False)
    plan, _ = plan_of(data, central_sums(data.values, data.weights, 4))
    statistics = Statistics(plan, ("sample", "sample"), 7, "sample")
    counts = rng.poisson(rng.uniform(0.0, 3.0, (400, values.size)))
    counts[:, rng.integers(0, values.size, 400)] += 1  # no empty row
    counts[:50, :] = 0
    counts[:50, values.size // 2] = 1 + np.arange(50) % 3  # rows whose deviations are all 0
    view = Rows(counts.astype(np.float64), plan.powers, True, counts)
    median = statistics.median(view)
    got = statistics.mad(view, median)
    want = []
    for row in counts:
        expanded = np.repeat(values, row)
        want.append(np.median(np.abs(expanded - np.median(expanded))))
    assert np.array_equal(median, [np.median(np.repeat(values, row)) for row in counts])
    assert np.array_equal(got, np.array(want))


def test_batched_median_and_mad_of_fractional_weight_rows_match_the_point_estimates():
    # Reference: order_statistics.median_absolute_deviation of each row as its own weighted sample (the
    # point estimate's rule; checked against numpy and statsmodels in test_order).
    from tailgauge.core import order_statistics

    rng = np.random.default_rng(23)
    values = np.sort(rng.normal(0.0, 1.0, 40))
    weights = rng.uniform(0.2, 2.0, 40)
    data = from_samples(list(values), omit_missing=False, weights=list(weights), meaning=WeightMeaning.FREQUENCY)
    plan, _ = plan_of(data, central_sums(data.values, data.weights, 4))
    statistics = Statistics(plan, ("sample", "sample"), 7, "sample")
    rows = rng.poisson(1.0, (300, plan.values.size)) * plan.unit[None, :]
    rows[rows.sum(axis=1) == 0, 0] = plan.unit[0]
    rows[:20] = np.where(np.arange(plan.values.size) % 2 == 0, 1.0, 0.0)  # exact halves: averaged
    view = Rows(rows, plan.powers, False)
    median = statistics.median(view)
    got = statistics.mad(view, median)
    for i, row in enumerate(rows):
        keep = row > 0
        one = from_samples(list(plan.values[keep]), omit_missing=False, weights=list(row[keep]), meaning=WeightMeaning.FREQUENCY)
        assert median[i] == order_statistics.median(one), i
        assert got[i] == order_statistics.median_absolute_deviation(one, float(median[i])), i
