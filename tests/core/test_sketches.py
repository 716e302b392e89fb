"""KLL sketches (service/core/sketches.py): decoding, the pooled union, and its rank error.

Outside references, named beside each check:

* Apache DataSketches (the ``datasketches`` package 5.2.0, pinned): its own
  ``get_quantile(p, inclusive=True)`` on a single sketch, and ``normalized_rank_error(False)``,
  which its documentation describes as the 99th percentile of the maximum single-sided rank error
  measured empirically for the sketch's k.
* The exact ranks of the returned values in the data themselves (numpy.searchsorted).

KLL compaction draws random bits the library does not let a caller seed, so the rank-error
property is checked over many independent sketches with a binomial tolerance, as coverage is.
"""

from __future__ import annotations

import math
import struct

import datasketches
import numpy as np
import pytest
import scipy.stats

from service.core import (
    DescribeOptions,
    UncomputableInput,
    combine_sketches,
    describe,
    describe_state,
    from_array,
    kll_sketch_bytes,
    merge_states,
    partial_state,
)

PROBABILITIES = np.linspace(0.005, 0.995, 199)


def rank_error(sorted_data: np.ndarray, value: float, p: float) -> float:
    """Distance from p to the normalized ranks the value holds in the data: [F(value-), F(value)]."""
    low = np.searchsorted(sorted_data, value, side="left") / sorted_data.size
    high = np.searchsorted(sorted_data, value, side="right") / sorted_data.size
    return max(low - p, p - high, 0.0)


def test_one_sketch_reads_as_the_library_reads_it():
    rng = np.random.default_rng(20260701)
    x = rng.lognormal(0.0, 1.0, 100_000)
    sketch = datasketches.kll_doubles_sketch(200)
    sketch.update(x)
    union = combine_sketches([sketch.serialize()])
    inside = np.linspace(0.0, 1.0, 2001)[1:-1]
    expected = [sketch.get_quantile(float(p), True) for p in inside]
    np.testing.assert_array_equal(union.quantiles(inside), expected)
    # The ends are the exact extremes the sketch tracks (the library answers with retained items).
    assert union.quantiles([0.0, 1.0]).tolist() == [x.min(), x.max()]
    assert union.n == x.size and union.k == 200
    assert union.normalized_rank_error == sketch.normalized_rank_error(False)


def test_union_quantiles_are_within_the_stated_rank_error():
    """Each replication: 20 sketches of parts of 50,000 values; the worst error over 199 ranks."""
    rng = np.random.default_rng(20260702)
    replications, failures, worst = 40, 0, 0.0
    for _ in range(replications):
        x = rng.gamma(2.0, 1.5, 50_000)
        union = combine_sketches([kll_sketch_bytes(part, k=200) for part in np.array_split(x, 20)])
        ordered = np.sort(x)
        errors = [rank_error(ordered, v, p) for v, p in zip(union.quantiles(PROBABILITIES), PROBABILITIES)]
        worst = max(worst, max(errors) / union.normalized_rank_error)
        failures += max(errors) > union.normalized_rank_error
    # The bound holds with probability 0.99 per sketch; allow what Binomial(40, 0.01) exceeds
    # with probability below 1e-6.
    allowed = int(scipy.stats.binom.isf(1e-6, replications, 0.01))
    assert failures <= allowed, (failures, allowed, worst)


def test_union_is_deterministic_and_ignores_the_order_of_the_sketches():
    rng = np.random.default_rng(20260703)
    blobs = [kll_sketch_bytes(rng.normal(size=int(n))) for n in rng.integers(1, 30_000, 12)]
    forward = combine_sketches(blobs).quantiles(PROBABILITIES)
    np.testing.assert_array_equal(forward, combine_sketches(blobs[::-1]).quantiles(PROBABILITIES))
    np.testing.assert_array_equal(forward, combine_sketches(blobs).quantiles(PROBABILITIES))


def test_float_sketches_are_accepted_and_named():
    rng = np.random.default_rng(20260704)
    x = rng.normal(100.0, 15.0, 30_000)
    floats = datasketches.kll_floats_sketch(100)
    floats.update(x[:20_000].astype(np.float32))
    union = combine_sketches([floats.serialize(), kll_sketch_bytes(x[20_000:], k=300)])
    assert union.item_types == ("double", "float") and union.n == x.size and union.k == 100
    # The error reported is the larger one, of the k = 100 sketch.
    assert union.normalized_rank_error == floats.normalized_rank_error(False)
    ordered = np.sort(x)
    # float32 rounding moves a value by at most 2^-24 relative, far less than the rank error here.
    errors = [rank_error(ordered, v, p) for v, p in zip(union.quantiles(PROBABILITIES), PROBABILITIES)]
    assert max(errors) <= 2 * union.normalized_rank_error


