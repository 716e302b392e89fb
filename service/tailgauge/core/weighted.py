"""The one internal form every input kind is normalised into before any descriptor is computed.

Raw samples, outcome tables and binned counts all become a :class:`WeightedData`: support
values, a weight per value and what the weights mean. Descriptors are functions of this
form only; nothing downstream knows which endpoint the data came from.

Weight semantics are defined by equivalence:

* ``UNIT`` — every value is one observation (raw samples without weights).
* ``FREQUENCY`` — a weight ``w`` is the same as repeating the value ``w`` times.
* ``RELIABILITY`` — analytic weights, proportional to the inverse variance of each value;
  the sample size is the Kish effective size ``(sum w)^2 / sum w^2``.
* ``PROBABILITY`` — the data are a whole discrete distribution: population descriptors.
"""

from __future__ import annotations

import enum
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from tailgauge.core.errors import Location, UncomputableInput
from tailgauge.core.order_rules import whole_counts


class WeightMeaning(enum.Enum):
    UNIT = "unit"
    FREQUENCY = "frequency"
    RELIABILITY = "reliability"
    PROBABILITY = "probability"


@dataclass(frozen=True)
class SortedSupport:
    """Distinct values in increasing order with the total weight at each.

    ``cumulative[i]`` is the weight of all values up to and including ``values[i]``, so the
    ``j``-th order statistic (1-based) of the equivalent repeated sample is the first value
    whose cumulative weight reaches ``j``.
    """

    values: np.ndarray
    weights: np.ndarray
    cumulative: np.ndarray

    @property
    def total(self) -> float:
        return float(self.cumulative[-1])


@dataclass(frozen=True)
class KnownSummary:
    """What a histogram states of its observations beside its buckets (``core.histograms``).

    ``count`` is the total of the counts; ``sum``, ``minimum`` and ``maximum`` are exact values
    of the observations when the histogram carries them (``None`` otherwise). Describing uses
    them where they make a descriptor exact (``describe.known``).
    """

    count: float
    sum: float | None = None
    minimum: float | None = None
    maximum: float | None = None


