"""The medcouple's threshold search (``robust.medcouple``) against three references.

* ``naive_medcouple`` / ``naive_weighted_medcouple`` below: every kernel value formed and
  sorted, the obviously-correct definition (Brys, Hubert & Struyf 2004, definition 2, on the
  same power-of-two-scaled values): the new search must equal it bit for bit.
* ``reference_bisection_medcouple`` below: a verbatim copy of the previous implementation (a
  bisection of the threshold with a full binary search per step). On data without repeated
  kernel values it equals the new search bit for bit. Where many kernel values are equal, its
  bisection could end on a threshold within an ulp or two of them (its floating-point count
  ``l <= u (t - 1)/(t + 1)`` puts such kernel values on either side) and return that threshold
  rather than a kernel value (0.5 for 0.5000000000000001, -2**-54 for 0.0); there the new
  search returns the kernel value, as the naive definition does, and the two agree to within
  a few ulps.
* statsmodels 0.15.0 ``statsmodels.stats.stattools.medcouple`` (the same tie rule for raw
  samples; it works on unscaled differences, so to rounding).

The search's own paths (grid estimate, margins, chunked value selection for many equal
kernel values, the split when the two middle ranks fall either side of a threshold) are
exercised at small n by shrinking its working sizes.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.stats.stattools import medcouple as statsmodels_medcouple
from tailgauge.core import robust
from tailgauge.core.order_rules import middle_ranks, whole_counts

# ---------------------------------------------------------------------------------------------
# References


def _scaled_deviations(values: np.ndarray, median: float) -> np.ndarray:
    largest = float(np.max(np.abs(values)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    return np.ldexp(values, exponent) - math.ldexp(median, exponent)


def naive_medcouple(values: np.ndarray, median: float) -> float:
    """Every kernel value of a raw sample, sorted; the middle one (or the mean of the two)."""
    z = _scaled_deviations(np.asarray(values, dtype=np.float64), median)
    upper, lower, ties = z[z > 0.0], z[z < 0.0], int(np.count_nonzero(z == 0.0))
    kernel = ((upper[:, None] + lower[None, :]) / (upper[:, None] - lower[None, :])).ravel()
    signs = ties * (ties - 1) // 2
    every = np.sort(
        np.concatenate(
            (
                kernel,
                np.full(ties * lower.size + signs, -1.0),
                np.zeros(ties),
                np.full(ties * upper.size + signs, 1.0),
            )
        )
    )
    if every.size == 0:
        return math.nan
    middle = every.size // 2
    return float(every[middle]) if every.size % 2 else float(0.5 * every[middle - 1] + 0.5 * every[middle])


def naive_weighted_medcouple(values: np.ndarray, weights: np.ndarray, median: float) -> float:
    """Fractional weights: the smallest kernel value with at least half the pair weight at or
    below it (less the same 1e-12 relative allowance the service grants rounding)."""
    z = _scaled_deviations(np.asarray(values, dtype=np.float64), median)
    w = np.asarray(weights, dtype=np.float64) / float(np.max(weights))
    upper, upper_w, lower, lower_w = z[z > 0.0], w[z > 0.0], z[z < 0.0], w[z < 0.0]
    ties = float(np.sum(w[z == 0.0]))
    kernel = ((upper[:, None] + lower[None, :]) / (upper[:, None] - lower[None, :])).ravel()
    pair_w = (upper_w[:, None] * lower_w[None, :]).ravel()
    total = (upper_w.sum() + ties) * (lower_w.sum() + ties)
    kernel = np.concatenate((kernel, [-1.0, 1.0]))
    pair_w = np.concatenate((pair_w, [ties * lower_w.sum() + ties * ties / 2, upper_w.sum() * ties + ties * ties / 2]))
    order = np.argsort(kernel, kind="stable")
    reached = np.cumsum(pair_w[order])
    at = int(np.searchsorted(reached, 0.5 * total - 1e-12 * total, side="left"))
    return float(kernel[order][min(at, kernel.size - 1)])


def reference_bisection_medcouple(values: np.ndarray, weights: np.ndarray | None, median: float) -> float:
    """The previous implementation, verbatim (threshold bisection, one full binary search per
    step), kept as an oracle."""
    largest = float(np.max(np.abs(values)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    z = np.ldexp(values, exponent) - math.ldexp(median, exponent)
    w = np.ones_like(z) if weights is None else weights
    whole = weights is None or whole_counts(w, float(np.sum(w)))
    if not whole:
        w = w / float(np.max(w))
    ties = float(np.sum(w[z == 0.0]))
    upper, upper_w = z[z > 0.0], w[z > 0.0]
    lower, lower_w = z[z < 0.0], w[z < 0.0]
    lower_cum = np.concatenate(([0.0], np.cumsum(lower_w)))
    total_lower, total_upper = float(lower_cum[-1]), float(np.sum(upper_w))
    total = (total_upper + ties) * (total_lower + ties)
    if total == 0.0:
        return math.nan
    tie_signs = ties * (ties - 1.0) / 2.0 if whole else ties * ties / 2.0
    tie_zeros = ties if whole else 0.0
    minus_ones = ties * total_lower + tie_signs
    plus_ones = total_upper * ties + tie_signs
    limit = max(min(upper.size, 1 << 20), 64)

    def bounds(t: float) -> np.ndarray:
        if t <= -1.0:
            return np.zeros(upper.size, dtype=np.intp)
        if t >= 1.0:
            return np.full(upper.size, lower.size, dtype=np.intp)
        return np.searchsorted(lower, upper * ((t - 1.0) / (t + 1.0)), side="right")

    def at_most(t: float, found: np.ndarray) -> float:
        count = minus_ones + (tie_zeros if t >= 0.0 else 0.0)
        return count + float(np.dot(upper_w, lower_cum[found]))

    def select(low: float, high: float, start: np.ndarray, stop: np.ndarray, rank: float) -> float:
        counts = stop - start
        rows = np.repeat(np.arange(upper.size), counts)
        offsets = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
        columns = offsets + np.repeat(start, counts)
        u, l = upper[rows], lower[columns]
        kernel = (u + l) / (u - l)
        pair_weight = upper_w[rows] * lower_w[columns]
        if low < 0.0 <= high and tie_zeros > 0.0:
            kernel = np.append(kernel, 0.0)
            pair_weight = np.append(pair_weight, tie_zeros)
        slack = 0.0 if whole else 1e-12 * total
        return _reference_weighted_select(kernel, pair_weight, rank - slack, high)

    def kth(first_rank: float, last_rank: float) -> tuple[float, float]:
        if last_rank <= minus_ones:
            return -1.0, -1.0
        if first_rank > total - plus_ones:
            return 1.0, 1.0
        if first_rank <= minus_ones or last_rank > total - plus_ones:
            return kth(first_rank, first_rank)[0], kth(last_rank, last_rank)[0]
        low, high = -1.0, 1.0
        low_bounds, high_bounds = bounds(low), bounds(high)
        while int(np.sum(high_bounds - low_bounds)) > limit:
            middle = 0.5 * (low + high)
            if middle in (low, high):
                return high, high
            middle_bounds = bounds(middle)
            reached = at_most(middle, middle_bounds)
            if reached >= last_rank:
                high, high_bounds = middle, middle_bounds
            elif reached < first_rank:
                low, low_bounds = middle, middle_bounds
            else:
                return (
                    one_rank(first_rank, low, middle, low_bounds, middle_bounds),
                    one_rank(last_rank, middle, high, middle_bounds, high_bounds),
                )
        below = at_most(low, low_bounds)
        first = select(low, high, low_bounds, high_bounds, first_rank - below)
        last = first if last_rank == first_rank else select(low, high, low_bounds, high_bounds, last_rank - below)
        return first, last

    def one_rank(rank: float, low: float, high: float, low_bounds: np.ndarray, high_bounds: np.ndarray) -> float:
        while int(np.sum(high_bounds - low_bounds)) > limit:
            middle = 0.5 * (low + high)
            if middle in (low, high):
                return high
            middle_bounds = bounds(middle)
            if at_most(middle, middle_bounds) >= rank:
                high, high_bounds = middle, middle_bounds
            else:
                low, low_bounds = middle, middle_bounds
        return select(low, high, low_bounds, high_bounds, rank - at_most(low, low_bounds))

    if whole:
        lower_rank, upper_rank = (int(rank) for rank in middle_ranks(total))
        first, last = kth(lower_rank, upper_rank)
        return first if upper_rank == lower_rank else 0.5 * first + 0.5 * last
    return kth(0.5 * total, 0.5 * total)[0]


def _reference_weighted_select(values: np.ndarray, weights: np.ndarray, rank: float, default: float) -> float:
    while values.size:
        pivot = np.partition(values, values.size // 2)[values.size // 2]
        below, equal = values < pivot, values == pivot
        weight_below = float(np.sum(weights[below]))
        if rank <= weight_below:
            values, weights = values[below], weights[below]
            continue
        if rank <= weight_below + float(np.sum(weights[equal])):
            return float(pivot)
        rank -= weight_below + float(np.sum(weights[equal]))
        above = values > pivot
        values, weights = values[above], weights[above]
    return default


# ---------------------------------------------------------------------------------------------
# Data


def _draw(kind: str, n: int, rng: np.random.Generator) -> np.ndarray:
    if kind == "lognormal":
        x = rng.lognormal(0.0, 0.6, n)
    elif kind == "normal":
        x = rng.normal(5.0, 2.0, n)
    elif kind == "cauchy":
        x = rng.standard_cauchy(n)
    elif kind == "pareto":
        x = rng.pareto(1.2, n)
    elif kind == "integers":  # heavily tied, many values at the median
        x = np.round(rng.normal(0.0, 2.0, n))
    elif kind == "rounded":
        x = np.round(rng.exponential(2.0, n), 1)
    elif kind == "median-block":  # two fifths of the values exactly at the median
        x = rng.normal(size=n)
        x[: (2 * n) // 5] = np.median(x)
    elif kind == "progression":  # distinct values, many equal kernel values
        x = np.arange(n, dtype=np.float64) * 0.25 + 3.0
    else:
        raise AssertionError(kind)
    return np.sort(x)


CONTINUOUS = ("lognormal", "normal", "cauchy", "pareto")
TIED = ("integers", "rounded", "median-block", "progression")


def _same(a: float, b: float) -> bool:
    return a == b or (math.isnan(a) and math.isnan(b))


def _new(x: np.ndarray, weights: np.ndarray | None = None) -> float:
    median = float(np.median(x)) if weights is None else _weighted_median(x, weights)
    return robust.medcouple(x, weights, median)


def _weighted_median(values: np.ndarray, counts: np.ndarray) -> float:
    return float(np.median(np.repeat(values, counts.astype(np.int64))))


@pytest.fixture
def tiny_search(monkeypatch):
    """Shrink the search's working sizes so small samples take every path of a large one."""
    monkeypatch.setattr(robust, "_ENUMERATED", 48)
    monkeypatch.setattr(robust, "_GRID_ROWS", 8)
    monkeypatch.setattr(robust, "_DIRECT_PAIRS", 4)
    monkeypatch.setattr(robust, "_CHUNK", 4)
    monkeypatch.setattr(robust, "_FEW", 16)


