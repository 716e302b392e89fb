"""The resampling engine's faster paths give the values of its plain ones, bit for bit.

Each check runs the same computation twice inside this tree, once by the faster path and once by
the path it replaces (or by numpy itself), and compares the float64 bit patterns (so NaN, the sign
of zero and the last digit all count):

* interval bounds read by ``intervals.percentile`` against ``np.quantile(method="linear")``;
* a bootstrap on two threads (multinomial batches drawn in parts, each part's order statistics
  read while the next is drawn, the jackknife computed while the batches run) against the same
  bootstrap on one thread (each batch drawn and read at once), through ``describe``;
* order statistics read from parts of a batch against the whole batch (``Statistics``);
* the medcouple's rows with each median's kernels kept (``KernelCache``) against built afresh;
* rows reordered from their integer counts against rows rebuilt from the gathered weights.
"""

from __future__ import annotations

import dataclasses
import math

import msgspec
import numpy as np
import pytest
from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    central_sums,
    describe,
    from_array,
    from_table,
    resample,
)
from tailgauge.core.describe.order_based import ROBUST_PROBABILITIES
from tailgauge.core.describe.robust_shape import NORMAL_OCTILE_KURTOSIS
from tailgauge.core.order_rules import median
from tailgauge.core.resample import draws, medcouple_rows
from tailgauge.core.resample.budget import EVALUATION_PART_BYTES
from tailgauge.core.resample.intervals import percentile
from tailgauge.core.resample.rows import Rows
from tailgauge.core.resample.statistics import Statistics


def bits(values) -> np.ndarray:
    return np.asarray(values, dtype=np.float64).view(np.int64)


def encoded(result) -> bytes:
    """The whole answer, arrays included, as bytes (floats as their shortest round-trip text)."""

    def hook(value):
        if isinstance(value, np.ndarray):
            return value.tolist()
        if isinstance(value, np.generic):
            return value.item()
        raise TypeError(type(value))

    return msgspec.json.encode(result, enc_hook=hook)


def test_percentile_is_numpys_linear_quantile_bit_for_bit():
    # Reference: np.quantile(method="linear") itself, on smooth, tied (with -0.0 beside 0.0),
    # heavy-tailed and three-valued samples, and fractions at and near the ends.
    rng = np.random.default_rng(1601)
    for trial in range(600):
        n = int(rng.integers(1, 2500))
        sample = [
            rng.normal(size=n),
            np.round(rng.normal(scale=0.1, size=n), 1),  # many zeros of both signs
            rng.standard_cauchy(n) * 1e300,
            rng.integers(0, 3, n).astype(np.float64),
        ][trial % 4]
        fractions = rng.uniform(0.0, 1.0, 2)
        if trial % 3 == 0:
            fractions = np.array([0.0, 1.0, 1e-300, 1.0 - 1e-16, 0.5, fractions[0]])
        want = np.quantile(sample, fractions, method="linear")
        assert np.array_equal(bits(percentile(sample, fractions)), bits(want)), (trial, n, fractions)


def table(total: float, k: int, seed: int):
    weights = np.random.default_rng(seed).dirichlet(np.ones(k))
    return from_table(
        np.arange(k, dtype=np.float64) * 0.5 - 3.0, np.maximum(np.round(weights * total), 1.0),
        probabilities=False, normalise=False,
    )


@pytest.mark.parametrize(
    ("make", "kind", "resamples"),
    [
        (lambda: table(1e4, 50, 11), "table", 9999),  # 6-7 medians a batch
        (lambda: table(1e8, 50, 12), "table", 6000),  # one median; counts near 2^31 per part
        (lambda: table(5e4, 120, 13), "table", 5001),  # a batch of 2,501: two parts
        (lambda: from_array(np.round(np.random.default_rng(14).gamma(2.0, 1.0, 3000), 1)), "samples", 5000),
    ],
)
def test_bootstrap_in_parts_on_two_threads_matches_one_thread(make, kind, resamples):
    # Reference: the same bootstrap on one thread, where every batch is drawn and read at once.
    for method in ("bca", "percentile"):
        answers = []
        for threads in (1, 2):
            options = DescribeOptions(
                interval=IntervalOptions(method=method, resamples=resamples, seed=5), resample_threads=threads
            )
            answers.append(encoded(describe(make(), options, kind=kind)))
        assert answers[0] == answers[1]


