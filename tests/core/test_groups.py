"""core.groups and moments.row_central_sums: many samples described together, each exactly as
``describe`` describes it alone.

Outside references named beside each check: the NIST StRD certified means and standard
deviations (tests/reference/strd, with the tolerances of tests/core/test_moments.py) for every
group of one request, and numpy's own quantile function on each group. Everything else checks
the vectorised path against the project's single-sample functions (``central_sums``,
``describe``), which have their own outside checks: the point here is that the two agree bit
for bit, not approximately.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    choose,
    describe,
    from_complete_samples,
    from_samples,
    restricted,
)
from tailgauge.core.errors import LimitExceeded, UncomputableInput
from tailgauge.core.groups import Group, describe_groups, from_columns, group_seed, sort_key, vectorised
from tailgauge.core.moments import ROW_SUMS_AT_MOST, central_sums, row_central_sums
from tailgauge.core.weighted import WeightMeaning

from tests.core.test_moments import DATASETS, SD_DIGITS, load_strd, relative_error

BASIC = ["mean", "standard_deviation", "quantiles"]
ORDER_AND_SPREAD = ["median", "minimum", "maximum", "range", "interquartile_range", "variance", "quantiles"]


def _sample(values) -> object:
    return from_samples(list(values), omit_missing=False)


def _alone(data, options) -> object:
    return restricted(describe(data, options, kind="samples"), options.descriptors)


def _as_described(result) -> object:
    """A group's answer without its group members, as the Description ``describe`` gives."""
    fields = {f.name: getattr(result, f.name) for f in dataclasses.fields(type(result)) if f.name not in (
        "key", "contrasts", "scores", "partial_state")}
    return type(result).__mro__[1](**fields)


@pytest.mark.parametrize("n", [2, 3, 7, 8, 9, 100, 129, 1023, 1024, 2047, 2048, 3001])
@pytest.mark.parametrize("scale, location", [(1.0, 0.0), (1e-3, 1e6), (1.0, 1e15), (1e100, 0.0), (1e-200, 3e-200)])
def test_row_sums_equal_central_sums_row_by_row(n, scale, location):
    rng = np.random.default_rng(n)
    rows = np.ascontiguousarray(rng.standard_normal((5, n)) * scale + location)
    rows[0] = np.round(rows[0])
    rows[1] = rows[1, 0]  # constant
    constant = np.array([np.all(r == r[0]) for r in rows])
    for order in (2, 4, 9):
        together = row_central_sums(rows, order, constant)
        for i, row in enumerate(rows):
            alone = central_sums(row.copy(), None, order)
            if together.accepted[i]:
                assert alone.pre_exponent == alone.post_exponent == 0
                got = together.of(i)
                assert (got.mean, got.shift, got.centre) == (alone.mean, alone.shift, alone.centre)
                assert np.array_equal(got.sums, alone.sums)
            else:
                # Not accepted on the one-pass path: central_sums took its two-pass path (or a
                # shift it could not use), which the groups leave to central_sums itself.
                assert (alone.pre_exponent, alone.post_exponent) != (0, 0) or alone.shift != together.shift[i]


def test_row_sums_at_the_longest_row():
    rng = np.random.default_rng(1)
    rows = np.ascontiguousarray(rng.normal(5.0, 2.0, (2, ROW_SUMS_AT_MOST)))
    together = row_central_sums(rows, 4, np.zeros(2, dtype=bool))
    for i in range(2):
        alone = central_sums(rows[i].copy(), None, 4)
        assert together.accepted[i] and together.of(i).mean == alone.mean
        assert np.array_equal(together.of(i).sums, alone.sums)


def test_strd_certified_values_hold_for_every_group():
    # NIST StRD certified mean and sample sd, every data set a group of one request, to the
    # digits float64 allows (tolerances from tests/core/test_moments.py).
    loaded = {name: load_strd(name) for name in DATASETS}
    groups = [Group(name, _sample(x)) for name, (_, x) in loaded.items()]
    options = DescribeOptions(descriptors=choose(["mean", "standard_deviation"]))
    for result in describe_groups(groups, options).descriptions():
        header, _ = loaded[result.key]
        assert relative_error(result.descriptors["mean"].value, float(header["certified_mean"])) <= 1e-15
        sd = result.descriptors["standard_deviation"].value
        assert relative_error(sd, float(header["certified_sd"])) <= 10.0 ** -SD_DIGITS[result.key]