# ---------------------------------------------------------------------------------------------
# Against the naive definition: bit for bit


@pytest.mark.parametrize("kind", CONTINUOUS + TIED)
def test_every_n_up_to_50_equals_the_naive_definition(kind):
    rng = np.random.default_rng(1600 + len(kind))
    for n in range(1, 51):
        x = _draw(kind, n, rng)
        median = float(np.median(x))
        assert _same(robust.medcouple(x, None, median), naive_medcouple(x, median)), (kind, n)


@pytest.mark.parametrize("kind", CONTINUOUS + TIED)
@pytest.mark.parametrize("n", [201, 600, 1001, 1600])
def test_larger_samples_equal_the_naive_definition(kind, n):
    rng = np.random.default_rng(n)
    x = _draw(kind, n, rng)
    median = float(np.median(x))
    assert _same(robust.medcouple(x, None, median), naive_medcouple(x, median))


@pytest.mark.parametrize("kind", CONTINUOUS + TIED)
@pytest.mark.parametrize("seed", range(6))
def test_every_search_path_equals_the_naive_definition(tiny_search, kind, seed):
    """Grid estimate with margins, exact counts in chunks, value selection over chunks of
    candidates (the progression's equal kernel values), at n where the naive sort is cheap."""
    rng = np.random.default_rng(77 + seed)
    n = int(rng.integers(60, 400))
    x = _draw(kind, n, rng)
    median = float(np.median(x))
    assert _same(robust.medcouple(x, None, median), naive_medcouple(x, median)), (kind, n)