def plan_and_statistics(k: int, total: float, seed: int):
    data = table(total, k, seed)
    plan, _ = draws.plan_of(data, central_sums(data.values, data.weights, 4))
    shape = resample.QuantileShape(ROBUST_PROBABILITIES, NORMAL_OCTILE_KURTOSIS)
    return plan, Statistics(plan, ("g1", "g2"), 7, "sample", None, shape)


def test_order_statistics_of_parts_match_the_whole_batch():
    # Reference: Statistics.evaluate of the whole batch; the faster path reads the order
    # statistics of uneven parts and hands them to evaluate.
    plan, statistics = plan_and_statistics(50, 2e4, 21)
    counts = draws.multinomial_counts(plan, np.random.default_rng(3), 3000)
    names = statistics.wanted({name: 1.0 for name in resample.INTERVAL_DESCRIPTORS})
    probabilities = np.array([0.01, 0.1, 0.5, 0.9, 0.99])
    whole = Rows(counts.astype(np.float64), plan.powers, True, counts, plan.draws)
    want = statistics.evaluate(whole, probabilities, names)
    ordered: dict[str, np.ndarray] = {}
    for start, stop in [(0, 1), (1, 700), (700, 2999), (2999, 3000)]:
        part = counts[start:stop]
        view = Rows(part.astype(np.float64), None, True, part, plan.draws)
        for name, values in statistics.order_statistics(view, probabilities, names).items():
            ordered.setdefault(name, np.empty(counts.shape[0]))[start:stop] = values
    got = statistics.evaluate(whole, probabilities, names, ordered=ordered)
    assert list(got) == list(want)  # the same statistics in the same order
    for name in want:
        assert np.array_equal(bits(got[name]), bits(want[name])), name


def test_draws_in_parts_are_the_draws_at_once():
    # Reference: one call of the generator's multinomial for the whole batch.
    plan, _ = plan_and_statistics(50, 1e6, 22)
    assert draws.by_multinomial(plan)
    at_once = draws.multinomial_counts(plan, np.random.default_rng(8), 2500)
    generator = np.random.default_rng(8)
    in_parts = np.concatenate([draws.multinomial_counts(plan, generator, size) for size in (1, 1249, 1250)])
    assert np.array_equal(at_once, in_parts)


