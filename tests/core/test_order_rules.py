"""The order-statistic rules (tailgauge.core.order_rules) are one rule for one row and for many.

References: each row of a batch is also described as its own sample by the single-row functions
(order_statistics, grouped), which are checked against numpy and by hand in their own test files;
the batch must give every row's answer bit for bit. The primitives are checked against their
definitions (numpy's median ranks, exact whole numbers).
"""

from __future__ import annotations

import numpy as np
import pytest

from tailgauge.core import WeightMeaning, from_array, from_bins, from_samples, from_table, grouped, order_statistics
from tailgauge.core import order_rules
from tailgauge.core.resample.rows import LeaveOneOut, Rows

PROBABILITIES = np.array([0.0, 0.01, 0.07, 0.1, 0.25, 0.5, 0.75, 0.9, 0.93, 0.99, 1.0])


def _bits(a) -> np.ndarray:
    return np.asarray(a, dtype=np.float64).view(np.int64)


def _count_rows(k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    counts = rng.poisson(rng.uniform(0.0, 3.0, (120, k)))
    counts[np.arange(120), rng.integers(0, k, 120)] += 1  # no empty row
    return counts


@pytest.mark.parametrize("quantile_type", range(1, 10))
def test_batched_hf_quantiles_equal_each_row_as_its_own_count_table(quantile_type):
    values = np.sort(np.random.default_rng(3).normal(10.0, 2.0, 25))
    counts = _count_rows(values.size, 4)
    got = order_rules.hf_quantiles(Rows(counts.astype(np.float64), None, True, counts), values, PROBABILITIES, quantile_type)
    for i, row in enumerate(counts):
        keep = row > 0
        one = from_table(values[keep], row[keep].astype(np.float64), probabilities=False, normalise=False)
        want = order_statistics.quantiles(one, PROBABILITIES, quantile_type)
        assert np.array_equal(_bits(got[i]), _bits(want)), (i, got[i], want)


@pytest.mark.parametrize("average", [False, True])
def test_batched_cdf_quantiles_equal_each_row_as_its_own_weighted_sample(average):
    rng = np.random.default_rng(5)
    values = np.sort(rng.normal(0.0, 1.0, 30))
    weights = rng.uniform(0.2, 2.0, (150, values.size)) * (rng.uniform(size=(150, values.size)) < 0.6)
    weights[:, 0] += 0.5
    weights[:10] = np.where(np.arange(values.size) % 2 == 0, 1.0, 0.0)  # exact steps: averaged
    got = order_rules.cdf_quantiles(Rows(weights, None, False), values, PROBABILITIES, average=average)
    for i, row in enumerate(weights):
        keep = row > 0
        want = order_statistics.cdf_quantiles(values[keep], row[keep], PROBABILITIES, average_at_steps=average)
        assert np.array_equal(_bits(got[i]), _bits(want)), (i, got[i], want)


def test_batched_grouped_quantiles_equal_each_row_as_its_own_bins():
    edges = np.array([0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 12.0, 15.0])
    counts = _count_rows(edges.size - 1, 6)
    # p = 0 lands on the lower edge of the first bin holding data, in one row as in many.
    got = order_rules.grouped_quantiles(Rows(counts.astype(np.float64), None, True, counts), edges, PROBABILITIES)
    for i, row in enumerate(counts):
        want = grouped.quantiles(from_bins(list(edges), list(row.astype(np.float64))), PROBABILITIES)
        assert np.array_equal(_bits(got[i]), _bits(want)), (i, got[i], want)


def test_leave_one_out_rows_equal_the_data_without_that_observation():
    # Reference: the single-row rules on the count table with one count taken away.
    values = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 7.0, 10.0])
    counts = np.array([6.0, 11.0, 9.0, 5.0, 3.0, 1.0, 2.0, 1.0])
    rows = LeaveOneOut(counts, np.ones(counts.size))
    hf = order_rules.hf_quantiles(rows, values, PROBABILITIES, 7)
    middle = order_rules.median(rows, values, whole=True, average=True)
    for i in range(counts.size):
        fewer = counts.copy()
        fewer[i] -= 1.0
        keep = fewer > 0
        one = from_table(values[keep], fewer[keep], probabilities=False, normalise=False)
        assert np.array_equal(_bits(hf[i]), _bits(order_statistics.quantiles(one, PROBABILITIES, 7))), i
        assert middle[i] == order_statistics.median(one), i