def _mixed_groups(seed: int, count: int = 120) -> list[Group]:
    """Groups of many lengths, rounded to few decimals (ties), with the degenerate and awkward
    cases among them: one value, constant values, +0 beside -0, values near float64's limit."""
    rng = np.random.default_rng(seed)
    groups = []
    for i in range(count):
        n = int(rng.integers(1, 40))
        values = np.round(rng.normal(10.0, 3.0, n), int(rng.integers(0, 3)))
        groups.append(Group(f"g{i}", _sample(values)))
    groups += [
        Group("one", _sample([4.5])),
        Group("constant", _sample([2.0] * 6)),
        Group("zeros", _sample([0.0, -0.0, 1.0, -1.0, 0.0])),
        Group("huge", _sample([1e308, -1e308, 1.5e308, 0.0])),
        Group("tiny", _sample([1e-310, 2e-310, 3e-310])),
        Group("two", _sample([1.0, 2.0])),
    ]
    return groups


@pytest.mark.parametrize("selection", [BASIC, ORDER_AND_SPREAD, ["mean", "skewness"], None])
@pytest.mark.parametrize("quantile_type", [None, 1, 2, 3, 6, 9])
def test_each_group_is_described_as_alone(selection, quantile_type):
    groups = _mixed_groups(7)
    options = DescribeOptions(descriptors=choose(selection), quantile_type=quantile_type, probabilities=(0.0, 0.07, 0.5, 0.9, 1.0))
    results = describe_groups(groups, options).descriptions()
    assert [r.key for r in results] == [g.key for g in groups]
    for group, result in zip(groups, results):
        assert _as_described(result) == _alone(group.data, options), group.key


@pytest.mark.parametrize("selection", [BASIC, ORDER_AND_SPREAD])
def test_groups_of_one_length_are_described_as_alone(selection):
    # All groups of one length take the path's one-stretch layout (the sorted rows themselves):
    # ties, repeated values and zeros of both signs among them; the distinct counts too.
    rng = np.random.default_rng(17)
    groups = [Group(i, _sample(np.round(rng.normal(0.0, 2.0, 9), int(rng.integers(0, 2))))) for i in range(60)]
    groups.append(Group("zeros", _sample([0.0, -0.0, 1.0, -1.0, 0.0, 2.0, 2.0, -3.0, 5.0])))
    options = DescribeOptions(descriptors=choose(selection), probabilities=(0.0, 0.1, 0.5, 1.0))
    assert len(vectorised.describe_together([g.data for g in groups], dataclasses.replace(options, admitted=True)).numbers) >= 40
    for group, result in zip(groups, describe_groups(groups, options).descriptions()):
        assert _as_described(result) == _alone(group.data, options), group.key


def test_complete_samples_are_what_from_samples_gives_each():
    # Reference: from_samples, one sample at a time (with nothing missing, the same data).
    rng = np.random.default_rng(23)
    samples = [rng.normal(size=int(n)) for n in rng.integers(1, 30_000, 12)]  # more than one check chunk
    together = from_complete_samples(samples)
    assert together is not None
    for sample, data in zip(samples, together):
        alone = from_samples(sample, omit_missing=False)
        assert data.values is sample
        assert (data.weights, data.meaning, data.ordered, data.omitted, data.zero_weight) == (
            alone.weights, alone.meaning, alone.ordered, alone.omitted, alone.zero_weight)
        assert np.array_equal(data.values, alone.values)
    # A missing value (NaN, in any chunk) or an empty sample: each sample goes through from_samples.
    for where in (0, 5, 11):
        holed = [s.copy() for s in samples]
        holed[where][-1] = np.nan
        assert from_complete_samples(holed) is None
    assert from_complete_samples(samples + [np.empty(0)]) is None
    assert from_complete_samples([]) is None


