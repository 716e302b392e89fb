"""KLL quantile sketches (Apache DataSketches) of parts of the data: read, combine, quantiles.

A KLL sketch (Karnin, Lang & Liberty, "Optimal quantile approximation in streams", FOCS 2016)
keeps a few hundred of a part's values, each standing for ``2**level`` of them. The compact
serialization is the same in the C++, Java and Python libraries of Apache DataSketches, so
sketches built in Spark or Druid jobs are read here.

Request bytes never reach the native library: its decoder trusts the level offsets in the
header and reads or writes far outside its buffers when they are wrong (a crafted 176-byte
sketch killed a worker by SIGSEGV). ``read_kll_sketch`` parses the layout in Python and numpy
and checks every field before anything is read at an offset taken from the bytes.

The layout (little-endian; ``kll_sketch_impl.hpp`` of datasketches-cpp, the code behind
``datasketches`` 5.2.0, serialize/deserialize)::

    byte 0      preamble ints: 2 (empty or single item) or 5 (more items)
    byte 1      serial version: 1 (empty or more items) or 2 (single item)
    byte 2      family id: 15 (KLL)
    byte 3      flags: bit 0 empty, bit 1 level zero sorted, bit 2 single item
    bytes 4-5   k (uint16, 8 to 65535)
    byte 6      m (uint8, always 8)
    byte 7      unused
    --- empty: nothing follows (8 bytes); single item: the item follows (8 + item size) ---
    bytes 8-15  n (uint64)
    bytes 16-17 min_k (uint16): the smallest k merged into the sketch; the error bound uses it
    byte 18     num_levels (uint8)
    byte 19     unused
    then        num_levels uint32 level offsets into a buffer of the capacity that k, m and
                num_levels imply (the final offset is that capacity, not written), the min item,
                the max item, and the capacity - offsets[0] retained items, level by level.

Items at level ``h`` have weight ``2**h``. The item type (``kll_doubles_sketch``: 8 bytes,
``kll_floats_sketch``: 4 bytes) is not written; it is decided once, from the byte length the
header implies for each size: exactly one must match (an empty sketch, 8 bytes, has no items
and no type). Float sketches hold values rounded to float32. Unused bytes and flag bits 3-7 are
ignored, as the library ignores them; everything else is checked (see ``read_kll_sketch``).

Combining: the retained items of every sketch, with their weights, are pooled and read as one
weighted sample (the sorted view a merged sketch would be read through, without the merge's
further random compaction). The result is deterministic and independent of the order of the
sketches, unlike the library's merge, whose compaction draws random bits; its rank error is at
most that of a merged sketch of the smallest ``min_k``, which is the error reported.
"""

from __future__ import annotations

import math
import struct
from collections.abc import Sequence
from dataclasses import dataclass

import datasketches
import numpy as np

from tailgauge.core.errors import Location, UncomputableInput

DEFAULT_K = 200

# Constants of the compact serialization (kll_sketch.hpp / kll_sketch_impl.hpp, datasketches-cpp).
_FAMILY = 15
_M = 8  # the only minimum level width the library reads (check_m)
_MIN_K, _MAX_K = 8, 65535
_EMPTY, _LEVEL_ZERO_SORTED, _SINGLE_ITEM = 1, 2, 4  # flag bits 0, 1, 2
_HEADER = struct.Struct("<BBBBHBx")  # preamble ints, serial version, family, flags, k, m, unused
_FULL_HEADER = struct.Struct("<QHBx")  # n, min_k, num_levels, unused (bytes 8-19)
_DATA_START = 20  # where the level offsets of a sketch of more than one item begin
_ITEM_TYPES = (("double", np.dtype("<f8")), ("float", np.dtype("<f4")))
# Capacities exist for depths up to 60 (kll_helper::int_cap_aux), so at most 61 levels.
_MAX_LEVELS = 61