def test_sketch_bytes_round_trip_and_empty_parts():
    assert combine_sketches([kll_sketch_bytes([])]).n == 0
    single = combine_sketches([kll_sketch_bytes([4.25])])
    assert single.n == 1 and single.quantiles([0.0, 0.5, 1.0]).tolist() == [4.25, 4.25, 4.25]
    two = combine_sketches([kll_sketch_bytes([]), kll_sketch_bytes(np.arange(10.0))])
    assert two.n == 10 and two.sketches == 2
    with pytest.raises(UncomputableInput) as error:
        kll_sketch_bytes([1.0, math.nan])
    assert error.value.locations[0].path == "values[1]"
    for k in (4, 70_000, 200.0):
        with pytest.raises(ValueError):
            kll_sketch_bytes([1.0], k=k)


def _corrupt_item(blob: bytes) -> bytes:
    """The last retained item replaced by NaN (the library checks sizes, not values)."""
    return blob[:-8] + struct.pack("<d", math.nan)


@pytest.mark.parametrize(
    "bad",
    [
        b"",
        b"not a sketch",
        bytes(8),
        b"\xff" * 64,
        "a string",
        lambda good: good[: len(good) // 2],
        lambda good: good + b"\x00" * 8,
        lambda good: _corrupt_item(good),
        lambda good: bytes(datasketches.hll_sketch(12).serialize_compact()),
    ],
)
def test_bytes_that_are_not_a_sketch_are_located(bad):
    good = kll_sketch_bytes(np.random.default_rng(20260705).normal(size=5000))
    blob = bad(good) if callable(bad) else bad
    with pytest.raises(UncomputableInput) as error:
        combine_sketches([good, good, blob])
    assert error.value.locations[0].path == "$.sketches[2]"
    with pytest.raises(UncomputableInput):
        combine_sketches([])


def test_describe_state_takes_quantiles_from_the_sketches():
    rng = np.random.default_rng(20260706)
    x = rng.gamma(3.0, 2.0, 60_000)
    parts = np.array_split(x, 30)
    state = merge_states([partial_state(p) for p in parts])
    union = combine_sketches([kll_sketch_bytes(p) for p in parts])
    options = DescribeOptions()
    described = describe_state(state, options, union)
    direct = describe(from_array(x), options, kind="samples")
    ordered = np.sort(x)
    epsilon = union.normalized_rank_error
    for quantile in described.quantiles:
        # Loose by a factor 2 so this single replication cannot fail by the 1% chance (see above).
        assert rank_error(ordered, quantile.value, quantile.probability) <= 2 * epsilon
    assert rank_error(ordered, described.descriptors["median"].value, 0.5) <= 2 * epsilon
    # Quartile-based descriptors are close to the exact ones (differences of nearby quantiles).
    for name in ("interquartile_range", "quartile_skewness", "octile_kurtosis", "mean_median_gap"):
        assert described.descriptors[name].value == pytest.approx(direct.descriptors[name].value, rel=0.1), name
    assert described.descriptors["mean"].value == pytest.approx(direct.descriptors["mean"].value, rel=1e-13)
    codes = {w.code: w for w in described.warnings}
    assert "approximate_quantiles" in codes and f"{epsilon:.3g}" in codes["approximate_quantiles"].message
    assert {"median", "quantiles"} <= set(codes["approximate_quantiles"].descriptors)
    assert described.sketches.n == x.size and described.sketches.sketches == 30
    for name in ("median_absolute_deviation", "medcouple", "l_scale"):
        assert described.descriptors[name].value is None
        assert name in codes["not_available_from_states"].descriptors


@pytest.mark.parametrize("other", [np.arange(60.0), np.arange(100.0) + 0.5, np.arange(-1.0, 99.0)])
def test_sketches_of_other_data_are_refused(other):
    x = np.arange(100.0)
    with pytest.raises(UncomputableInput) as error:
        describe_state(partial_state(x), DescribeOptions(), combine_sketches([kll_sketch_bytes(other)]))
    assert error.value.locations[0].path == "$.sketches"


def test_a_float_sketch_matches_its_state_up_to_float32_rounding():
    x = np.random.default_rng(20260707).normal(0.1, 1.0, 3000)
    floats = datasketches.kll_floats_sketch(200)
    floats.update(x.astype(np.float32))
    described = describe_state(partial_state(x), DescribeOptions(), combine_sketches([floats.serialize()]))
    assert described.descriptors["median"].value is not None
    assert "float32" in {w.code: w for w in described.warnings}["approximate_quantiles"].message