@pytest.mark.parametrize("whole", [True, False])
def test_medcouples_with_kept_kernels_match_kernels_built_afresh(whole):
    # Reference: medcouple_rows.medcouples without a cache (every median's kernels built anew).
    # Rows share few medians, so the second call reads every median's kernels from the cache.
    rng = np.random.default_rng(31 + whole)
    values = np.sort(np.round(rng.gamma(2.0, 1.0, 40), 1))  # ties at and around the medians
    values = np.unique(values)
    k = values.size
    if whole:
        counts = rng.multinomial(300, rng.dirichlet(np.ones(k)), size=400)
        rows = Rows(counts.astype(np.float64), None, True, counts, 300)
    else:
        weights = rng.uniform(0.2, 3.0, (400, k)) * (rng.uniform(size=(400, k)) < 0.8)
        weights[:, k // 2] += 1.0  # every row holds the middle value
        rows = Rows(weights, None, False)
    medians = median(rows, values, whole=whole, average=True)
    assert 1 < np.unique(medians).size < 40
    want = medcouple_rows.medcouples(rows, values, medians, whole, EVALUATION_PART_BYTES)
    cache = medcouple_rows.KernelCache()
    for _ in range(2):
        got = medcouple_rows.medcouples(rows, values, medians, whole, EVALUATION_PART_BYTES, cache)
        assert np.array_equal(bits(got), bits(want))
    assert np.any(np.isfinite(want))


def test_kernel_cache_keeps_no_more_than_its_limit():
    rng = np.random.default_rng(41)
    values = np.arange(30.0)
    counts = rng.multinomial(500, rng.dirichlet(np.ones(30) * 0.3), size=200)
    rows = Rows(counts.astype(np.float64), None, True, counts, 500)
    medians = median(rows, values, whole=True, average=True)
    assert np.unique(medians).size >= 2
    unlimited, none = medcouple_rows.KernelCache(), medcouple_rows.KernelCache(limit=0)
    want = medcouple_rows.medcouples(rows, values, medians, True, EVALUATION_PART_BYTES)
    for cache in (unlimited, none):
        got = medcouple_rows.medcouples(rows, values, medians, True, EVALUATION_PART_BYTES, cache)
        assert np.array_equal(bits(got), bits(want))
    assert unlimited.get(float(medians[0])) is not None
    assert all(none.get(float(m)) is None for m in np.unique(medians))


@pytest.mark.parametrize("kind", [np.int64, np.uint8])
def test_rows_reordered_from_counts_match_rows_rebuilt_from_weights(kind):
    # Reference: the rows rebuilt from the float weights gathered over both axes (the plain path).
    rng = np.random.default_rng(51)
    counts = rng.multinomial(200, rng.dirichlet(np.ones(25)), size=60).astype(kind)
    view = Rows(counts.astype(np.float64), None, True, counts, 200)
    order = rng.permutation(25)
    values = np.sort(rng.normal(size=25))
    for chosen in (np.arange(10, 30), np.array([3, 1, 40, 59, 7])):
        fast = view.reordered(chosen, order)
        plain = Rows(view.weights[np.ix_(chosen, order)], None, True)
        assert np.array_equal(fast.weights, plain.weights)
        assert np.array_equal(fast.total, plain.total)
        assert np.array_equal(fast.cumulative, plain.cumulative)
        targets = np.tile([0.0, 1.0, 57.0, 100.0, 100.5, 199.0, 200.0], (chosen.size, 1))
        assert np.array_equal(fast.first_reaching(targets), plain.first_reaching(targets))
        assert np.array_equal(
            bits(median(fast, values, whole=True, average=True)), bits(median(plain, values, whole=True, average=True))
        )
    assert math.isclose(float(view.total[0]), 200.0)


def test_cumulative_at_and_first_reaching_read_each_row_as_take_along_axis_and_searchsorted():
    # Reference: each row's own np.cumsum, read with np.take_along_axis and np.searchsorted.
    rng = np.random.default_rng(61)
    counts = rng.multinomial(90, rng.dirichlet(np.ones(12) * 0.5), size=40)
    view = Rows(counts.astype(np.float64), None, True, counts, 90)
    cumulative = np.cumsum(counts, axis=1)
    index = rng.integers(0, 12, (40, 5))
    assert np.array_equal(view.cumulative_at(index), np.take_along_axis(cumulative, index, axis=1).astype(np.float64))
    part = view.rows(slice(7, 19))  # a part's own rows, not the batch's
    assert np.array_equal(part.cumulative_at(index[7:19]), view.cumulative_at(index)[7:19])
    targets = rng.uniform(-1.0, 92.0, (40, 6))
    targets[:, 0] = [0.0, -0.0] * 20
    want = np.stack(
        [np.minimum(np.searchsorted(cumulative[r], np.ceil(np.clip(targets[r], 0, 90)), side="left"), 11) for r in range(40)]
    )
    assert np.array_equal(view.first_reaching(targets), want)
    assert np.array_equal(part.first_reaching(targets[7:19]), want[7:19])


def test_two_threads_draw_ahead_of_the_reading_for_multinomial_batches(monkeypatch):
    """The two-thread case above goes through the drawing-ahead path (one thread draws, the
    caller reads), not only the batch-per-thread one."""
    calls = []
    original = resample._drawn_ahead

    def spy(*args, **kwargs):
        calls.append(len(args[2]))  # batches
        return original(*args, **kwargs)

    monkeypatch.setattr(resample, "_drawn_ahead", spy)
    options = DescribeOptions(interval=IntervalOptions(method="bca", resamples=9999, seed=5), resample_threads=2)
    describe(table(1e4, 50, 11), options, kind="table")
    assert calls == [2]


def test_a_deadline_passing_while_drawing_ahead_stops_both_threads():
    """A passed deadline raises the limit error from the reading thread; the drawing thread
    stops too (the pool is free for the next request)."""
    import time

    from tailgauge.core.errors import LimitExceeded

    options = DescribeOptions(
        interval=IntervalOptions(method="bca", resamples=9999, seed=5), resample_threads=2,
        deadline=time.monotonic() + 0.005,
    )
    with pytest.raises(LimitExceeded):
        describe(table(1e4, 50, 11), options, kind="table")
    # The pool still serves: the same request with time to spare completes.
    done = describe(table(1e4, 50, 11), dataclasses.replace(options, deadline=None), kind="table")
    assert done.resampling is not None and done.resampling.resamples == 9999
