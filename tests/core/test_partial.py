"""Mergeable partial states (service/tailgauge/core/partial.py): exact merging and the descriptors of a merge.

Outside references, named beside each check:

* Exact rational arithmetic (fractions.Fraction) on the float64 values: the central sums of the
  union by their definition, and Pébay's pairwise update (P. Pébay, "Formulas for robust, one-pass
  parallel computation of covariances and arbitrary-order statistical moments", Sandia report
  SAND2008-6212, 2008) evaluated exactly, which must agree with it.
* scipy.stats.moment (scipy 1.17.1, pinned), a two-pass central moment, on the concatenated data.
* NIST StRD NumAcc4 (tests/reference/strd/NumAcc4.txt, certified sd 0.1): the stiff case of a
  large mean and a tiny spread, which naive power sums get wrong.
* ``describe`` on the concatenated data: the merged state must give the same moment descriptors.
"""

from __future__ import annotations

import math
import pathlib
from fractions import Fraction

import numpy as np
import pytest
import scipy.stats
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    PartialState,
    UncomputableInput,
    WeightMeaning,
    check_states,
    describe,
    describe_state,
    from_array,
    from_bins,
    from_samples,
    from_table,
    merge,
    merge_states,
    partial_state,
    state_of,
)
from tailgauge.core.catalog import WARNINGS
from tailgauge.core.describe import MOMENT_DESCRIPTORS

STRD = pathlib.Path(__file__).resolve().parents[1] / "reference" / "strd"
PROPERTY_SETTINGS = settings(
    max_examples=120, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow]
)


def exact_state(values: list[float], order: int) -> tuple[Fraction, Fraction, list[Fraction]]:
    """(n, mean, [M2 .. Mp]) of the float64 values, in exact rational arithmetic, by definition."""
    xs = [Fraction(v) for v in values]
    n = Fraction(len(xs))
    mean = sum(xs) / n
    return n, mean, [sum((x - mean) ** p for x in xs) for p in range(2, order + 1)]


def pebay_exact(a, b, order: int):
    """Pébay (2008) pairwise update of arbitrary order, evaluated in exact rational arithmetic.

    M_p = M_p,a + M_p,b + sum_{k=1}^{p-2} C(p,k) [(-nb/n)^k M_{p-k},a + (na/n)^k M_{p-k},b] delta^k
          + (na nb delta / n)^p [1 / nb^(p-1) - (-1 / na)^(p-1)]
    """
    na, mean_a, sums_a = a
    nb, mean_b, sums_b = b
    n = na + nb
    delta = mean_b - mean_a
    ma = {0: na, 1: Fraction(0), **{j: s for j, s in zip(range(2, order + 1), sums_a)}}
    mb = {0: nb, 1: Fraction(0), **{j: s for j, s in zip(range(2, order + 1), sums_b)}}
    merged = []
    for p in range(2, order + 1):
        total = ma[p] + mb[p]
        for k in range(1, p - 1):
            total += math.comb(p, k) * ((-nb / n) ** k * ma[p - k] + (na / n) ** k * mb[p - k]) * delta**k
        total += (na * nb * delta / n) ** p * (1 / nb ** (p - 1) - (-1 / na) ** (p - 1))
        merged.append(total)
    return n, mean_a + delta * nb / n, merged


def test_issue_example_merges_exactly():
    """[1, 2, 3, 4] merged with [10, 20]: n = 6, mean 20/3, M2 = 790/3, M3 = 18500/9, M4 = 301186/9."""
    a, b = [1.0, 2.0, 3.0, 4.0], [10.0, 20.0]
    union = exact_state(a + b, 4)
    assert union == (6, Fraction(20, 3), [Fraction(790, 3), Fraction(18500, 9), Fraction(301186, 9)])
    # Pébay's formula in exact arithmetic reproduces the definition.
    assert pebay_exact(exact_state(a, 4), exact_state(b, 4), 4) == union

    merged = merge(partial_state(a), partial_state(b))
    assert merged.count == 6.0
    assert merged.minimum == 1.0 and merged.maximum == 20.0
    # float64 evaluation: a few units of roundoff (2.2e-16) from the exact fractions.
    assert merged.mean == pytest.approx(float(union[1]), rel=4e-16)
    for got, want in zip(merged.central_sums, union[2]):
        assert got == pytest.approx(float(want), rel=1e-15)