@pytest.mark.parametrize("kind", ("progression", "integers", "median-block", "cauchy"))
def test_the_search_bisects_on_when_too_many_candidates_for_a_value_selection(tiny_search, monkeypatch, kind):
    """With the value selection's cap below the candidates, a search that stops halving them
    halves its bracket instead until the thresholds are adjacent doubles."""
    monkeypatch.setattr(robust, "_STREAMED", 64)
    rng = np.random.default_rng(5)
    for n in (150, 151, 360):
        x = _draw(kind, n, rng)
        median = float(np.median(x))
        assert _same(robust.medcouple(x, None, median), naive_medcouple(x, median)), (kind, n)


def test_raw_observations_with_repeated_values_are_counted_when_the_search_stalls(tiny_search, monkeypatch):
    """Integers passed as raw observations: many kernel values equal each other; when the search
    stops halving its candidates it starts again on the distinct values with their counts."""
    monkeypatch.setattr(robust, "_STREAMED", 64)
    calls = []
    original = robust.medcouple

    def spy(values, weights, median):
        calls.append(weights is not None)
        return original(values, weights, median)

    monkeypatch.setattr(robust, "medcouple", spy)
    x = _draw("integers", 400, np.random.default_rng(8))
    median = float(np.median(x))
    assert spy(x, None, median) == naive_medcouple(x, median)
    assert calls == [False, True]