def kll_sketch_bytes(values, k: int = DEFAULT_K) -> bytes:
    """A serialized ``kll_doubles_sketch`` of ``values`` (any array-like; every element is one value).

    For Dask or Spark tasks: build one per part, next to ``partial_state`` of the same values.
    ``k`` (8 to 65535) sets the size and the error (200 gives a normalized rank error of about
    1.3%). Missing values and infinities are rejected, as in ``partial_state``, so the sketch
    and the state describe the same values. The library's compaction is random: the same
    values can give different bytes.
    """
    if not (isinstance(k, int) and 8 <= k <= 65535):
        raise ValueError(f"k must be an integer from 8 to 65535, not {k!r}")
    array = np.ascontiguousarray(values, dtype=np.float64).ravel()
    bad = ~np.isfinite(array)
    if bad.any():
        raise UncomputableInput(
            detail=f"{int(bad.sum())} value(s) are missing (NaN) or infinite; drop them before sketching",
            locations=[Location(f"values[{i}]", "not a finite number") for i in np.flatnonzero(bad)[:10]],
        )
    sketch = datasketches.kll_doubles_sketch(k)
    if array.size:
        sketch.update(array)
    return bytes(sketch.serialize())


@dataclass(frozen=True)
class SketchUnion:
    """The pooled retained items of several KLL sketches, read as one weighted sample."""

    sketches: int
    n: int
    k: int  # the smallest k parameter among the sketches
    # The largest of the sketches' normalized rank errors: the library's 99% bound on the rank
    # error of one-sided queries (quantiles, ranks) for a sketch of that min_k.
    retained: int
    normalized_rank_error: float
    item_types: tuple[str, ...]
    minimum: float | None
    maximum: float | None
    items: np.ndarray  # sorted
    cumulative: np.ndarray  # cumulative weight up to and including each item

    def quantiles(self, probabilities) -> np.ndarray:
        """For each ``p``: the smallest item whose cumulative weight reaches ``ceil(p n)``.

        The library's inclusive rule (``get_quantile(p, inclusive=True)``), with ``p = 0`` and
        ``p = 1`` the exact minimum and maximum the sketches track.
        """
        p = np.asarray(probabilities, dtype=np.float64)
        if self.n == 0:
            return np.full(p.shape, np.nan)
        target = np.ceil(p * self.n)
        index = np.minimum(np.searchsorted(self.cumulative, target, side="left"), self.items.size - 1)
        values = self.items[index].astype(np.float64)
        values[p == 0.0] = self.minimum
        values[p == 1.0] = self.maximum
        return values


@dataclass(frozen=True)
class KllSketchContents:
    """What a serialized KLL sketch holds, read by ``read_kll_sketch`` without the native library."""

    item_type: str | None  # "double" or "float"; None for an empty sketch, whose bytes say neither
    k: int
    min_k: int  # the smallest k merged into the sketch (k unless it absorbed a smaller one)
    n: int
    minimum: float | None  # None when empty
    maximum: float | None
    items: np.ndarray  # float64, level by level as serialized (level zero first)
    weights: np.ndarray  # float64, 2**level of each item
    level_zero_sorted: bool

    @property
    def normalized_rank_error(self) -> float:
        """The library's 99% bound on one-sided rank error for ``min_k`` (a function of k only)."""
        return float(datasketches.kll_doubles_sketch.get_normalized_rank_error(self.min_k, False))