def test_one_row_views_agree_with_each_other_on_a_raw_sample():
    # A raw sample read by index (SortedRow) and the same sample as a count table of ones
    # (CumulativeRow, searched) give the same order statistics.
    x = np.sort(np.random.default_rng(8).normal(size=101))
    by_index = order_rules.hf_quantiles(order_rules.SortedRow(x.size), x, PROBABILITIES, 6)
    searched = order_rules.hf_quantiles(order_rules.CumulativeRow(np.ones(x.size)), x, PROBABILITIES, 6)
    assert np.array_equal(_bits(by_index), _bits(searched))
    assert order_statistics.quantiles(from_array(x), PROBABILITIES, 6).tolist() == by_index[0].tolist()


def test_middle_ranks_are_numpys_median_positions():
    # Reference: numpy's median averages sorted[(n - 1) // 2] and sorted[n // 2] (0-based).
    for n in range(1, 12):
        low, high = order_rules.middle_ranks(np.array(float(n)))
        assert (low - 1, high - 1) == ((n - 1) // 2, n // 2), n
    assert order_rules.middle_ranks(np.array([4.0, 5.0])).tolist() == [[2.0, 3.0], [3.0, 3.0]]


def test_whole_counts_are_whole_and_exact():
    assert order_rules.whole_counts(None, 10.0)
    assert order_rules.whole_counts(np.array([1.0, 3.0, 0.0]), 4.0)
    assert not order_rules.whole_counts(np.array([1.0, 2.5]), 3.5)
    assert not order_rules.whole_counts(np.array([2.0**53]), 2.0**53)  # no longer exact in float64
    data = from_samples([1.0, 2.0], omit_missing=False, weights=[1.0, 2.0], meaning=WeightMeaning.FREQUENCY)
    assert order_rules.whole_counts(data.weights, data.total_weight) == data.integer_weights


def test_snap_to_whole_absorbs_one_ulp_only():
    assert order_rules.snap_to_whole(np.array([100 * 0.07])).tolist() == [7.0]
    assert order_rules.snap_to_whole(np.array([7.0 + 1e-9])).tolist() == [7.0 + 1e-9]


# --- issue 15: the upper quantiles of weighted distributions never stop below weight ------------


def _exact_cdf_quantile(values: np.ndarray, weights: np.ndarray, p: float) -> float:
    """Smallest x with F(x) >= p in exact rational arithmetic (fractions.Fraction of the float64
    weights and of p): the definition the one-row and many-row rules approximate."""
    from fractions import Fraction

    exact = [Fraction(float(w)) for w in weights]
    total = sum(exact)
    wanted = Fraction(float(p)) * total
    running = Fraction(0)
    for x, w in zip(values, exact):
        running += w
        if running >= wanted:
            return float(x)
    raise AssertionError("p above 1")


def _clear_of_steps(weights: np.ndarray, p: float) -> bool:
    """No step of F lies within the rules' rounding allowance (a relative 1e-12 of the nearer
    tail) of p, so the exact answer is the only right one."""
    from fractions import Fraction

    exact = [Fraction(float(w)) for w in weights]
    total = sum(exact)
    target = Fraction(float(p)) * total
    allowance = Fraction(order_rules.CDF_TOLERANCE) * min(target, total - target)
    running = Fraction(0)
    for w in exact:
        running += w
        if running != target and abs(running - target) <= allowance:
            return False
    return True


def test_p_one_is_the_largest_outcome_holding_weight():
    # The case of the issue: 0.5 + 0.5 + 1e-17 sums to 1 in float64 before the last outcome.
    values, weights = np.array([1.0, 2.0, 3.0]), np.array([0.5, 0.5, 1e-17])
    for average in (False, True):
        got = order_statistics.cdf_quantiles(values, weights, np.array([0.5, 1.0]), average_at_steps=average)
        assert got[1] == 3.0 == _exact_cdf_quantile(values, weights, 1.0)
    table = from_table(values, weights, probabilities=True, normalise=False)
    from tailgauge.core import DescribeOptions, describe

    described = describe(table, DescribeOptions(probabilities=(1.0,)), kind="table")
    assert described.quantiles[0].value == 3.0 == described.descriptors["maximum"].value
    weighted = from_samples([1.0, 2.0, 3.0], omit_missing=False, weights=[0.5, 0.5, 1e-17])
    described = describe(weighted, DescribeOptions(probabilities=(1.0,), quantile_type=1), kind="samples")
    assert described.quantiles[0].value == 3.0


@pytest.mark.parametrize("seed", range(6))
def test_cdf_quantiles_equal_exact_rational_arithmetic(seed):
    """Tails of every size, down to weights far below the total's rounding: the answer is the
    exact one (fractions.Fraction) wherever no step lies within the rounding allowance."""
    rng = np.random.default_rng(seed)
    k = 40
    values = np.sort(rng.normal(0.0, 1.0, k))
    weights = rng.uniform(0.1, 1.0, k)
    tail = rng.integers(1, 8)
    weights[-tail:] = 10.0 ** -rng.uniform(8.0, 300.0, tail)  # far tails: 1e-8 .. 1e-300 of the rest
    weights[: rng.integers(0, 3)] = 1e-20  # and at the bottom
    probabilities = np.array(
        [0.0, 1e-25, 1e-15, 0.01, 0.25, 0.5, 0.75, 0.99, 1 - 1e-9, 1 - 1e-13, 1 - 2.0**-52, 1 - 2.0**-53, 1.0]
    )
    checked = [p for p in probabilities if _clear_of_steps(weights, p)]
    assert 1.0 in checked and len(checked) >= 10
    for average in (False, True):
        got = order_statistics.cdf_quantiles(values, weights, np.array(checked), average_at_steps=average)
        # Type 2 averages only where F(x) = p exactly: with these weights only at p = 0 and 1,
        # where there is no value before or after, so it gives the type 1 answer too.
        want = [_exact_cdf_quantile(values, weights, p) for p in checked]
        assert got.tolist() == want, (checked, got, want)


def test_truncated_poisson_table_against_its_closed_form():
    """Poisson(4) truncated at 30, as a probability table of scipy.stats.poisson.pmf (scipy 1.17,
    reference library). Closed form of the truncated distribution: P(X > k | X <= 30) =
    (sf(k) - sf(30)) / cdf(30); Q(p) is the smallest k with that <= 1 - p, and Q(1) = 30."""
    from scipy import stats

    from tailgauge.core import DescribeOptions, describe

    support = np.arange(31)
    pmf = stats.poisson.pmf(support, 4.0)
    probabilities = (0.5, 0.9, 0.99, 1 - 1e-6, 1 - 1e-9, 1 - 1e-12, 1 - 1e-14, 1.0)
    described = describe(
        from_table(support.astype(np.float64), pmf, probabilities=True, normalise=False),
        DescribeOptions(probabilities=probabilities),
        kind="table",
    )
    above = (stats.poisson.sf(support, 4.0) - stats.poisson.sf(30, 4.0)) / stats.poisson.cdf(30, 4.0)
    for quantile, p in zip(described.quantiles, probabilities):
        closed_form = int(np.flatnonzero(above <= 1.0 - p)[0])
        assert quantile.value == float(closed_form) == _exact_cdf_quantile(support, pmf, p), p
    assert described.quantiles[-1].value == 30.0