@dataclass(frozen=True, eq=False)
class WeightedData:
    """Support values, their weights and the meaning of the weights.

    ``weights`` is ``None`` for unit weights, so a raw sample costs no extra array.
    ``ordered`` says the values are in observation order (serial descriptors such as the
    lag-1 autocorrelation are defined only then). ``omitted`` counts missing observations
    that were dropped before this form was built, ``zero_weight`` the entries dropped for
    having weight zero, and ``normalised_from`` the original sum of a probability table that
    was rescaled to 1 on request.

    For binned counts, ``edges`` holds the k + 1 bin edges (``-inf``/``+inf`` for an open end)
    and ``values`` the k bin midpoints; an open bin's value is its finite edge, a placeholder
    that is never used because moments are undefined while an open bin holds data.
    ``empty_open_ends`` says which open-ended bins (lower, upper) were sent empty and left out,
    so what was sent can still be reported. ``known``: a histogram's own count, sum, minimum and
    maximum (``None`` for every other input).
    """

    values: np.ndarray
    weights: np.ndarray | None
    meaning: WeightMeaning
    ordered: bool
    omitted: int = 0
    zero_weight: int = 0
    normalised_from: float | None = None
    edges: np.ndarray | None = None
    empty_open_ends: tuple[bool, bool] = (False, False)
    known: KnownSummary | None = None

    @property
    def count(self) -> int:
        """Number of entries in ``values`` (observations for a raw sample)."""
        return int(self.values.size)

    @cached_property
    def total_weight(self) -> float:
        if self.weights is None:
            return float(self.values.size)
        return float(np.sum(self.weights))

    @cached_property
    def integer_weights(self) -> bool:
        """Whether the weights are counts of whole observations (so order statistics exist)."""
        if self.weights is None:
            return True
        if self.meaning not in (WeightMeaning.FREQUENCY, WeightMeaning.UNIT):
            return False
        return whole_counts(self.weights, self.total_weight)

    @cached_property
    def effective_size(self) -> float:
        """Kish's effective sample size ``(sum w)**2 / sum w**2`` (n for unit weights)."""
        if self.weights is None:
            return float(self.values.size)
        scale = float(np.max(self.weights))
        relative = self.weights / scale
        return float(np.sum(relative) ** 2 / np.sum(relative * relative))

    @property
    def binned(self) -> bool:
        return self.edges is not None

    @cached_property
    def open_bin_weight(self) -> float:
        """Weight held by open-ended bins (0 for anything that is not binned)."""
        if self.edges is None:
            return 0.0
        assert self.weights is not None
        weight = 0.0
        if np.isinf(self.edges[0]):
            weight += float(self.weights[0])
        if np.isinf(self.edges[-1]):
            weight += float(self.weights[-1])
        return weight

    @cached_property
    def sorted_values(self) -> np.ndarray:
        """The values sorted once; every order statistic is read from this array."""
        if self.weights is None:
            return np.sort(self.values, kind="quicksort")
        return self.support.values

    @cached_property
    def support(self) -> SortedSupport:
        """Distinct values with their summed weights (ties merged), from one sort."""
        if self.weights is None:
            ordered = self.sorted_values
            differs = ordered[1:] != ordered[:-1]
            if differs.all():  # no ties (most continuous data): the sorted values themselves
                n = ordered.size
                return SortedSupport(values=ordered, weights=np.ones(n), cumulative=np.arange(1.0, n + 1.0))
            starts = np.flatnonzero(np.concatenate(([True], differs)))
            counts = np.diff(np.append(starts, ordered.size)).astype(np.float64)
            distinct = ordered[starts]
        else:
            order, starts = self._support_order()
            counts = np.add.reduceat(self.weights[order], starts)
            distinct = self.values[order[starts]]
        return SortedSupport(values=distinct, weights=counts, cumulative=np.cumsum(counts))

    def _support_order(self) -> tuple[np.ndarray, np.ndarray]:
        """A permutation sorting the values, and where each run of equal values starts in it.

        The merged support must not depend on how equal values are ordered among themselves:
        it does not when there are no ties, nor when the weights are whole counts (their sums
        are exact in any order), so numpy's fastest (unstable) argsort serves. Otherwise, and
        when several zeros tie (+0 and -0 compare equal; a run's first value is its support
        value), equal values are put back in input order, as the stable sort used before left
        them, by sorting the integer keys ``run * n + index``: the support is the same, bit for
        bit, in a third to a half of a stable argsort's time from 1e4 values on. Short inputs
        keep the stable argsort, quicker there than the extra steps.
        """
        values = self.values
        n = values.size
        if n <= STABLE_SORT_UP_TO:
            order = np.argsort(values, kind="stable")
            ordered = values[order]
            return order, np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
        order = np.argsort(values)
        ordered = values[order]
        differs = ordered[1:] != ordered[:-1]
        starts = np.flatnonzero(np.concatenate(([True], differs)))
        if starts.size < n:
            tied_zeros = np.searchsorted(ordered, 0.0, side="right") - np.searchsorted(ordered, 0.0, side="left") > 1
            if tied_zeros or not self.integer_weights:
                run = np.cumsum(np.concatenate(([0], differs)), dtype=np.int64)
                order = np.sort(run * n + order) % n
        return order, starts

    @property
    def unit_sorted(self) -> bool:
        """True when order statistics can be read directly from ``sorted_values``."""
        return self.weights is None


# Up to this many weighted values the support is sorted by a stable argsort (see
# ``WeightedData._support_order``).
STABLE_SORT_UP_TO = 2048

# Largest |sum of probabilities - 1| accepted without normalisation.
PROBABILITY_TOLERANCE = 1e-9


def _check_total(weights: np.ndarray, path: str) -> float:
    with np.errstate(over="ignore"):
        total = float(np.sum(weights))
    if not np.isfinite(total):
        raise UncomputableInput.at(path, "the weights sum beyond the float64 range; rescale them")
    if total <= 0.0:
        raise UncomputableInput.at(path, "every weight is zero, so there is nothing to describe")
    return total