def test_pebay_update_is_exact_at_order_twelve():
    """Order 12 on small integers: the float64 merge agrees with exact arithmetic to roundoff."""
    rng = np.random.default_rng(20260601)
    a = rng.integers(-50, 50, 13).astype(float).tolist()
    b = rng.integers(0, 400, 7).astype(float).tolist()
    union = exact_state(a + b, 12)
    assert pebay_exact(exact_state(a, 12), exact_state(b, 12), 12) == union
    merged = merge(partial_state(a, order=12), partial_state(b, order=12))
    assert merged.mean == pytest.approx(float(union[1]), rel=1e-15)
    n, mean, sums = union
    deviations = [abs(Fraction(x) - mean) for x in a + b]
    for p, (got, want) in enumerate(zip(merged.central_sums, sums), start=2):
        # Relative to sum |x - mean|^p, the size of the terms that cancel in odd orders.
        scale = float(sum(d**p for d in deviations))
        assert abs(got - float(want)) <= 1e-14 * scale, p


def _random_partitions(x: np.ndarray, parts: int, rng) -> list[np.ndarray]:
    """Contiguous pieces at random cut points; some pieces are empty."""
    cuts = np.sort(rng.integers(0, x.size + 1, parts - 1))
    return np.split(x, cuts)


@pytest.mark.parametrize("arrangement", ["shuffled", "sorted"])
def test_thousand_partitions_equal_the_direct_computation(arrangement):
    rng = np.random.default_rng(20260602)
    x = rng.gamma(2.0, 3.0, 200_000) + 40.0
    if arrangement == "sorted":
        x = np.sort(x)  # every partition has its own mean: the corrections carry the sums
    pieces = _random_partitions(x, 1000, rng)
    merged = merge_states([partial_state(p) for p in pieces])
    assert merged.count == x.size
    assert merged.minimum == x.min() and merged.maximum == x.max()
    # scipy.stats.moment (scipy 1.17.1): two-pass central moments of the concatenation.
    assert merged.mean == pytest.approx(float(np.mean(x)), rel=1e-12)
    for p, got in enumerate(merged.central_sums, start=2):
        assert got == pytest.approx(x.size * scipy.stats.moment(x, p), rel=1e-12), p
    direct = partial_state(x)
    for got, want in zip(merged.central_sums, direct.central_sums):
        assert got == pytest.approx(want, rel=1e-12)


def test_higher_orders_match_scipy():
    rng = np.random.default_rng(20260603)
    x = rng.gamma(3.0, 2.0, 50_000)
    merged = merge_states([partial_state(p, order=12) for p in _random_partitions(x, 1000, rng)])
    assert merged.order == 12
    for p, got in enumerate(merged.central_sums, start=2):
        # scipy.stats.moment (scipy 1.17.1) on the concatenation; gamma data: every order positive.
        assert got / x.size == pytest.approx(scipy.stats.moment(x, p), rel=1e-11), p


def test_stiff_data_keep_their_accuracy_through_merging():
    """NIST StRD NumAcc4: mean 10000000.2, certified sd 0.1; float64 allows about 8.2 digits."""
    values = np.array(
        [float(line) for line in (STRD / "NumAcc4.txt").read_text().splitlines() if line and line[0] != "#"]
    )
    assert values.size == 1001
    rng = np.random.default_rng(20260604)
    for pieces in ([values[i : i + 1] for i in range(values.size)], _random_partitions(values, 37, rng)):
        merged = merge_states([partial_state(p) for p in pieces])
        sd = math.sqrt(merged.central_sums[0] / (merged.count - 1.0))
        assert -math.log10(abs(sd - 0.1) / 0.1) >= 8.2
        assert merged.mean == pytest.approx(10000000.2, rel=1e-15)


