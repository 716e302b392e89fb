"""KLL quantile sketches (Apache DataSketches) of parts of the data: decode, combine, read quantiles.

A KLL sketch (Karnin, Lang & Liberty, "Optimal quantile approximation in streams", FOCS 2016)
keeps a few hundred of a part's values, each standing for ``2**level`` of them. The compact
serialization is the same in the C++, Java and Python libraries of Apache DataSketches, so
sketches built in Spark or Druid jobs decode here.

Both ``kll_doubles_sketch`` and ``kll_floats_sketch`` bytes are accepted. Their headers do not
say the item type, but the library checks the byte length against the item count, so the two
cannot be confused: a buffer is decoded as doubles and, failing that, as floats (an empty sketch,
8 bytes, is the same in both). Float sketches hold values rounded to float32.

Combining: the retained items of every sketch, with their weights, are pooled and read as one
weighted sample (the sorted view a merged sketch would be read through, without the merge's
further random compaction). The result is deterministic and independent of the order of the
sketches, unlike the library's merge, whose compaction draws random bits; its rank error is at
most that of a merged sketch of the smallest ``k``, which is the error reported.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import datasketches
import numpy as np

from service.core.errors import Location, UncomputableInput

DEFAULT_K = 200
_DECODERS = (("double", datasketches.kll_doubles_sketch), ("float", datasketches.kll_floats_sketch))


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
    # The largest of the sketches' normalized_rank_error(False): the library's 99% bound on the
    # rank error of one-sided queries (quantiles, ranks) for a sketch of that size.
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


def _decode(blob: bytes, path: str):
    if not isinstance(blob, (bytes, bytearray, memoryview)):
        raise _reject(path, "a sketch is the bytes of a serialized KLL sketch")
    blob = bytes(blob)
    for item_type, decoder in _DECODERS:
        try:
            return item_type, decoder.deserialize(blob)
        except Exception:  # noqa: BLE001 - the library raises RuntimeError, IndexError or ValueError
            continue
    raise _reject(
        path,
        f"these {len(blob)} bytes are not a serialized KLL sketch of doubles or floats (Apache DataSketches)",
    )


def _reject(path: str, message: str) -> UncomputableInput:
    return UncomputableInput(detail=f"{path}: {message}", locations=[Location(path, message)])


def combine_sketches(blobs: Sequence[bytes], path: str = "$.sketches") -> SketchUnion:
    """Decode every sketch (located errors at ``{path}[i]``) and pool their retained items.

    Raises
    ------
    UncomputableInput
        No sketches, bytes that are not a KLL sketch, or a sketch whose contents contradict its
        own header (non-finite items, items outside its extremes, weights not summing to n).
    """
    if len(blobs) == 0:
        raise _reject(path, "give at least one sketch")
    items, weights, types = [], [], set()
    n = 0
    k = None
    error = 0.0
    minimum = maximum = None
    for i, blob in enumerate(blobs):
        where = f"{path}[{i}]"
        item_type, sketch = _decode(blob, where)
        types.add(item_type)
        k = sketch.k if k is None else min(k, sketch.k)
        error = max(error, float(sketch.normalized_rank_error(False)))
        if sketch.is_empty():
            continue
        pairs = list(sketch)
        values = np.fromiter((v for v, _ in pairs), dtype=np.float64, count=len(pairs))
        counts = np.fromiter((w for _, w in pairs), dtype=np.float64, count=len(pairs))
        low, high = float(sketch.get_min_value()), float(sketch.get_max_value())
        if not (
            math.isfinite(low)
            and math.isfinite(high)
            and np.all(np.isfinite(values))
            and np.all(values >= low)
            and np.all(values <= high)
            and float(counts.sum()) == float(sketch.n)
        ):
            raise _reject(where, "the sketch is corrupt: its items, extremes and count disagree")
        items.append(values)
        weights.append(counts)
        n += int(sketch.n)
        minimum = low if minimum is None else min(minimum, low)
        maximum = high if maximum is None else max(maximum, high)
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


__all__ = ["DEFAULT_K", "SketchUnion", "combine_sketches", "kll_sketch_bytes"]
