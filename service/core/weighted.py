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

from service.core.errors import Location, UncomputableInput


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


@dataclass(frozen=True, eq=False)
class WeightedData:
    """Support values, their weights and the meaning of the weights.

    ``weights`` is ``None`` for unit weights, so a raw sample costs no extra array.
    ``ordered`` says the values are in observation order (serial descriptors such as the
    lag-1 autocorrelation are defined only then). ``omitted`` counts missing observations
    that were dropped before this form was built.
    """

    values: np.ndarray
    weights: np.ndarray | None
    meaning: WeightMeaning
    ordered: bool
    omitted: int = 0

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
            starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
            counts = np.diff(np.append(starts, ordered.size)).astype(np.float64)
            distinct = ordered[starts]
        else:
            order = np.argsort(self.values, kind="stable")
            ordered = self.values[order]
            ordered_weights = self.weights[order]
            starts = np.flatnonzero(np.concatenate(([True], ordered[1:] != ordered[:-1])))
            counts = np.add.reduceat(ordered_weights, starts)
            distinct = ordered[starts]
        return SortedSupport(values=distinct, weights=counts, cumulative=np.cumsum(counts))

    @property
    def unit_sorted(self) -> bool:
        """True when order statistics can be read directly from ``sorted_values``."""
        return self.weights is None


def from_samples(values: list[float | None], *, omit_missing: bool) -> WeightedData:
    """Build the internal form from raw observations in observation order.

    ``None`` marks a missing observation. With ``omit_missing`` it is dropped and counted;
    otherwise the input is rejected, naming the first missing positions.
    """
    # msgspec rejects NaN on input, so every NaN here was a null (a missing observation).
    array = np.asarray(values, dtype=np.float64)
    missing_mask = np.isnan(array)
    omitted = int(np.count_nonzero(missing_mask))
    if omitted:
        missing = np.flatnonzero(missing_mask)
        if not omit_missing:
            raise UncomputableInput(
                detail=(
                    f"{omitted} missing value(s) (null) in values; set "
                    'options.missing to "omit" to drop them'
                ),
                locations=[
                    Location(f"$.values[{i}]", "missing value (null) under the reject policy")
                    for i in missing[:10]
                ],
            )
        present = array[~missing_mask]
    else:
        present = array
    if present.size == 0:
        raise UncomputableInput(
            detail="no observations remain after omitting missing values",
            locations=[Location("$.values", "every value is missing")],
        )
    return WeightedData(
        values=present, weights=None, meaning=WeightMeaning.UNIT, ordered=True, omitted=omitted
    )


def from_array(values: np.ndarray) -> WeightedData:
    """Build the internal form from an array of finite observations (no missing values)."""
    array = np.ascontiguousarray(values, dtype=np.float64)
    if array.ndim != 1 or array.size == 0:
        raise ValueError("expected a non-empty one-dimensional array")
    if not np.all(np.isfinite(array)):
        raise ValueError("values must be finite")
    return WeightedData(values=array, weights=None, meaning=WeightMeaning.UNIT, ordered=True)