def _level_capacity(k: int, num_levels: int, height: int) -> int:
    """Nominal capacity of a level: ``max(m, round(k (2/3)**depth))`` (kll_helper::level_capacity).

    The rounding is the library's integer one, ``((2k << depth) // 3**depth + 1) >> 1``, split
    in two steps beyond depth 30 as ``int_cap_aux`` does.
    """
    depth = num_levels - height - 1

    def scaled(width: int, d: int) -> int:
        return (((2 * width) << d) // 3**d + 1) >> 1

    width = scaled(k, depth) if depth <= 30 else scaled(scaled(k, depth // 2), depth - depth // 2)
    return max(_M, width)


def _total_capacity(k: int, num_levels: int) -> int:
    return sum(_level_capacity(k, num_levels, h) for h in range(num_levels))


def read_kll_sketch(blob, path: str = "") -> KllSketchContents:
    """Parse and check the compact serialization of a ``kll_doubles_sketch`` or ``kll_floats_sketch``.

    Pure Python and numpy: no byte reaches the native decoder. Checked: the header (family 15,
    preamble ints and serial version matching the form, m = 8, 8 <= min_k <= k <= 65535); the
    exact byte length; 1 <= num_levels <= 61 and at most what n allows (the top level holds
    items of weight ``2**(num_levels - 1)`` <= n); level offsets increasing up to the capacity
    k and num_levels imply; the weights summing exactly to n; finite items and extremes with
    every item within [min, max]; levels above zero (and level zero when flagged) sorted.

    Raises
    ------
    UncomputableInput
        Located at ``path``, saying which check failed. Nothing else is raised, whatever the bytes.
    """
    if not isinstance(blob, (bytes, bytearray, memoryview)):
        raise UncomputableInput.at(path, "a sketch is the bytes of a serialized KLL sketch")
    data = bytes(blob)
    size = len(data)
    if size < _HEADER.size:
        raise UncomputableInput.at(path, f"{size} bytes are too few for a KLL sketch (its header alone is {_HEADER.size})")
    preamble_ints, serial_version, family, flags, k, m = _HEADER.unpack_from(data)
    if family != _FAMILY:
        raise UncomputableInput.at(path, f"not a KLL sketch: family id {family} (KLL sketches have {_FAMILY})")
    if m != _M:
        raise UncomputableInput.at(path, f"corrupt KLL sketch: m is {m}, the library writes and reads only {_M}")
    if not _MIN_K <= k <= _MAX_K:
        raise UncomputableInput.at(path, f"corrupt KLL sketch: k is {k}, not from {_MIN_K} to {_MAX_K}")
    empty, single = bool(flags & _EMPTY), bool(flags & _SINGLE_ITEM)
    form = "empty" if empty else "single-item" if single else "multi-item"
    expected_preamble, expected_version = (5, 1) if form == "multi-item" else (2, 1 if empty else 2)
    if empty and single:
        raise UncomputableInput.at(path, "corrupt KLL sketch: flagged both empty and single-item")
    if preamble_ints != expected_preamble or serial_version != expected_version:
        raise UncomputableInput.at(
            path,
            f"corrupt KLL sketch: preamble ints {preamble_ints} and serial version {serial_version} where "
            f"{'an' if empty else 'a'} {form} sketch has {expected_preamble} and {expected_version}",
        )
    sorted_zero = bool(flags & _LEVEL_ZERO_SORTED)
    if empty:
        if size != _HEADER.size:
            raise UncomputableInput.at(path, f"corrupt KLL sketch: flagged empty ({_HEADER.size} bytes), yet {size} bytes")
        nothing = np.empty(0)
        return KllSketchContents(None, k, k, 0, None, None, nothing, nothing, sorted_zero)
    if single:
        for item_type, dtype in _ITEM_TYPES:
            if size == _HEADER.size + dtype.itemsize:
                with np.errstate(invalid="ignore"):
                    item = float(np.frombuffer(data, dtype, 1, _HEADER.size)[0])
                if not math.isfinite(item):
                    raise UncomputableInput.at(path, "corrupt KLL sketch: its one item is not a finite number")
                return KllSketchContents(
                    item_type, k, k, 1, item, item, np.array([item]), np.ones(1), sorted_zero
                )
        raise UncomputableInput.at(
            path, f"corrupt KLL sketch: a single-item sketch is 12 (float) or 16 (double) bytes, not {size}"
        )
    return _read_multi_item(data, path, k, sorted_zero)


def _read_multi_item(data: bytes, path: str, k: int, sorted_zero: bool) -> KllSketchContents:
    size = len(data)
    if size < _DATA_START:
        raise UncomputableInput.at(path, f"truncated KLL sketch: {size} bytes, less than its {_DATA_START}-byte preamble")
    n, min_k, num_levels = _FULL_HEADER.unpack_from(data, _HEADER.size)
    if n == 0:
        raise UncomputableInput.at(path, "corrupt KLL sketch: n is 0 but the sketch is not flagged empty")
    if not _MIN_K <= min_k <= k:
        raise UncomputableInput.at(path, f"corrupt KLL sketch: min_k is {min_k}, not from {_MIN_K} to k = {k}")
    # The top level is never empty (levels are only added by compacting into them), so its
    # weight 2**(num_levels - 1) is at most n: num_levels <= n.bit_length() (ub_on_num_levels).
    most = min(_MAX_LEVELS, n.bit_length())
    if not 1 <= num_levels <= most:
        raise UncomputableInput.at(path, f"corrupt KLL sketch: {num_levels} levels, not from 1 to {most} for n = {n}")
    items_start = _DATA_START + 4 * num_levels
    if size < items_start:
        raise UncomputableInput.at(path, f"truncated KLL sketch: {size} bytes, shorter than its {items_start}-byte header")
    capacity = _total_capacity(k, num_levels)
    offsets = [int(v) for v in np.frombuffer(data, "<u4", num_levels, _DATA_START)] + [capacity]
    if any(low > high for low, high in zip(offsets, offsets[1:])):
        raise UncomputableInput.at(
            path,
            f"corrupt KLL sketch: level offsets {offsets[:-1]} do not increase up to the capacity {capacity} "
            f"that k = {k} and {num_levels} levels imply",
        )
    retained = capacity - offsets[0]
    lengths = {name: items_start + (retained + 2) * dtype.itemsize for name, dtype in _ITEM_TYPES}
    matches = [(name, dtype) for name, dtype in _ITEM_TYPES if lengths[name] == size]
    if len(matches) != 1:
        raise UncomputableInput.at(
            path,
            f"corrupt KLL sketch: {size} bytes, but its header ({retained} items in {num_levels} levels) "
            f"makes it {lengths['double']} bytes of doubles or {lengths['float']} bytes of floats",
        )
    item_type, dtype = matches[0]
    counts = np.diff(offsets)
    if sum(int(c) << h for h, c in enumerate(counts)) != n:
        raise UncomputableInput.at(path, f"corrupt KLL sketch: the weights of its {retained} items do not sum to n = {n}")
    with np.errstate(invalid="ignore"):  # a float32 signalling NaN warns when widened; rejected below
        values = np.frombuffer(data, dtype, retained + 2, items_start).astype(np.float64)
    low, high, items = float(values[0]), float(values[1]), values[2:]
    if not (math.isfinite(low) and math.isfinite(high) and low <= high):
        raise UncomputableInput.at(path, f"corrupt KLL sketch: its extremes {low!r} and {high!r} are not finite, ordered")
    if not np.all((items >= low) & (items <= high)):  # also false for NaN
        raise UncomputableInput.at(path, "corrupt KLL sketch: some items are not finite numbers within its extremes")
    # Sorted pairs within a level: level zero only when flagged so, the levels above always.
    starts = np.asarray(offsets[:-1]) - offsets[0]
    checked = np.ones(max(retained - 1, 0), dtype=bool)
    checked[starts[1:][(starts[1:] > 0) & (starts[1:] < retained)] - 1] = False
    if not sorted_zero:
        checked[: max(int(counts[0]) - 1, 0)] = False
    if np.any(checked & (items[1:] < items[:-1])):
        raise UncomputableInput.at(path, "corrupt KLL sketch: a level that must be sorted is not")
    weights = np.repeat(np.ldexp(1.0, np.arange(num_levels)), counts)
    return KllSketchContents(item_type, k, min_k, n, low, high, items, weights, sorted_zero)



def combine_sketches(blobs: Sequence[bytes], path: str = "sketches") -> SketchUnion:
    """Read every sketch (``read_kll_sketch``, located errors at ``{path}[i]``) and pool their items.

    ``item_types`` names the types of the non-empty sketches (an empty sketch has none).

    Raises
    ------
    UncomputableInput
        No sketches, bytes that are not a KLL sketch, or a sketch whose contents contradict its
        own header (see ``read_kll_sketch``).
    """
    if len(blobs) == 0:
        raise UncomputableInput.at(path, "give at least one sketch")
    items, weights, types = [], [], set()
    n = 0
    k = None
    error = 0.0
    minimum = maximum = None
    for i, blob in enumerate(blobs):
        sketch = read_kll_sketch(blob, f"{path}[{i}]")
        k = sketch.k if k is None else min(k, sketch.k)
        error = max(error, sketch.normalized_rank_error)
        if sketch.n == 0:
            continue
        types.add(sketch.item_type)
        items.append(sketch.items)
        weights.append(sketch.weights)
        n += sketch.n
        minimum = sketch.minimum if minimum is None else min(minimum, sketch.minimum)
        maximum = sketch.maximum if maximum is None else max(maximum, sketch.maximum)
    if items:
        pooled = np.concatenate(items)
        order = np.argsort(pooled, kind="stable")
        sorted_items = pooled[order]
        cumulative = np.cumsum(np.concatenate(weights)[order])
    else:
        sorted_items = cumulative = np.empty(0)
    return SketchUnion(
        sketches=len(blobs),
        n=n,
        k=int(k),
        retained=int(sorted_items.size),
        normalized_rank_error=error,
        item_types=tuple(sorted(types)),
        minimum=minimum,
        maximum=maximum,
        items=sorted_items,
        cumulative=cumulative,
    )


__all__ = [
    "DEFAULT_K",
    "KllSketchContents",
    "SketchUnion",
    "combine_sketches",
    "kll_sketch_bytes",
    "read_kll_sketch",
]