# Hypothesis: groupings and orders of the same parts give the same state. Values on a grid of
# 1/1024 up to 1e9: a state holds plain float64 sums, and M4 of two values 1e-100 apart (1e-400)
# is not representable; such data are refused, which test_central_sums_beyond_float64 covers.
grid_values = st.integers(min_value=-(2**40), max_value=2**40).map(lambda i: i / 1024.0)
parts_strategy = st.lists(
    st.lists(grid_values, min_size=0, max_size=12),
    min_size=3,
    max_size=8,
).filter(lambda parts: sum(len(p) for p in parts) >= 2)


def assert_same_state(a: PartialState, b: PartialState, values: np.ndarray) -> None:
    assert a.count == b.count and a.minimum == b.minimum and a.maximum == b.maximum
    spread = float(np.max(np.abs(values - values.mean()))) + 1e-300
    assert abs(a.mean - b.mean) <= 1e-12 * (abs(b.mean) + spread)
    for p, (u, v) in enumerate(zip(a.central_sums, b.central_sums), start=2):
        # Relative to count * spread^p, the size of the largest term (odd sums can cancel to ~0).
        assert abs(u - v) <= 1e-10 * a.count * spread**p, (p, u, v)


@PROPERTY_SETTINGS
@given(parts_strategy, st.randoms(use_true_random=False))
def test_merge_is_associative_and_order_independent(parts, rng):
    states = [partial_state(p) for p in parts]
    values = np.concatenate([np.asarray(p, dtype=float) for p in parts])
    direct = partial_state(values)
    left = states[0]
    for s in states[1:]:
        left = merge(left, s)
    right = states[-1]
    for s in reversed(states[:-1]):
        right = merge(s, right)
    shuffled = list(states)
    rng.shuffle(shuffled)
    for candidate in (left, right, merge_states(states), merge_states(shuffled)):
        assert_same_state(candidate, direct, values)


@PROPERTY_SETTINGS
@given(st.lists(grid_values, min_size=1, max_size=30))
def test_an_empty_state_is_the_identity(xs):
    state = partial_state(xs)
    empty = partial_state([])
    assert empty == PartialState.empty()
    assert merge(state, empty) == state and merge(empty, state) == state
    assert merge_states([empty, state, empty]) == state


def test_empty_states_merge_to_the_empty_state():
    assert merge_states([PartialState.empty(), partial_state([])]) == PartialState.empty()


def test_frequency_weights_are_repetition():
    rng = np.random.default_rng(20260605)
    values = rng.normal(10.0, 2.0, 40)
    counts = rng.integers(0, 6, 40).astype(float)
    weighted = partial_state(values, weights=counts)
    repeated = partial_state(np.repeat(values, counts.astype(int)))
    assert weighted.count == repeated.count == counts.sum()
    assert weighted.mean == pytest.approx(repeated.mean, rel=1e-14)
    variance = repeated.central_sums[0] / repeated.count
    for p, (u, v) in enumerate(zip(weighted.central_sums, repeated.central_sums), start=2):
        # Relative to n sigma^p: the odd sums of normal data are near zero.
        assert abs(u - v) <= 1e-12 * repeated.count * variance ** (p / 2), p
    assert weighted.minimum == values[counts > 0].min()


def test_states_of_different_orders_merge_at_the_lower_order():
    rng = np.random.default_rng(20260606)
    a, b = rng.normal(size=100), rng.normal(3.0, 1.0, 50)
    mixed = merge(partial_state(a, order=6), partial_state(b, order=4))
    assert mixed.order == 4
    assert mixed == merge(partial_state(a), partial_state(b))
    assert merge_states([partial_state(a, order=8), partial_state(b, order=5)]).order == 5