def test_the_basic_descriptors_take_the_vectorised_path():
    # The first group is one the path cannot take: the others still take it.
    groups = [Group("first-constant", _sample([3.0, 3.0, 3.0]))] + _mixed_groups(3)
    options = dataclasses.replace(DescribeOptions(descriptors=choose(BASIC)), admitted=True)
    together = vectorised.describe_together([g.data for g in groups], options).numbers
    ordinary = {i for i, g in enumerate(groups) if (g.key.startswith("g") or g.key == "two") and g.data.count >= 2}
    # Every ordinary group but the constant ones (rounding can make a short group constant).
    constant = {i for i in ordinary if np.ptp(groups[i].data.values) == 0}
    assert set(together) == ordinary - constant
    for name in ("one", "constant", "zeros", "huge", "tiny"):
        assert next(i for i, g in enumerate(groups) if g.key == name) not in together
    # Beyond them: an interval, or a descriptor with no vectorised path, describes groups alone.
    assert not vectorised.applies(dataclasses.replace(options, descriptors=choose(BASIC + ["skewness"])))
    assert not vectorised.applies(
        dataclasses.replace(options, interval=IntervalOptions(method="percentile", level=0.9, resamples=200, seed=1))
    )


def test_quantiles_match_numpy():
    # numpy.quantile's methods are Hyndman & Fan's types (numpy 2 documentation): type 7 is
    # "linear", type 6 "weibull", type 8 "median_unbiased".
    rng = np.random.default_rng(11)
    groups = [Group(i, _sample(rng.gamma(2.0, 3.0, 50))) for i in range(30)]
    probabilities = (0.01, 0.25, 0.5, 0.9)
    for quantile_type, method in ((7, "linear"), (6, "weibull"), (8, "median_unbiased")):
        options = DescribeOptions(descriptors=choose(BASIC), quantile_type=quantile_type, probabilities=probabilities)
        for group, result in zip(groups, describe_groups(groups, options).descriptions()):
            expected = np.quantile(group.data.values, probabilities, method=method)
            got = [q.value for q in result.quantiles]
            np.testing.assert_allclose(got, expected, rtol=1e-14)


def test_seeds_come_from_the_seed_and_the_key_alone():
    assert group_seed(12345, "head-3") == group_seed(12345, "head-3")
    assert group_seed(12345, "head-3") != group_seed(12346, "head-3")
    assert group_seed(12345, 7) != group_seed(12345, "7")
    assert 0 <= group_seed(2**53 - 1, "x") < 2**53
    rng = np.random.default_rng(2)
    interval = IntervalOptions(method="percentile", level=0.9, resamples=200, seed=99)
    options = DescribeOptions(descriptors=choose(["mean", "median"]), interval=interval)
    groups = [Group(f"k{i}", _sample(rng.normal(0, 1, 25))) for i in range(4)]
    first = describe_groups(groups, options).descriptions()
    shuffled = describe_groups([groups[2], Group("new", _sample(rng.normal(0, 1, 25))), groups[0]], options).descriptions()
    by_key = {r.key: r for r in first}
    for result in shuffled:
        if result.key in by_key:
            assert result.descriptors["mean"].interval == by_key[result.key].descriptors["mean"].interval
            assert result.resampling.seed == group_seed(99, result.key)
    # The group's seed reproduces it alone.
    alone = describe(groups[1].data, dataclasses.replace(options, interval=dataclasses.replace(interval, seed=group_seed(99, "k1"))), kind="samples")
    assert alone.descriptors["median"].interval == by_key["k1"].descriptors["median"].interval


def test_order_by_key_puts_integers_first():
    keys = ["b", 10, "a", -3, "10", 2]
    assert sorted(keys, key=sort_key) == [-3, 2, 10, "10", "a", "b"]
    groups = [Group(k, _sample([1.0, 2.0, 4.0])) for k in keys]
    results = describe_groups(groups, DescribeOptions(descriptors=choose(BASIC)), order="by_key").descriptions()
    assert [r.key for r in results] == [-3, 2, 10, "10", "a", "b"]


def test_unknown_baseline_is_located():
    groups = [Group("a", _sample([1.0, 2.0])), Group("b", _sample([1.0, 3.0]))]
    with pytest.raises(UncomputableInput) as caught:
        describe_groups(groups, DescribeOptions(), baseline="c")
    assert [loc.path for loc in caught.value.locations] == ["options.baseline"]
    with pytest.raises(UncomputableInput):
        describe_groups([Group(7, _sample([1.0, 2.0]))], DescribeOptions(), baseline="7")