def test_the_chunked_value_selection_is_taken_for_equal_kernel_values(tiny_search, monkeypatch):
    """The progression's kernel has many equal values at its median: the search stops making
    progress and selects by value over chunks of candidates (and still equals the definition)."""
    taken = []
    streamed = robust._Kernel._select_streamed

    def spy(self, *args):
        taken.append(True)
        return streamed(self, *args)

    monkeypatch.setattr(robust._Kernel, "_select_streamed", spy)
    x = _draw("progression", 301, np.random.default_rng(0))
    median = float(np.median(x))
    assert robust.medcouple(x, None, median) == naive_medcouple(x, median)
    assert taken


# ---------------------------------------------------------------------------------------------
# Against the previous implementation


@pytest.mark.parametrize("kind", CONTINUOUS)
@pytest.mark.parametrize("n", [2, 3, 10, 99, 100, 500, 3001, 20000])
def test_continuous_data_equal_the_previous_implementation_bit_for_bit(kind, n):
    rng = np.random.default_rng(3 * n + 1)
    x = _draw(kind, n, rng)
    median = float(np.median(x))
    assert _same(robust.medcouple(x, None, median), reference_bisection_medcouple(x, None, median))


def test_a_large_sample_through_the_grid_estimate_equals_the_previous_implementation(monkeypatch):
    """6e4 values with 1,024 grid rows: margins, two exact chunked counts and an enumeration."""
    monkeypatch.setattr(robust, "_GRID_ROWS", 1024)
    rng = np.random.default_rng(60000)
    for kind in ("lognormal", "cauchy"):
        x = _draw(kind, 60000, rng)
        median = float(np.median(x))
        assert robust.medcouple(x, None, median) == reference_bisection_medcouple(x, None, median)


@pytest.mark.parametrize("kind", TIED)
@pytest.mark.parametrize("n", [7, 40, 41, 300, 1201])
def test_tied_data_agree_with_the_previous_implementation_to_a_few_ulps(kind, n):
    """Where the previous bisection ended on a threshold next to many equal kernel values it
    returned the threshold, not a kernel value; the new value is the naive definition's."""
    rng = np.random.default_rng(5 * n + 2)
    x = _draw(kind, n, rng)
    median = float(np.median(x))
    new, old = robust.medcouple(x, None, median), reference_bisection_medcouple(x, None, median)
    assert new == pytest.approx(old, abs=4 * np.finfo(np.float64).eps)
    assert new == naive_medcouple(x, median)


# ---------------------------------------------------------------------------------------------
# Weights


@pytest.mark.parametrize("kind", CONTINUOUS + TIED)
@pytest.mark.parametrize("seed", range(4))
def test_whole_counts_equal_the_expanded_sample(kind, seed):
    rng = np.random.default_rng(900 + seed)
    n = int(rng.integers(5, 700))
    x = _draw(kind, n, rng)
    if kind in CONTINUOUS:  # give continuous data repeated values
        x = np.sort(np.repeat(x, rng.integers(1, 4, x.size)))
    values, counts = np.unique(x, return_counts=True)
    median = float(np.median(x))
    expected = naive_medcouple(x, median)
    assert _same(robust.medcouple(values, counts.astype(np.float64), median), expected)
    assert _same(robust.medcouple(x, None, median), expected)


@pytest.mark.parametrize("seed", range(4))
def test_whole_counts_through_every_search_path(tiny_search, seed):
    rng = np.random.default_rng(40 + seed)
    x = np.sort(np.repeat(rng.lognormal(0.0, 1.0, 150), rng.integers(1, 5, 150)))
    values, counts = np.unique(x, return_counts=True)
    median = float(np.median(x))
    assert robust.medcouple(values, counts.astype(np.float64), median) == naive_medcouple(x, median)