def test_state_of_accepts_unit_and_frequency_weights_only():
    values = [3.0, 1.0, 4.0, 1.0, 5.0]
    assert state_of(from_samples(values, omit_missing=False)) == partial_state(values)
    weights = [1.0, 2.0, 0.0, 1.0, 3.0]
    frequency = from_samples(values, omit_missing=False, weights=weights)
    assert state_of(frequency, 6) == partial_state(values, order=6, weights=weights)
    # Missing values omitted by the service are simply not in the state.
    assert state_of(from_samples([3.0, None, 4.0], omit_missing=True)) == partial_state([3.0, 4.0])
    rejected = [
        from_samples(values, omit_missing=False, weights=weights, meaning=WeightMeaning.RELIABILITY),
        from_table(np.array([1.0, 2.0]), np.array([0.5, 0.5]), probabilities=True, normalise=False),
        from_bins([0.0, 1.0, 2.0], [3.0, 4.0]),
    ]
    for data in rejected:
        with pytest.raises(UncomputableInput) as error:
            state_of(data)
        assert error.value.locations[0].path == "options.partial_state"


def test_partial_state_rejects_what_cannot_be_summarised():
    with pytest.raises(UncomputableInput) as error:
        partial_state([1.0, math.nan, 2.0, math.inf])
    assert [loc.path for loc in error.value.locations] == ["values[1]", "values[3]"]
    with pytest.raises(UncomputableInput) as error:
        partial_state([1.0, 2.0], weights=[1.0, -1.0])
    assert error.value.locations[0].path == "weights[1]"
    with pytest.raises(UncomputableInput):
        partial_state([1.0, 2.0], weights=[1.0])
    for order in (3, 13, 4.0):
        with pytest.raises(ValueError):
            partial_state([1.0, 2.0], order=order)


def test_central_sums_beyond_float64_are_refused_not_returned():
    # (1e80)^4 = 1e320 exceeds float64's largest value (1.8e308); order 3 would still fit.
    with pytest.raises(UncomputableInput, match="order 4"):
        partial_state([-1e80, 1e80])
    # Each part fits at order 5, but the union spans 2e70: its M5 (about 1e350) does not.
    a, b = partial_state([1e70, 1e70 + 2e55], order=5), partial_state([-1e70], order=5)
    with pytest.raises(UncomputableInput) as error:
        merge_states([a, b])
    assert error.value.locations[0].path == "states"


def _state(**changes) -> PartialState:
    base = {"count": 4.0, "mean": 2.5, "central_sums": (5.0, 0.0, 10.25), "minimum": 1.0, "maximum": 4.0}
    return PartialState(**{**base, **changes})


@pytest.mark.parametrize(
    ("changes", "field"),
    [
        ({"count": -1.0}, "count"),
        ({"count": math.inf}, "count"),
        ({"mean": math.nan}, "mean"),
        ({"central_sums": (5.0, 0.0)}, "central_sums"),
        ({"central_sums": (5.0,) * 12}, "central_sums"),
        ({"central_sums": (-5.0, 0.0, 10.25)}, "central_sums"),
        ({"central_sums": (5.0, 0.0, -10.25)}, "central_sums"),
        ({"central_sums": (5.0, math.inf, 10.25)}, "central_sums"),
        # |x - mean| <= 3 for values in [1, 4]: M2 <= 4 * 9.
        ({"central_sums": (37.0, 0.0, 10.25)}, "central_sums"),
        ({"mean": 4.5}, "mean"),
        ({"minimum": 5.0}, "maximum"),
        ({"minimum": None}, "minimum"),
        ({"count": 0.0}, "mean"),
        ({"count": 0.0, "mean": 0.0, "minimum": None, "maximum": None}, "central_sums"),
        ({"count": 0.0, "mean": 0.0, "central_sums": (0.0, 0.0, 0.0), "maximum": None}, "minimum"),
    ],
)
def test_inconsistent_states_are_located(changes, field):
    states = [_state(), _state(), _state(), _state(**changes)]
    with pytest.raises(UncomputableInput) as error:
        merge_states(states)
    assert error.value.locations[0].path == f"states[3].{field}"