def from_samples(
    values: list[float | None],
    *,
    omit_missing: bool,
    weights: list[float] | None = None,
    meaning: WeightMeaning = WeightMeaning.FREQUENCY,
) -> WeightedData:
    """Build the internal form from raw observations in observation order.

    ``None`` marks a missing observation. With ``omit_missing`` it is dropped (with its weight)
    and counted; otherwise the input is rejected, naming the first missing positions.
    ``weights`` (non-negative, one per value) are frequency or reliability weights; entries of
    weight zero are dropped and counted.
    """
    # msgspec rejects NaN on input, so every NaN here was a null (a missing observation).
    array = np.asarray(values, dtype=np.float64)
    missing_mask = np.isnan(array)
    omitted = int(np.count_nonzero(missing_mask))
    if omitted and not omit_missing:
        raise UncomputableInput(
            detail=(
                f"{omitted} missing value(s) (null) in values; set "
                'options.missing to "omit" to drop them'
            ),
            locations=[
                Location(f"values[{i}]", "missing value (null) under the reject policy")
                for i in np.flatnonzero(missing_mask)[:10]
            ],
        )
    weight_array = None
    zero_weight = 0
    if weights is not None:
        weight_array = np.asarray(weights, dtype=np.float64)
        if weight_array.size != array.size:
            raise UncomputableInput.at(
                "weights",
                f"has {weight_array.size} entries but values has {array.size}; give one weight per value",
            )
    keep = ~missing_mask
    if weight_array is not None:
        positive = weight_array > 0.0
        zero_weight = int(np.count_nonzero(keep & ~positive))
        keep &= positive
    present = array[keep] if (omitted or zero_weight) else array
    if present.size == 0:
        if weight_array is not None and zero_weight:
            raise UncomputableInput.at("weights", "every present value has weight zero, so there is nothing to describe")
        raise UncomputableInput.at("values", "every value is missing", "no observations remain after omitting missing values")
    if weight_array is None:
        return WeightedData(
            values=present, weights=None, meaning=WeightMeaning.UNIT, ordered=True, omitted=omitted
        )
    kept_weights = weight_array[keep]
    _check_total(kept_weights, "weights")
    return WeightedData(
        values=present,
        weights=kept_weights,
        meaning=meaning,
        ordered=False,
        omitted=omitted,
        zero_weight=zero_weight,
    )


def from_complete_samples(samples: list[np.ndarray]) -> list[WeightedData] | None:
    """What :func:`from_samples` gives for each of many unweighted samples (float64 arrays), when
    none holds a missing value (NaN) or is empty; ``None`` otherwise, and the caller then takes
    each sample through :func:`from_samples`, whose errors and omissions name their positions.

    The values are checked together, a chunk of samples at a time (each chunk copied once, at
    most about ``_CHECK_CHUNK`` values beyond the samples themselves), instead of one check per
    sample: many small groups in one request spend more on per-sample checks than on numbers."""
    pending: list[np.ndarray] = []
    held = 0
    for sample in samples:
        if sample.size == 0:
            return None
        pending.append(sample)
        held += sample.size
        if held >= _CHECK_CHUNK:
            if np.isnan(np.concatenate(pending)).any():
                return None
            pending, held = [], 0
    if not samples or (pending and np.isnan(np.concatenate(pending)).any()):
        return None
    return [
        WeightedData(values=sample, weights=None, meaning=WeightMeaning.UNIT, ordered=True, omitted=0)
        for sample in samples
    ]


# Values checked at once by from_complete_samples (512 KiB of float64).
_CHECK_CHUNK = 65_536


def from_table(
    values: np.ndarray, weights: np.ndarray, *, probabilities: bool, normalise: bool
) -> WeightedData:
    """Build the internal form from distinct-or-repeated outcomes with a weight each.

    Counts give a sample (frequency weights); probabilities a whole distribution, which must
    sum to 1 within :data:`PROBABILITY_TOLERANCE` unless ``normalise`` asks for rescaling.
    Repeated outcomes are merged and order does not matter; zero weights are dropped and counted.
    """
    values = np.asarray(values, dtype=np.float64)
    weights = np.asarray(weights, dtype=np.float64)
    total = _check_total(weights, "outcomes")
    normalised_from = None
    if probabilities and abs(total - 1.0) > PROBABILITY_TOLERANCE:
        if not normalise:
            raise UncomputableInput.at(
                "outcomes",
                f"probabilities sum to {total!r}, off by {total - 1.0:+.3g} (tolerance "
                f"{PROBABILITY_TOLERANCE:g}); fix them or set options.normalize to true",
            )
        normalised_from = total
        weights = weights / total
    positive = weights > 0.0
    zero_weight = int(np.count_nonzero(~positive))
    if zero_weight:
        values, weights = values[positive], weights[positive]
    return WeightedData(
        values=values,
        weights=weights,
        meaning=WeightMeaning.PROBABILITY if probabilities else WeightMeaning.FREQUENCY,
        ordered=False,
        zero_weight=zero_weight,
        normalised_from=normalised_from,
    )