@pytest.mark.parametrize("kind", CONTINUOUS + ("rounded", "integers"))
@pytest.mark.parametrize("seed", range(3))
def test_fractional_weights_equal_the_weighted_definition_and_the_previous_implementation(kind, seed):
    rng = np.random.default_rng(1200 + seed)
    values = np.unique(_draw(kind, int(rng.integers(3, 500)), rng))
    weights = rng.random(values.size) + 0.05
    median = float(values[np.searchsorted(np.cumsum(weights), 0.5 * weights.sum())])
    new = robust.medcouple(values, weights, median)
    assert _same(new, naive_weighted_medcouple(values, weights, median))
    if kind in CONTINUOUS:
        assert _same(new, reference_bisection_medcouple(values, weights, median))


@pytest.mark.parametrize("seed", range(3))
def test_fractional_weights_through_every_search_path(tiny_search, seed):
    rng = np.random.default_rng(70 + seed)
    values = np.unique(rng.standard_cauchy(300))
    weights = rng.random(values.size) + 0.05
    median = float(values[np.searchsorted(np.cumsum(weights), 0.5 * weights.sum())])
    assert robust.medcouple(values, weights, median) == naive_weighted_medcouple(values, weights, median)


# ---------------------------------------------------------------------------------------------
# statsmodels, and the crossover between forming every pair and searching


@pytest.mark.parametrize("kind", CONTINUOUS + TIED)
@pytest.mark.parametrize("n", [5, 6, 51, 400, 1501])
def test_raw_samples_agree_with_statsmodels(kind, n):
    rng = np.random.default_rng(11 * n)
    x = _draw(kind, n, rng)
    expected = float(statsmodels_medcouple(x, use_fast=n > 600))
    assert _new(x) == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize("n", range(170, 200, 3))
def test_every_pair_at_once_and_the_search_agree_at_the_crossover(monkeypatch, n):
    """About 8,192 pairs (n near 181) is where the service switches; both ways, both sides."""
    rng = np.random.default_rng(n)
    for kind in ("lognormal", "integers", "median-block"):
        x = _draw(kind, n, rng)
        median = float(np.median(x))
        monkeypatch.setattr(robust, "_DIRECT_PAIRS", 1 << 40)
        every_pair = robust.medcouple(x, None, median)
        monkeypatch.setattr(robust, "_DIRECT_PAIRS", 0)
        searched = robust.medcouple(x, None, median)
        assert _same(every_pair, searched), (kind, n)
        assert _same(searched, naive_medcouple(x, median))


def test_integer_input_is_taken_as_float():
    x = np.array([1, 2, 2, 3, 7, 9, 10, 40])
    assert _new(x) == naive_medcouple(x.astype(np.float64), float(np.median(x)))


def test_subnormal_scaled_values_round_as_ldexp_rounds_them():
    """Scaling by a power of two below the normal range: values that become subnormal are
    scaled by np.ldexp, as before, so kernels built from them are unchanged."""
    x = np.sort(np.array([-3e-308, -1e-310, 2e-311, 5e-310, 1e-309, 4.0, 7.5, 1e300]))
    median = float(np.median(x))
    assert robust.medcouple(x, None, median) == naive_medcouple(x, median)
    assert robust.medcouple(x, None, median) == reference_bisection_medcouple(x, None, median)


@pytest.mark.parametrize("kind", ("integers", "median-block", "rounded", "lognormal"))
def test_an_exact_count_is_the_number_of_kernel_values_at_or_below_the_threshold(kind):
    """The search's count at t (its tie signs at -1, the tie block's zeros from t = 0 on, and
    the kernel values of pairs) against a count over every kernel value, at t = 0 where the
    zeros of the tie block and of pairs u = -l join, and at thresholds between kernel values."""
    rng = np.random.default_rng(31)
    x = _draw(kind, 301, rng)
    median = float(np.median(x))
    z = _scaled_deviations(x, median)
    upper, lower, ties = z[z > 0.0], z[z < 0.0], float(np.count_nonzero(z == 0.0))
    minus_ones = ties * lower.size + ties * (ties - 1.0) / 2.0
    kernel = robust._Kernel(upper, None, lower, None, None, minus_ones, ties)
    every = ((upper[:, None] + lower[None, :]) / (upper[:, None] - lower[None, :])).ravel()
    for t in (-0.7182818, -0.1234567, 0.0, 0.1234567, 0.5772156):
        expected = minus_ones + (ties if t >= 0.0 else 0.0) + np.count_nonzero(every <= t)
        assert kernel.exact(t).at_most == expected, t