def test_consistent_states_pass_the_checks():
    check_states([_state(), partial_state([]), PartialState(0.0, 0.0, (0.0, 0.0, 0.0), 0.0, 0.0)])
    # Rounding of a caller's mean just outside the extremes (constant data) is tolerated.
    check_states([PartialState(3.0, 0.1 + 2**-56, (0.0, 0.0, 0.0), 0.1, 0.1)])
    with pytest.raises(UncomputableInput):
        merge_states([])


# --- describe_state against describe on the concatenation --------------------------------------


def _moment_view(description) -> dict:
    view = {name: description.descriptors[name] for name in MOMENT_DESCRIPTORS + ("minimum", "maximum", "range")}
    return {
        "descriptors": {n: (d.value, d.standard_error_under_normality) for n, d in view.items()},
        "moments": (description.moments.raw, description.moments.central, description.moments.standardized),
        "shape": [
            (row.estimator, row.value, row.standard_error_under_normality)
            for row in description.shape_estimators.skewness + description.shape_estimators.excess_kurtosis
        ],
        "normality": [(t.test, t.statistic, t.p_value, t.reason) for t in description.normality],
        "conventions": (
            description.conventions.convention,
            description.conventions.variance_divisor,
            description.conventions.skewness,
            description.conventions.kurtosis,
        ),
    }


def _assert_close(a, b, rel=1e-12):
    if isinstance(a, (list, tuple)):
        assert isinstance(b, (list, tuple)) and len(a) == len(b), (a, b)
        for u, v in zip(a, b):
            _assert_close(u, v, rel)
    elif isinstance(a, dict):
        assert a.keys() == b.keys()
        for key in a:
            _assert_close(a[key], b[key], rel)
    elif isinstance(a, float) and isinstance(b, float):
        assert a == pytest.approx(b, rel=rel, abs=1e-300), (a, b)
    else:
        assert a == b, (a, b)


@pytest.mark.parametrize(
    "options",
    [
        DescribeOptions(),
        DescribeOptions(convention="population", moment_order=8),
        DescribeOptions(skewness_estimator="b1", kurtosis_estimator="g2", moment_order=6),
    ],
)
def test_describe_state_equals_describe_on_the_concatenation(options):
    rng = np.random.default_rng(20260607)
    x = rng.lognormal(3.0, 0.4, 20_000)
    order = max(4, options.moment_order)
    merged = merge_states([partial_state(p, order) for p in _random_partitions(x, 100, rng)])
    from_state = describe_state(merged, options)
    direct = describe(from_array(x), options, kind="samples")
    _assert_close(_moment_view(from_state), _moment_view(direct))
    assert from_state.size.n == x.size and from_state.size.total_weight == x.size


def test_describe_state_with_frequency_weights_equals_describe():
    rng = np.random.default_rng(20260608)
    values = rng.normal(50.0, 5.0, 300)
    counts = rng.integers(1, 9, 300).astype(float)
    states = [partial_state(v, weights=w) for v, w in zip(np.split(values, 6), np.split(counts, 6))]
    from_state = describe_state(merge_states(states), DescribeOptions())
    direct = describe(from_samples(values.tolist(), omit_missing=False, weights=counts.tolist()), DescribeOptions(), kind="samples")
    _assert_close(_moment_view(from_state), _moment_view(direct))


