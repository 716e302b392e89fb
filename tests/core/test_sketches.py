"""KLL sketches (service/tailgauge/core/sketches.py): decoding, the pooled union, and its rank error.

Outside references, named beside each check:

* Apache DataSketches (the ``datasketches`` package 5.2.0, pinned): its own
  ``get_quantile(p, inclusive=True)`` on a single sketch, and ``normalized_rank_error(False)``,
  which its documentation describes as the 99th percentile of the maximum single-sided rank error
  measured empirically for the sketch's k.
* The exact ranks of the returned values in the data themselves (numpy.searchsorted).
* The library's own decoder, for the parser (``read_kll_sketch``) on sketches the library built:
  the items its iterator yields and the weights its CDF sums (its Python iterator gives weight 1
  to every item when level zero is empty, which merges produce, so the weights are checked
  through ``get_cdf`` at every item as well as item by item where the iterator is right).

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

from tailgauge.core import (
    DescribeOptions,
    KllSketchContents,
    UncomputableInput,
    combine_sketches,
    describe,
    describe_state,
    from_array,
    kll_sketch_bytes,
    merge_states,
    partial_state,
    read_kll_sketch,
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
    assert error.value.locations[0].path == "sketches[2]"
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
    assert error.value.locations[0].path == "sketches"


def test_a_float_sketch_matches_its_state_up_to_float32_rounding():
    x = np.random.default_rng(20260707).normal(0.1, 1.0, 3000)
    floats = datasketches.kll_floats_sketch(200)
    floats.update(x.astype(np.float32))
    described = describe_state(partial_state(x), DescribeOptions(), combine_sketches([floats.serialize()]))
    assert described.descriptors["median"].value is not None
    assert "float32" in {w.code: w for w in described.warnings}["approximate_quantiles"].message


# --- the parser against the library's decoder -------------------------------------------------------

DECODERS = {"double": datasketches.kll_doubles_sketch, "float": datasketches.kll_floats_sketch}


def _library_sketches():
    """(label, item type, library sketch): every form, many level counts, sorted or not, merged."""
    rng = np.random.default_rng(20260708)
    for item_type, cls in DECODERS.items():
        cast = np.float32 if item_type == "float" else np.float64
        for k in (8, 9, 200, 1000):
            for n in (0, 1, 2, 7, 8, 9, 100, 1000, 30_000, 300_000):
                sketch = cls(k)
                if n:
                    sketch.update(rng.lognormal(0.0, 1.5, n).astype(cast))
                yield f"{item_type} k={k} n={n}", item_type, sketch
                if n:
                    sketch.get_quantile(0.5)  # sorts level zero, as the flags then say
                    yield f"{item_type} k={k} n={n} sorted", item_type, sketch
        ties = cls(20)
        ties.update(rng.integers(-2, 3, 5000).astype(cast))
        yield f"{item_type} ties", item_type, ties
        for k_into, k_from, n_into in ((200, 8, 20_000), (8, 200, 20_000), (100, 100, 0), (50, 400, 3)):
            into, other = cls(k_into), cls(k_from)
            if n_into:
                into.update(rng.normal(0.0, 1.0, n_into).astype(cast))
            other.update(rng.normal(3.0, 1.0, 30_000).astype(cast))
            into.merge(other)
            yield f"{item_type} k={k_into} merged with k={k_from}", item_type, into


def _library_reading(sketch) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Items and weights from the library's iterator, and its inclusive CDF at every distinct item."""
    pairs = list(sketch)
    items = np.array([v for v, _ in pairs], dtype=np.float64)
    weights = np.array([w for _, w in pairs], dtype=np.float64)
    cdf = np.array(sketch.get_cdf(np.unique(items).tolist(), True)[:-1]) if items.size else np.empty(0)
    return items, weights, cdf