def from_bins(edges: list[float | None], counts: list[float]) -> WeightedData:
    """Build the internal form from k + 1 bin edges and k counts.

    Only the first or last edge may be ``None`` (an open-ended bin). Edges must increase
    strictly. An open bin with count zero is dropped, so any open bin left holds data. All
    weight in open bins leaves nothing to describe and is rejected.
    """
    if len(edges) != len(counts) + 1:
        raise UncomputableInput.at(
            "edges",
            f"has {len(edges)} entries for {len(counts)} counts; give k + 1 edges for k counts",
        )
    for i, edge in enumerate(edges[1:-1], start=1):
        if edge is None:
            raise UncomputableInput.at(f"edges[{i}]", "only the first or the last edge may be null (open-ended)")
    edge_array = np.array(
        [-np.inf if edges[0] is None else edges[0], *edges[1:-1], np.inf if edges[-1] is None else edges[-1]],
        dtype=np.float64,
    )
    with np.errstate(over="ignore"):  # (a width beyond float64's range is refused just below)
        steps = np.diff(edge_array)
    bad = np.flatnonzero(~(steps > 0.0))
    if bad.size:
        i = int(bad[0]) + 1
        raise UncomputableInput.at(f"edges[{i}]", f"edges must increase strictly; this one is not above edges[{i - 1}]")
    # Finite edges whose distance is beyond the largest float64 number: no width, midpoint spread
    # or density of that bin can be computed (an open end is the only infinite width).
    closed = np.isfinite(edge_array[:-1]) & np.isfinite(edge_array[1:])
    wide = np.flatnonzero(closed & np.isinf(steps))
    if wide.size:
        i = int(wide[0]) + 1
        raise UncomputableInput.at(
            f"edges[{i}]",
            f"the width from edges[{i - 1}] to this edge is beyond the largest float64 number (about 1.8e308); "
            "rescale the data (for example to another unit)",
        )
    count_array = np.asarray(counts, dtype=np.float64)
    total = _check_total(count_array, "counts")
    keep = np.ones(count_array.size, dtype=bool)
    if np.isinf(edge_array[0]) and count_array[0] == 0.0:
        keep[0] = False
    if np.isinf(edge_array[-1]) and count_array[-1] == 0.0:
        keep[-1] = False
    empty_open_ends = (not keep[0], not keep[-1])
    if not keep.all():
        edge_keep = np.ones(edge_array.size, dtype=bool)
        if not keep[0]:
            edge_keep[0] = False
        if not keep[-1]:
            edge_keep[-1] = False
        edge_array, count_array = edge_array[edge_keep], count_array[keep]
    open_weight = 0.0
    if np.isinf(edge_array[0]):
        open_weight += float(count_array[0])
    if count_array.size and np.isinf(edge_array[-1]):
        open_weight += float(count_array[-1])
    if count_array.size == 0 or open_weight >= total:
        raise UncomputableInput.at("counts", "every count lies in an open-ended bin, so nothing can be described")
    lower, upper = edge_array[:-1], edge_array[1:]
    midpoints = np.where(np.isinf(lower), upper, np.where(np.isinf(upper), lower, 0.5 * lower + 0.5 * upper))
    return WeightedData(
        values=midpoints,
        weights=count_array,
        meaning=WeightMeaning.FREQUENCY,
        ordered=False,
        edges=edge_array,
        empty_open_ends=empty_open_ends,
    )


def from_array(values: np.ndarray) -> WeightedData:
    """Build the internal form from an array of finite observations (no missing values)."""
    array = np.ascontiguousarray(values, dtype=np.float64)
    if array.ndim != 1 or array.size == 0:
        raise ValueError("expected a non-empty one-dimensional array")
    if not np.all(np.isfinite(array)):
        raise ValueError("values must be finite")
    return WeightedData(values=array, weights=None, meaning=WeightMeaning.UNIT, ordered=True)
