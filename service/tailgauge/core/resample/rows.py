"""Rows of weights over the support, as the order-statistic rules read them (many rows at once).

A resample is a vector of weights over the k support rows; :class:`Rows` holds a batch of them,
:class:`LeaveOneOut` the jackknife's rows (the data with one observation left out each), both
implementing :class:`tailgauge.core.order_rules.Rows`. :class:`Scratch` keeps a thread's
buffers from batch to batch.
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.order_rules import next_holding


class Scratch:
    """Arrays one thread reuses from batch to batch.

    A batch's b x k arrays are megabytes; touching fresh pages for each of them costs more than
    the arithmetic done in them, so each thread keeps one buffer per use and takes views of it.
    """

    def __init__(self) -> None:
        self._buffers: dict[str, np.ndarray] = {}

    def array(self, use: str, shape: tuple[int, ...], dtype) -> np.ndarray:
        size = math.prod(shape)
        buffer = self._buffers.get(use)
        if buffer is None or buffer.dtype != dtype or buffer.size < size:
            buffer = self._buffers[use] = np.empty(size, dtype=dtype)
        return buffer[:size].reshape(shape)


class Rows:
    """Weights of b resamples over the k support rows, seen through what statistics need.

    Whole counts keep their prefix sums as integers, running on across the rows (row r's
    cumulative counts plus everything drawn in rows before it): one increasing array, so a
    single binary search finds an order statistic of every row at once, exactly.
    """

    prefers_search = True
    unit_sorted = False

    def __init__(
        self,
        weights: np.ndarray,
        powers: np.ndarray | None,
        whole: bool,
        counts: np.ndarray | None = None,
        row_total: int | None = None,
        scratch: Scratch | None = None,
    ) -> None:
        """``counts``: the whole counts behind ``weights`` (any integer type), when at hand;
        ``row_total``: their sum in every row, when all rows share it (multinomial draws);
        ``scratch``: where to keep the prefix sums (they live as long as this view)."""
        self.weights = weights
        self.whole = whole
        if powers is not None:
            self.sums = weights @ powers
        rows, k = weights.shape
        self._running = None
        self._counts, self._row_total = None, row_total
        if whole:
            counts = weights.astype(np.int64) if counts is None else counts
            self._counts = counts
            totals = counts.sum(axis=1, dtype=np.int64) if row_total is None else np.full(rows, row_total, np.int64)
            self.total = totals.astype(np.float64)
            grand = float(np.sum(self.total))
            if grand < 2.0**62:
                # 32-bit prefix sums where they fit: half the memory traffic of 64-bit ones.
                kind = np.int32 if grand < 2.0**31 else np.int64
                running = np.empty((rows, k), kind) if scratch is None else scratch.array("running", (rows, k), kind)
                np.cumsum(counts, axis=None, dtype=kind, out=running.reshape(-1))
                self._running = running
                self._start = np.concatenate(([0], np.cumsum(totals)[:-1])).astype(kind)
                self._integer = self._running
            else:
                self._integer = np.cumsum(counts, axis=1, dtype=np.int64)
                self._start = np.zeros(rows, dtype=np.int64)
        else:
            self._cumulative = np.cumsum(weights, axis=1)
            self.total = self._cumulative[:, -1]

    @property
    def cumulative(self) -> np.ndarray:
        """Dense b x k cumulative weights (binned data's MAD asks for them)."""
        if self.whole:
            return (self._integer.astype(np.int64) - self._start[:, None]).astype(np.float64)
        return self._cumulative

    def cumulative_into(self, rows: slice, columns: slice, out: np.ndarray) -> None:
        """The cumulative weights of a tile of rows and support positions, written to ``out``
        (float64, the tile's shape): cache-sized tiles cost no fresh pages (the L-moments)."""
        if self.whole:
            np.subtract(self._integer[rows, columns], self._start[rows, None], out=out)
        else:
            np.copyto(out, self._cumulative[rows, columns])

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        """Per row, the first support index whose cumulative weight reaches ``target`` (b x q)."""
        rows, k = self.weights.shape
        if self.whole:
            # Integer cumulative counts reach a target exactly when they reach its ceiling.
            # (Clipped with maximum and minimum: np.clip's wrapper costs more than the work on
            # a batch's few targets; a -0.0 they keep is 0 once made whole.)
            clipped = np.maximum(target, 0.0)
            np.minimum(clipped, self.total[:, None], out=clipped)
            wanted = np.ceil(clipped, out=clipped).astype(self._integer.dtype)
            if self._running is not None:
                wanted += self._start[:, None]
                flat = np.searchsorted(self._running.ravel(), wanted, side="left")
                # A target of 0 is reached at index 0 (the search would land in the row before).
                flat -= self._row_offsets()
                np.maximum(flat, 0, out=flat)
                return np.minimum(flat, k - 1, out=flat)
            found = np.stack([np.searchsorted(self._integer[r], wanted[r], side="left") for r in range(rows)])
        else:
            found = np.stack([np.searchsorted(self._cumulative[r], target[r], side="left") for r in range(rows)])
        return np.minimum(found, k - 1)

    def _row_offsets(self) -> np.ndarray:
        """Each row's first position in the flattened b x k arrays (b x 1)."""
        offsets = getattr(self, "_offsets", None)
        if offsets is None:
            rows, k = self.weights.shape
            offsets = self._offsets = (np.arange(rows, dtype=np.intp) * k)[:, None]
        return offsets

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        if self.whole:
            if self._running is not None and index.ndim == 2 and index.shape[0] == self.weights.shape[0] and (
                index.size == 0 or (index.min() >= 0 and index.max() < self.weights.shape[1])
            ):
                # take_along_axis's values, read from the flattened running sums directly.
                found = self._running.ravel().take(index + self._row_offsets())
            else:
                found = np.take_along_axis(self._integer, index, axis=1)
            return (found.astype(np.int64) - self._start[:, None]).astype(np.float64)
        return np.take_along_axis(self._cumulative, index, axis=1)

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        return np.take_along_axis(self.weights, index, axis=1)

    def following(self, index: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # The next value this row holds (support values it did not draw have no weight).
        return next_holding(self, reached)

    def sum_squared_weights(self) -> np.ndarray:
        return np.sum(self.weights * self.weights, axis=1)

    def dense_weights(self, rows: np.ndarray) -> np.ndarray:
        """The weights of the given rows (len(rows) x k); a view when they are consecutive."""
        if rows.size and rows[-1] - rows[0] == rows.size - 1:
            return self.weights[rows[0] : rows[-1] + 1]
        return self.weights[rows]

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> Rows:
        """The given rows with the support permuted into ``order`` (for sorted deviations).

        Whole counts are taken from the integer counts (no conversion back from the weights),
        with the rows' common total when they share one; whole rows first, then the columns
        (two gathers along one axis each cost less than one over both)."""
        if self._counts is not None:
            counts = _take_rows(self._counts, rows).take(order, axis=1)
            return Rows(counts.astype(np.float64), None, True, counts, self._row_total)
        return Rows(_take_rows(self.weights, rows).take(order, axis=1), None, self.whole)

    def rows(self, part: slice) -> Rows:
        """A view of the rows in ``part`` (a slice), sharing this view's arrays.

        Everything a statistic reads is per row, so the statistics of a part are those rows'
        statistics of the whole, bit for bit (``Statistics.evaluate`` works part by part to
        bound its working memory).
        """
        view = object.__new__(Rows)
        view.weights, view.whole, view.total = self.weights[part], self.whole, self.total[part]
        view._counts = None if self._counts is None else self._counts[part]
        view._row_total = self._row_total
        if hasattr(self, "sums"):
            view.sums = self.sums[part]
        view._running = None if self._running is None else self._running[part]
        if self.whole:
            view._integer, view._start = self._integer[part], self._start[part]
        else:
            view._cumulative = self._cumulative[part]
        return view

    @property
    def count(self) -> int:
        return self.weights.shape[0]


def _take_rows(array: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """The given rows of ``array``; a view when they are consecutive and increasing."""
    if rows.size and rows[-1] - rows[0] == rows.size - 1 and np.all(rows[1:] > rows[:-1]):
        return array[rows[0] : rows[-1] + 1]
    return array.take(rows, axis=0)


class LeaveOneOut:
    """Jackknife rows: the full data with one observation removed from one support position each.

    Row r removes weight ``removed[r]`` at support position ``positions[r]`` (default: row r
    removes from position r); nothing k x k is ever built.
    """

    prefers_search = True
    unit_sorted = False

    def __init__(
        self,
        base: np.ndarray,
        removed: np.ndarray,
        powers: np.ndarray | None = None,
        positions: np.ndarray | None = None,
    ) -> None:
        self.base = base  # original weight per support position
        self.removed = removed  # weight of one observation, per row
        self.positions = np.arange(base.size) if positions is None else positions
        if powers is not None:
            self.sums = (base @ powers)[None, :] - removed[:, None] * powers[self.positions]
        self._cumulative = np.cumsum(base)
        self.total = self._cumulative[-1] - removed

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        position = self.positions[:, None]
        before = np.searchsorted(self._cumulative, target, side="left")
        after = np.maximum(np.searchsorted(self._cumulative, target + self.removed[:, None], side="left"), position)
        return np.minimum(np.where(before < position, before, after), self.base.size - 1)

    def cumulative_at(self, index: np.ndarray) -> np.ndarray:
        return self._cumulative[index] - np.where(index >= self.positions[:, None], self.removed[:, None], 0.0)

    def weight_at(self, index: np.ndarray) -> np.ndarray:
        return self.base[index] - np.where(index == self.positions[:, None], self.removed[:, None], 0.0)

    def following(self, index: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return next_holding(self, reached)

    def sum_squared_weights(self) -> np.ndarray:
        squares = float(np.sum(self.base * self.base))
        own = self.base[self.positions]
        remaining = own - self.removed
        return squares - own * own + remaining * remaining

    def dense_weights(self, rows: np.ndarray) -> np.ndarray:
        """The weights of the given rows (len(rows) x k): the data less one observation each."""
        dense = np.broadcast_to(self.base, (rows.size, self.base.size)).copy()
        dense[np.arange(rows.size), self.positions[rows]] -= self.removed[rows]
        return dense

    @property
    def base_cumulative(self) -> np.ndarray:
        """The full data's cumulative weights (k,), which every row changes at one position."""
        return self._cumulative

    @property
    def cumulative(self) -> np.ndarray:
        """Dense rows x k cumulative weights; only binned data (k = bins) ask for it."""
        dense = np.broadcast_to(self._cumulative, (self.positions.size, self.base.size)).copy()
        dense -= np.where(np.arange(self.base.size)[None, :] >= self.positions[:, None], self.removed[:, None], 0.0)
        return dense

    def reordered(self, rows: np.ndarray, order: np.ndarray) -> LeaveOneOut:
        """The given rows with the support permuted into ``order`` (for sorted deviations)."""
        inverse = np.empty_like(order)
        inverse[order] = np.arange(order.size)
        return LeaveOneOut(self.base[order], self.removed[rows], positions=inverse[self.positions[rows]])

    def rows(self, part: slice) -> LeaveOneOut:
        """The leave-one-out rows in ``part`` (a slice), sharing the support's arrays."""
        view = object.__new__(LeaveOneOut)
        view.base, view._cumulative = self.base, self._cumulative
        view.removed, view.positions, view.total = self.removed[part], self.positions[part], self.total[part]
        if hasattr(self, "sums"):
            view.sums = self.sums[part]
        return view

    @property
    def count(self) -> int:
        return self.positions.size