def test_columns_split_by_first_appearance_keeping_the_order_sent():
    values = [5.0, 1.0, 7.0, 2.0, None, 3.0, 9.0]
    keys = ["b", "a", "b", "a", "c", 4, "c"]
    groups = from_columns(values, keys, None, omit_missing=True, meaning=WeightMeaning.FREQUENCY, max_groups=10)
    assert [g.key for g in groups] == ["b", "a", "c", 4]
    assert [g.data.values.tolist() for g in groups] == [[5.0, 7.0], [1.0, 2.0], [9.0], [3.0]]
    assert [g.data.omitted for g in groups] == [0, 0, 1, 0]


def test_columns_locate_errors_where_they_were_sent():
    with pytest.raises(UncomputableInput) as caught:
        from_columns([1.0, 2.0, None], ["a", "b", "b"], None, omit_missing=False, meaning=WeightMeaning.FREQUENCY,
                     max_groups=10)
    assert [loc.path for loc in caught.value.locations] == ["values[2]"]
    assert "'b'" in caught.value.detail
    with pytest.raises(UncomputableInput) as caught:
        from_columns([1.0, 2.0, 3.0], ["a", "b"], None, omit_missing=False, meaning=WeightMeaning.FREQUENCY,
                     max_groups=10)
    assert [loc.path for loc in caught.value.locations] == ["keys"]
    with pytest.raises(LimitExceeded) as caught:
        from_columns([1.0, 2.0, 3.0], ["a", "b", "c"], None, omit_missing=False, meaning=WeightMeaning.FREQUENCY,
                     max_groups=2)
    assert [loc.path for loc in caught.value.locations] == ["keys"]
    with pytest.raises(UncomputableInput) as caught:
        from_columns([1.0, 2.0, 3.0], ["a", "b", "b"], [1.0, 0.0, 0.0], omit_missing=False,
                     meaning=WeightMeaning.FREQUENCY, max_groups=5)
    assert [loc.path for loc in caught.value.locations] == ["weights"]


def test_options_are_checked_against_every_group_before_any_is_described(monkeypatch):
    from tailgauge.core.groups import describing

    calls = []
    monkeypatch.setattr(describing, "describe", lambda *a, **k: calls.append(a) or describe(*a, **k))
    interval = IntervalOptions(method="percentile", level=0.9, resamples=200, seed=1)
    groups = [Group("a", _sample([1.0, 2.0, 3.0])), Group("b", _sample([2.0, 5.0])), Group("c", _sample([4.0]), "groups[2]")]
    with pytest.raises(UncomputableInput) as caught:
        describe_groups(groups, DescribeOptions(interval=interval))
    assert calls == []  # refused before the first group was resampled
    assert [loc.path for loc in caught.value.locations] == ["options.interval", "groups[2].values"]
    assert "'c'" in caught.value.detail


def test_the_groups_plan_is_each_groups_own_plan_with_every_option_term():
    """admit_groups plans each group as describe plans one input (assembly.admit): the tail means'
    replicates and a series' serial stage count there as they do for one input."""
    from tailgauge.core import admit, admit_groups

    rng = np.random.default_rng(12)
    groups = [Group(key, from_samples(rng.normal(500.0, 1.0, 400).tolist(), omit_missing=False)) for key in "ab"]
    interval = IntervalOptions(method="percentile", resamples=500, seed=1)
    for changes in ({}, {"tail_levels": (0.9, 0.99)}, {"order": "as_sent"}):
        options = DescribeOptions(interval=interval, **changes)
        together = admit_groups(groups, options)
        alone = admit([groups[0].data], options)
        # Described one after another: the times add up, the working memory is one group's.
        assert together.seconds == pytest.approx(2 * alone.seconds, rel=1e-9)
        assert together.peak_bytes >= alone.peak_bytes
    plain = admit_groups(groups, DescribeOptions(interval=interval))
    tails = admit_groups(groups, DescribeOptions(interval=interval, tail_levels=(0.9, 0.99)))
    assert tails.peak_bytes > plain.peak_bytes