def _our_cdf(contents: KllSketchContents) -> np.ndarray:
    """The same CDF from our items and weights: weight of items <= each distinct item, over n."""
    order = np.argsort(contents.items, kind="stable")
    cumulative = np.cumsum(contents.weights[order])
    last = np.searchsorted(contents.items[order], np.unique(contents.items), side="right") - 1
    return cumulative[last] / float(contents.n)


def test_the_parser_reads_what_the_library_reads():
    checked, levels, merged_with_empty_level_zero = 0, set(), 0
    for label, item_type, sketch in _library_sketches():
        blob = bytes(sketch.serialize())
        contents = read_kll_sketch(blob)
        assert (contents.k, contents.n) == (sketch.k, sketch.n), label
        assert contents.normalized_rank_error == sketch.normalized_rank_error(False), label
        if sketch.is_empty():
            assert contents.item_type is None and contents.items.size == 0 and len(blob) == 8, label
            continue
        assert contents.item_type == item_type, label
        assert (contents.minimum, contents.maximum) == (sketch.get_min_value(), sketch.get_max_value()), label
        items, weights, cdf = _library_reading(sketch)
        assert contents.items.tobytes() == items.tobytes(), label
        assert contents.weights.sum() == sketch.n, label
        np.testing.assert_array_equal(_our_cdf(contents), cdf, err_msg=label)
        if contents.weights[0] == 1.0:  # level zero holds items: the iterator's weights are right
            np.testing.assert_array_equal(contents.weights, weights, err_msg=label)
        else:
            merged_with_empty_level_zero += 1
        levels.add(int(np.log2(contents.weights.max())) + 1)
        checked += 1
    # The zoo covered what it says: many level counts, and merges that left level zero empty.
    assert checked > 100 and len(levels) >= 10 and merged_with_empty_level_zero >= 1, (checked, levels)


def test_a_merged_sketch_with_an_empty_level_zero_keeps_its_weights():
    """Regression: reading weights through the library's iterator gave each item weight 1 here,
    so the weights did not sum to n and a valid merged sketch was refused as corrupt."""
    rng = np.random.default_rng(20260709)
    into, other = datasketches.kll_doubles_sketch(8), datasketches.kll_doubles_sketch(200)
    into.update(rng.normal(size=20_000))
    other.update(rng.normal(size=30_000))
    into.merge(other)
    blob = bytes(into.serialize())
    assert np.frombuffer(blob, "<u4", 2, 20)[0] == np.frombuffer(blob, "<u4", 2, 20)[1]  # level zero empty
    union = combine_sketches([blob])
    assert union.n == 50_000 and union.cumulative[-1] == 50_000
    inside = np.linspace(0.0, 1.0, 101)[1:-1]
    expected = [into.get_quantile(float(p), True) for p in inside]
    np.testing.assert_array_equal(union.quantiles(inside), expected)


def _full_sketch(levels_at_least: int = 3) -> bytes:
    for n in range(2, 10_000):
        sketch = datasketches.kll_doubles_sketch(8)
        sketch.update(np.arange(float(n)))
        blob = bytes(sketch.serialize())
        if blob[18] >= levels_at_least:
            return blob
    raise AssertionError("no sketch with enough levels")