@pytest.mark.parametrize(
    ("values", "code"),
    [([7.5], "single_observation"), ([0.1] * 5, "constant_data"), ([1.0, 2.0, 4.0], "too_few_observations")],
)
def test_degenerate_states_say_what_describe_says(values, code):
    from_state = describe_state(merge_states([partial_state(v) for v in np.array_split(values, 2)]), DescribeOptions())
    direct = describe(from_array(np.array(values)), DescribeOptions(), kind="samples")
    _assert_close(_moment_view(from_state), _moment_view(direct))
    assert code in {w.code for w in from_state.warnings}
    for name in MOMENT_DESCRIPTORS:
        codes = {w.code for w in from_state.warnings if name in w.descriptors}
        if from_state.descriptors[name].value is None:
            assert codes, name


def test_what_needs_the_values_is_null_with_a_reason():
    description = describe_state(partial_state(np.arange(50.0)), DescribeOptions())
    reasons = {name for w in description.warnings for name in w.descriptors}
    nulls = [name for name, d in description.descriptors.items() if d.value is None]
    assert set(nulls) == {
        "median", "interquartile_range", "median_absolute_deviation", "median_absolute_deviation_normal",
        "quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis", "medcouple", "half_sample_mode",
        "mean_median_gap", "l_location", "l_scale", "l_skewness", "l_kurtosis", "lag1_autocorrelation",
        "trimmed_mean", "winsorized_mean", "geometric_mean", "harmonic_mean", "upper_tail_index",
    }
    assert set(nulls) <= reasons
    assert all(q.value is None for q in description.quantiles) and "quantiles" in reasons
    assert description.modes is None and description.tail_contributions is None
    assert description.size.distinct_values is None
    assert description.conventions.quantile_type is None
    codes = {w.code for w in description.warnings}
    assert "not_available_from_states" in codes and codes <= set(WARNINGS)


def test_moments_above_the_state_order_are_null_with_a_reason():
    x = np.random.default_rng(20260609).normal(size=500)
    description = describe_state(partial_state(x, order=4), DescribeOptions(moment_order=7))
    assert description.moments.order == 7
    assert description.moments.raw[4:] == [None, None, None]
    assert description.moments.raw[3] is not None
    assert any(w.code == "beyond_state_order" and "moments" in w.descriptors for w in description.warnings)


@pytest.mark.parametrize(
    ("options", "path"),
    [
        (DescribeOptions(interval=IntervalOptions(method="percentile", level=0.9, resamples=200, seed=1)), "options.interval"),
        (DescribeOptions(quantile_type=7), "options.quantile_type"),
    ],
)
def test_describe_state_rejects_what_needs_the_values(options, path):
    with pytest.raises(UncomputableInput) as error:
        describe_state(partial_state([1.0, 2.0, 3.0]), options)
    assert error.value.locations[0].path == path


def test_an_empty_merge_cannot_be_described():
    with pytest.raises(UncomputableInput) as error:
        describe_state(merge_states([partial_state([])]), DescribeOptions())
    assert error.value.locations[0].path == "states"


def test_extreme_magnitudes_are_described_like_the_concatenation():
    # Values near 1e60: M4 is about 1e240, inside float64; the scaled form keeps every ratio exact.
    rng = np.random.default_rng(20260610)
    x = 1e60 * (1.0 + rng.gamma(2.0, 1.0, 400))
    merged = merge_states([partial_state(p) for p in np.array_split(x, 9)])
    _assert_close(
        _moment_view(describe_state(merged, DescribeOptions())),
        _moment_view(describe(from_array(x), DescribeOptions(), kind="samples")),
        rel=1e-11,
    )


def test_every_inconsistent_state_is_named_in_order():
    states = [_state(), _state(count=-2.0), _state(), _state(), _state(mean=0.5), _state()]
    with pytest.raises(UncomputableInput) as error:
        merge_states(states)
    assert [loc.path for loc in error.value.locations] == ["states[1].count", "states[4].mean"]