@pytest.mark.parametrize(
    ("name", "make"),
    [
        # The request that killed a worker: the first level offset of a multi-level doubles
        # sketch set to 0xFFFFFFFF; the doubles decoder raised and the floats decoder segfaulted.
        ("first level offset 0xFFFFFFFF", lambda good: good[:20] + b"\xff\xff\xff\xff" + good[24:]),
        # Found offline: the first 20 bytes of a sketch crash the native decoder.
        ("truncated to 20 bytes", lambda good: good[:20]),
        ("offsets not increasing", lambda good: good[:24] + struct.pack("<I", 0) + good[28:]),
        ("an offset beyond the capacity", lambda good: good[:20] + struct.pack("<I", 10**6) + good[24:]),
        ("255 levels", lambda good: good[:18] + b"\xff" + good[19:]),
        ("n off by one", lambda good: good[:8] + struct.pack("<Q", struct.unpack_from("<Q", good, 8)[0] + 1)
         + good[16:]),
        ("m of 0", lambda good: good[:6] + b"\x00" + good[7:]),
        ("k of 0", lambda good: good[:4] + b"\x00\x00" + good[6:]),
        ("min_k above k", lambda good: good[:16] + struct.pack("<H", 9) + good[18:]),
        ("a float's length", lambda good: good[:-4]),
        ("an item beyond the maximum", lambda good: good[:-8] + struct.pack("<d", 1e300)),
        ("a maximum of infinity", lambda good: good[:28 + 4 * (good[18] - 2)] + struct.pack("<d", math.inf)
         + good[36 + 4 * (good[18] - 2):]),
        ("empty flag on a full sketch", lambda good: good[:3] + b"\x01" + good[4:]),
        ("single-item flag on a full sketch", lambda good: good[:3] + b"\x04" + good[4:]),
        ("serial version 3", lambda good: good[:1] + b"\x03" + good[2:]),
    ],
)
def test_hostile_sketches_are_located_422s(name, make):
    good = _full_sketch()
    blob = make(good)
    assert blob != good, name
    with pytest.raises(UncomputableInput) as error:
        combine_sketches([kll_sketch_bytes([1.0, 2.0]), blob])
    assert [location.path for location in error.value.locations] == ["sketches[1]"], name
    assert error.value.detail.startswith("sketches[1]: "), name


def test_the_item_type_is_decided_once_from_the_length():
    doubles, floats = datasketches.kll_doubles_sketch(8), datasketches.kll_floats_sketch(8)
    doubles.update(np.arange(31.0))
    floats.update(np.arange(31.0, dtype=np.float32))
    assert read_kll_sketch(bytes(doubles.serialize())).item_type == "double"
    assert read_kll_sketch(bytes(floats.serialize())).item_type == "float"
    # Floats bytes padded to a doubles length still fail the doubles checks (no second decoder).
    padded = bytes(floats.serialize())
    with pytest.raises(UncomputableInput):
        read_kll_sketch(padded + bytes(len(padded) - 20 - 4 * padded[18]))
    # A single item is 12 (float) or 16 (double) bytes; an empty sketch 8 for both.
    assert read_kll_sketch(kll_sketch_bytes([2.5])).item_type == "double"
    one = datasketches.kll_floats_sketch(8)
    one.update(2.5)
    assert read_kll_sketch(bytes(one.serialize())).item_type == "float"
    assert read_kll_sketch(kll_sketch_bytes([])).item_type is None


def test_request_bytes_never_reach_the_native_decoder(monkeypatch):
    """combine_sketches reads sketches without the library: its decoders are replaced by ones that fail."""
    blobs = [kll_sketch_bytes(np.arange(1000.0)), kll_sketch_bytes([]), kll_sketch_bytes([3.0])]
    expected = combine_sketches(blobs)

    def refuse(*_):
        raise AssertionError("a native decoder saw request bytes")

    class Refusing:
        deserialize = staticmethod(refuse)
        get_normalized_rank_error = staticmethod(datasketches.kll_doubles_sketch.get_normalized_rank_error)

    monkeypatch.setattr(datasketches, "kll_doubles_sketch", Refusing)
    monkeypatch.setattr(datasketches, "kll_floats_sketch", Refusing)
    union = combine_sketches(blobs)
    assert union.n == expected.n == 1001
    np.testing.assert_array_equal(union.quantiles(PROBABILITIES), expected.quantiles(PROBABILITIES))


@pytest.mark.parametrize("k", [8, 9, 100, 200, 1000, 65535])
def test_the_rank_error_is_the_library_formula_of_min_k(k):
    """The static library function of k agrees with a sketch's own error (datasketches 5.2.0)."""
    sketch = datasketches.kll_doubles_sketch(k)
    sketch.update(np.arange(5000.0))
    contents = read_kll_sketch(bytes(sketch.serialize()))
    assert contents.normalized_rank_error == sketch.normalized_rank_error(False)
