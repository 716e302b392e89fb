"""Mergeable partial states: the count, mean, central sums and extremes of one part of the data.

A state is what a task computes where its part of the data lives (a Dask chunk, a Spark
partition); states of disjoint parts merge exactly into the state of their union, and the
moment descriptors of the union follow from the merged state alone. Everything that needs the
values themselves (median, quantiles, MAD, modes, L-moments, resampling) is not in a state;
quantiles may come instead from KLL sketches of the same parts (``tailgauge.core.sketches``).

State of order ``p`` (4 to 12): ``count`` (number of values, or their total frequency weight),
``mean``, ``central_sums = (M2, ..., Mp)`` with ``Mj = sum w (x - mean)**j``, and the exact
``minimum`` and ``maximum`` (``None`` for an empty state).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

# The shared assembly helpers of describe: one implementation of every moment descriptor.
from tailgauge.core.describe import (
    Conventions,
    DescribeOptions,
    Description,
    Descriptor,
    Quantile,
    QuantileSketches,
    SCALAR_DESCRIPTORS,
    Size,
    _basis_of,
    _explain_remaining_nulls,
    _finite_or_none,
    _mean_median_gap,
    _moment_descriptors,
    _moments,
    _normality_tests,
    _note_asymmetry,
    _note_degenerate,
    _Notes,
    _quantile_shape,
    _ROBUST_PROBABILITIES,
    _shape_estimators,
)
from tailgauge.core.errors import Location, UncomputableInput
from tailgauge.core.moments import CentralSums, central_sums, scale_by_power_of_two
from tailgauge.core.order_statistics import NORMAL_MAD_FACTOR
from tailgauge.core.weighted import WeightedData, WeightMeaning

if TYPE_CHECKING:
    from tailgauge.core.sketches import SketchUnion

MIN_ORDER = 4
MAX_ORDER = 12
# Rounding allowed when checking a caller's state for consistency: the mean may lie this far
# (relative to the magnitude of the extremes) outside [minimum, maximum], and the deviations
# bounding the central sums may exceed the range by as much.
_CONSISTENCY_TOLERANCE = 2.0**-30

# Descriptors that need the values themselves, and those a quantile sketch can stand in for.
_NEEDS_VALUES = (
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "medcouple",
    "half_sample_mode",
    "l_location",
    "l_scale",
    "l_skewness",
    "l_kurtosis",
    "lag1_autocorrelation",
)
_QUANTILE_LABELS = {
    "median": "the 0.5 quantile",
    "interquartile_range": "Q(0.75) - Q(0.25)",
    "quartile_skewness": "(Q3 + Q1 - 2 Q2) / (Q3 - Q1) (Bowley)",
    "octile_kurtosis": "((E7 - E5) + (E3 - E1)) / (E6 - E2) (Moors 1988)",
    "octile_excess_kurtosis": "octile kurtosis - its normal value",
    "mean_median_gap": "(mean - median) / standard deviation",
}
_FROM_QUANTILES = tuple(_QUANTILE_LABELS)


@dataclass(frozen=True)
class PartialState:
    """Count, mean, central sums ``(M2, ..., Mp)`` and extremes of one part of the data.

    ``Mj = sum_i w_i (x_i - mean)**j`` (unit weights for raw values). An empty part has count 0,
    mean 0, every central sum 0 and no extremes (``None``).
    """

    count: float
    mean: float
    central_sums: tuple[float, ...]
    minimum: float | None
    maximum: float | None

    @property
    def order(self) -> int:
        return len(self.central_sums) + 1

    @classmethod
    def empty(cls, order: int = MIN_ORDER) -> PartialState:
        _check_order(order)
        return cls(0.0, 0.0, (0.0,) * (order - 1), None, None)


def _check_order(order: int) -> None:
    if not (isinstance(order, int) and MIN_ORDER <= order <= MAX_ORDER):
        raise ValueError(f"order must be an integer from {MIN_ORDER} to {MAX_ORDER}, not {order!r}")


def _reject(path: str, message: str) -> UncomputableInput:
    return UncomputableInput(detail=f"{path}: {message}", locations=[Location(path, message)])


def _first_positions(mask: np.ndarray, path: str, message: str) -> list[Location]:
    return [Location(f"{path}[{i}]", message) for i in np.flatnonzero(mask)[:10]]


def partial_state(values, order: int = MIN_ORDER, weights=None) -> PartialState:
    """The partial state of ``values`` (any array-like of numbers; every element is one value).

    Parameters
    ----------
    values
        Finite numbers; an empty array gives the empty state. Missing values (NaN) and
        infinities are rejected: drop them before, and count them yourself if you need to.
    order
        Highest central sum kept, 4 to 12 (``Mp`` for ``p = order``).
    weights
        Optional frequency weights, one per value, finite and ``>= 0``: a weight ``w`` is the
        same as repeating the value ``w`` times. Values of weight zero are left out.

    Returns
    -------
    PartialState
        Central sums from the shifted, blocked two-pass code of ``tailgauge.core.moments``
        (never from raw power sums), exact extremes.

    Raises
    ------
    UncomputableInput
        Non-finite values or weights, mismatched lengths, or a central sum beyond float64's
        range (data so large or small that ``Mp`` overflows or underflows: lower the order).
    """
    _check_order(order)
    array = np.ascontiguousarray(values, dtype=np.float64).ravel()
    bad = ~np.isfinite(array)
    if bad.any():
        raise UncomputableInput(
            detail=f"{int(bad.sum())} value(s) are missing (NaN) or infinite; drop them before computing a state",
            locations=_first_positions(bad, "values", "not a finite number"),
        )
    weight_array = None
    if weights is not None:
        weight_array = np.ascontiguousarray(weights, dtype=np.float64).ravel()
        if weight_array.size != array.size:
            raise _reject("weights", f"has {weight_array.size} entries for {array.size} values; give one weight per value")
        bad = ~(np.isfinite(weight_array) & (weight_array >= 0.0))
        if bad.any():
            raise UncomputableInput(
                detail=f"{int(bad.sum())} weight(s) are negative or not finite",
                locations=_first_positions(bad, "weights", "frequency weights are finite and >= 0"),
            )
        positive = weight_array > 0.0
        if not positive.all():
            array, weight_array = array[positive], weight_array[positive]
    if array.size == 0:
        return PartialState.empty(order)
    return _state_of_arrays(array, weight_array, order, "values")


def state_of(data: WeightedData, order: int = MIN_ORDER) -> PartialState:
    """The partial state of a sample already in the internal form (unit or frequency weights).

    Reliability weights carry no count of observations, and a probability table or binned counts
    no values, so states of them would not merge into a meaningful union: rejected, located at
    ``options.partial_state``.
    """
    _check_order(order)
    path = "options.partial_state"
    if data.binned:
        raise _reject(path, "binned counts have no values to summarise; partial states are for samples")
    if data.meaning is WeightMeaning.RELIABILITY:
        raise _reject(
            path,
            "reliability weights carry no count of observations, so their states cannot be merged; "
            "use frequency weights or none",
        )
    if data.meaning is WeightMeaning.PROBABILITY:
        raise _reject(path, "a probability table is a whole distribution, not a part of a sample")
    return _state_of_arrays(data.values, data.weights, order, path)


def _state_of_arrays(values: np.ndarray, weights: np.ndarray | None, order: int, path: str) -> PartialState:
    weight_exponent = 0
    if weights is not None:
        with np.errstate(over="ignore"):
            total = float(np.sum(weights))
        if not math.isfinite(total) or total <= 0.0:
            raise _reject(path, "the weights sum to zero or beyond float64's range")
        # Scale the weights by a power of two (exact) to a total in [0.5, 1), so the sums stay far
        # from float64's limits and the scaling is known exactly when they are read back.
        weight_exponent = math.frexp(total)[1]
        weights = np.ldexp(weights, -weight_exponent)
    sums = central_sums(values, weights, order)
    count = math.ldexp(sums.total_weight, weight_exponent)
    central = []
    for j in range(2, order + 1):
        value = scale_by_power_of_two(float(sums.sums[j]), j * sums.scale_exponent + weight_exponent)
        if not math.isfinite(value):
            raise _reject(
                path,
                f"the central sum of order {j} is outside float64's range for these data; use a lower order",
            )
        central.append(value)
    return PartialState(
        count=count,
        mean=sums.mean,
        central_sums=tuple(central),
        minimum=float(np.min(values)),
        maximum=float(np.max(values)),
    )


# --- merging -------------------------------------------------------------------------------


@dataclass
class _States:
    """Many states of one order as arrays; ``NaN`` extremes mark empty states."""

    count: np.ndarray
    mean: np.ndarray
    sums: np.ndarray  # shape (states, order - 1): M2 .. Mp
    minimum: np.ndarray
    maximum: np.ndarray

    @classmethod
    def of(cls, states: Sequence[PartialState], order: int) -> _States:
        k = len(states)
        return cls(
            count=np.fromiter((s.count for s in states), dtype=np.float64, count=k),
            mean=np.fromiter((s.mean for s in states), dtype=np.float64, count=k),
            sums=np.array([s.central_sums[: order - 1] for s in states], dtype=np.float64).reshape(k, order - 1),
            minimum=np.fromiter((math.nan if s.minimum is None else s.minimum for s in states), np.float64, k),
            maximum=np.fromiter((math.nan if s.maximum is None else s.maximum for s in states), np.float64, k),
        )

    def take(self, index) -> _States:
        return _States(self.count[index], self.mean[index], self.sums[index], self.minimum[index], self.maximum[index])

    def state(self, i: int) -> PartialState:
        if self.count[i] == 0.0:
            return PartialState.empty(self.sums.shape[1] + 1)
        return PartialState(
            count=float(self.count[i]),
            mean=float(self.mean[i]),
            central_sums=tuple(float(v) for v in self.sums[i]),
            minimum=float(self.minimum[i]),
            maximum=float(self.maximum[i]),
        )


def _merge_pairs(a: _States, b: _States, path: str) -> _States:
    """States of the unions ``a[i] + b[i]``, element by element.

    With ``n = na + nb``, ``delta = mean_b - mean_a`` and ``M_j`` of each part (``M_0 = n``, ``M_1 = 0``),
    the deviations from the union mean are ``x - mean_a - (nb/n) delta`` in ``a`` and
    ``x - mean_b + (na/n) delta`` in ``b``; expanding their ``p``-th powers gives Pébay's
    arbitrary-order pairwise update (SAND2008-6212, 2008; Chan, Golub & LeVeque 1979 for p = 2)::

        M_p = M_p,a + M_p,b
              + sum_{k=1}^{p-2} C(p, k) delta^k [(-nb/n)^k M_{p-k},a + (na/n)^k M_{p-k},b]
              + (na nb / n) delta^p [(na/n)^(p-1) - (-nb/n)^(p-1)]

    Evaluated on deviations scaled by ``2**-e`` (exact), with ``2**e`` above the union's range,
    so every term is at most the count in magnitude and nothing overflows on the way; the
    result is scaled back once. An empty part leaves the other unchanged, exactly.
    """
    order = a.sums.shape[1] + 1
    n = a.count + b.count
    with np.errstate(invalid="ignore", divide="ignore", over="ignore", under="ignore"):
        fa = np.where(n > 0.0, a.count / n, 0.0)
        fb = np.where(n > 0.0, b.count / n, 0.0)
        minimum = np.fmin(a.minimum, b.minimum)
        maximum = np.fmax(a.maximum, b.maximum)
        half_range = np.nan_to_num(0.5 * maximum - 0.5 * minimum)
        exponent = np.frexp(half_range)[1] + 1
        # Halves first, so means near +-1.8e308 of opposite sign do not overflow.
        delta = np.ldexp(0.5 * b.mean - 0.5 * a.mean, 1 - exponent)
        orders = np.arange(2, order + 1)
        shift = -(exponent[:, None] * orders[None, :])
        # scaled[:, j] is M_j / 2**(j e) for j = 0 .. p (M_0 = count, M_1 = 0).
        scaled_a = np.zeros((n.size, order + 1))
        scaled_b = np.zeros((n.size, order + 1))
        scaled_a[:, 0], scaled_b[:, 0] = a.count, b.count
        scaled_a[:, 2:] = np.ldexp(a.sums, shift)
        scaled_b[:, 2:] = np.ldexp(b.sums, shift)
        powers_delta = delta[:, None] ** np.arange(order + 1)[None, :]
        powers_a = (-fb)[:, None] ** np.arange(order + 1)[None, :]
        powers_b = fa[:, None] ** np.arange(order + 1)[None, :]
        merged = np.empty((n.size, order - 1))
        for p in range(2, order + 1):
            total = scaled_a[:, p] + scaled_b[:, p]
            for k in range(1, p - 1):
                total = total + math.comb(p, k) * powers_delta[:, k] * (
                    powers_a[:, k] * scaled_a[:, p - k] + powers_b[:, k] * scaled_b[:, p - k]
                )
            total = total + a.count * fb * powers_delta[:, p] * (powers_b[:, p - 1] - powers_a[:, p - 1])
            merged[:, p - 2] = total
        sums = np.ldexp(merged, -shift)
        mean = a.mean + np.ldexp(fb * delta, exponent)
        # Halves when the step itself overflows (means near +-1.8e308 of opposite sign).
        mean = np.where(np.isfinite(mean), mean, 2.0 * (0.5 * a.mean + np.ldexp(fb * delta, exponent - 1)))
    lost = (merged != 0.0) & ~(np.abs(sums) >= np.finfo(np.float64).tiny) | ~np.isfinite(sums)
    empty_a, empty_b = a.count == 0.0, b.count == 0.0
    lost &= ~(empty_a | empty_b)[:, None]
    if lost.any():
        j = int(np.flatnonzero(lost.any(axis=0))[0]) + 2
        raise _reject(path, f"the central sum of order {j} of the union is outside float64's range")
    result = _States(n, mean, sums, minimum, maximum)
    result = _select(empty_a, b, result)
    return _select(empty_b, a, result)


def _select(mask: np.ndarray, chosen: _States, other: _States) -> _States:
    if not mask.any():
        return other
    return _States(
        np.where(mask, chosen.count, other.count),
        np.where(mask, chosen.mean, other.mean),
        np.where(mask[:, None], chosen.sums, other.sums),
        np.where(mask, chosen.minimum, other.minimum),
        np.where(mask, chosen.maximum, other.maximum),
    )


def merge(a: PartialState, b: PartialState) -> PartialState:
    """The state of the union of two disjoint parts, exact up to rounding (see ``_merge_pairs``).

    States of different orders merge to the lower order (the higher sums of one part cannot be
    completed without the other's). The states are trusted; ``merge_states`` checks callers'.
    """
    order = min(a.order, b.order)
    merged = _merge_pairs(_States.of([a], order), _States.of([b], order), "states")
    return merged.state(0)


def merge_states(states: Sequence[PartialState], path: str = "states") -> PartialState:
    """Check every state, then merge them all by pairwise tree reduction.

    States of different orders merge to the lowest order among them. Each level of the tree
    merges neighbours ``(0, 1), (2, 3), ...`` at once (vectorised), so the result depends only on
    the order of the list and its rounding grows with ``log2`` of the number of states.

    Raises
    ------
    UncomputableInput
        No states, an inconsistent state (located at ``{path}[i].<field>``), or a merged central
        sum beyond float64's range.
    """
    if not states:
        raise _reject(path, "give at least one partial state")
    check_states(states, path)
    order = min(s.order for s in states)
    current = _States.of(states, order)
    while current.count.size > 1:
        pairs = current.count.size // 2
        merged = _merge_pairs(current.take(slice(0, 2 * pairs, 2)), current.take(slice(1, 2 * pairs, 2)), path)
        if current.count.size % 2:
            last = current.take(slice(-1, None))
            merged = _States(*(np.concatenate((x, y)) for x, y in zip(_fields(merged), _fields(last))))
        current = merged
    return current.state(0)


def _fields(states: _States) -> tuple[np.ndarray, ...]:
    return states.count, states.mean, states.sums, states.minimum, states.maximum


def check_states(states: Sequence[PartialState], path: str = "states") -> None:
    """Reject states no data could have produced, naming each by ``{path}[i].<field>``.

    Checked: an order from 4 to 12; finite numbers; count >= 0; an empty state (count 0) has mean
    0, every central sum 0 and no extremes (``None``, or 0 as some writers store it); otherwise
    minimum <= maximum, the mean between them and every ``|Mj| <= count * (maximum -
    minimum)**j`` (each deviation is at most the range), with even-order sums >= 0. The
    bounds allow rounding of ``2**-30`` relative to the magnitude of the extremes.
    """
    k = len(states)
    lengths = np.fromiter((len(s.central_sums) for s in states), dtype=np.int64, count=k)
    # Checked together as arrays (one state at a time costs more than the merge itself).
    width = MAX_ORDER - 1
    sums = np.zeros((k, width))
    for i, s in enumerate(states):
        if lengths[i] <= width:
            sums[i, : lengths[i]] = s.central_sums
    count = np.fromiter((s.count for s in states), dtype=np.float64, count=k)
    mean = np.fromiter((s.mean for s in states), dtype=np.float64, count=k)
    minimum = np.fromiter((math.nan if s.minimum is None else s.minimum for s in states), np.float64, k)
    maximum = np.fromiter((math.nan if s.maximum is None else s.maximum for s in states), np.float64, k)
    no_minimum = np.fromiter((s.minimum is None for s in states), dtype=bool, count=k)
    no_maximum = np.fromiter((s.maximum is None for s in states), dtype=bool, count=k)

    problems: dict[int, list[Location]] = {}
    settled = np.zeros(k, dtype=bool)

    def flag(mask: np.ndarray, field: str, message, *, final: bool = True) -> None:
        """Record ``field`` of every state in ``mask`` not already settled; ``message`` may depend on i."""
        for i in np.flatnonzero(mask & ~settled):
            text = message(i) if callable(message) else message
            problems.setdefault(int(i), []).append(Location(f"{path}[{i}].{field}", text))
        if final:
            settled[mask] = True

    with np.errstate(invalid="ignore", over="ignore", under="ignore"):
        flag((lengths < MIN_ORDER - 1) | (lengths > width), "central_sums",
             f"give M2 .. Mp for an order p from {MIN_ORDER} to {MAX_ORDER}")
        flag(~(np.isfinite(count) & (count >= 0.0)), "count", "must be a finite number >= 0")
        flag(~np.isfinite(mean), "mean", "must be a finite number")
        flag(~np.all(np.isfinite(sums), axis=1), "central_sums", "every central sum must be a finite number")
        empty = count == 0.0
        flag(empty & (mean != 0.0), "mean", "an empty state (count 0) has mean 0", final=False)
        flag(empty & np.any(sums != 0.0, axis=1), "central_sums", "an empty state (count 0) has every central sum 0",
             final=False)
        for field, values, absent in (("minimum", minimum, no_minimum), ("maximum", maximum, no_maximum)):
            flag(empty & ~absent & (values != 0.0), field, "an empty state (count 0) has no extremes: null",
                 final=False)
        settled |= empty
        flag(~np.isfinite(minimum), "minimum", "a non-empty state needs finite extremes")
        flag(~np.isfinite(maximum), "maximum", "a non-empty state needs finite extremes")
        flag(minimum > maximum, "maximum", "is below minimum")
        slack = _CONSISTENCY_TOLERANCE * np.maximum(np.abs(minimum), np.abs(maximum))
        flag(~((minimum - slack <= mean) & (mean <= maximum + slack)), "mean", "lies outside [minimum, maximum]")
        flag(np.any(sums[:, 0::2] < 0.0, axis=1), "central_sums",
             "central sums of even order (M2, M4, ...) cannot be negative")
        # |Mj| <= count * r**j with r the range (plus slack), compared in units of 2**e >= r so
        # neither side overflows.
        radius = np.nan_to_num(0.5 * maximum - 0.5 * minimum + slack)
        unit, exponent = np.frexp(radius)
        orders = np.arange(2, width + 2)
        scaled = np.abs(np.ldexp(sums, -(exponent[:, None] + 1) * orders[None, :]))
        bound = count[:, None] * unit[:, None] ** orders[None, :] * (1.0 + 1e-9)
        too_large = scaled > bound
        flag(np.any(too_large, axis=1), "central_sums",
             lambda i: f"M{int(np.flatnonzero(too_large[i])[0]) + 2} is larger than values between minimum and "
             "maximum allow")
    if problems:
        found = [location for i in sorted(problems) for location in problems[i]]
        first = found[0]
        raise UncomputableInput(
            detail=f"{len(found)} inconsistent partial state field(s); first {first.path}: {first.message}",
            locations=found[:10],
        )


# --- descriptors of a merged state ---------------------------------------------------------


def _as_central_sums(state: PartialState) -> CentralSums:
    """The state in the scaled form of ``moments.CentralSums`` (exact power-of-two scaling).

    Values are scaled by ``2**pre`` to below 1 in magnitude and the deviations by ``2**post`` to
    below 1, as the two-pass path of ``central_sums`` does, so every ratio describe takes is in range.
    """
    assert state.minimum is not None and state.maximum is not None
    pre = -math.frexp(max(abs(state.minimum), abs(state.maximum)))[1]
    shift = math.ldexp(state.mean, pre)
    largest = max(math.ldexp(state.maximum, pre) - shift, shift - math.ldexp(state.minimum, pre))
    post = -math.frexp(largest)[1] if largest > 0.0 else 0
    sums = np.zeros(state.order + 1)
    sums[0] = state.count
    with np.errstate(under="ignore"):
        sums[2:] = np.ldexp(np.asarray(state.central_sums), (pre + post) * np.arange(2, state.order + 1))
    return CentralSums(mean=state.mean, sums=sums, pre_exponent=pre, shift=shift, post_exponent=post, centre=0.0)


def describe_state(
    state: PartialState,
    options: DescribeOptions,
    quantiles_from: SketchUnion | None = None,
    *,
    kind: str = "states",
) -> Description:
    """The descriptors of the data behind a (merged) partial state.

    From the state: mean, variance, standard deviation, coefficient of variation, skewness and
    kurtosis in the requested conventions with their normal-theory standard errors, moments up to
    the state's order, every Joanes & Gill family, the normality tests (whole counts), minimum,
    maximum and range, by the same code as ``describe``. Everything that needs the values is
    ``None`` with the warning ``not_available_from_states``; with ``quantiles_from`` (the union of
    KLL sketches of the same data) the quantiles, median, IQR, quartile skewness, octile kurtosis
    and mean-median gap are given as approximations, warning ``approximate_quantiles`` with the
    rank error. Moments above the state's order are ``None`` (``beyond_state_order``).

    Degenerate states follow ``describe``: a count of at most 1 has no spread
    (``single_observation``), zero ``M2`` is constant data (``constant_data``).

    The state is trusted: pass callers' states through ``merge_states`` (which checks them),
    even a single one.

    Raises
    ------
    UncomputableInput
        An empty state; ``options.interval`` or ``options.quantile_type`` (resampling and
        quantile rules need the values); sketches of other data (not ``count`` values, or other
        extremes than the state's).
    """
    if state.count == 0.0:
        raise _reject("states", "every state is empty (count 0), so there is nothing to describe")
    if options.interval is not None:
        raise _reject(
            "options.interval",
            "bootstrap intervals resample the values; partial states carry only counts, moments and extremes",
        )
    if options.quantile_type is not None:
        raise _reject(
            "options.quantile_type",
            "quantile rules need the values; from states, quantiles come only from sketches, by their own rule",
        )
    count = state.count
    integer = count == math.floor(count) and count < 2.0**53
    basis = _basis_of(
        WeightMeaning.FREQUENCY,
        total=count,
        effective=count,
        entries=0,
        integer=integer,
        binned=False,
        options=options,
    )
    notes = _Notes()
    sums = _as_central_sums(state)
    constant = sums.scaled_central_moment(2) == 0.0
    _note_degenerate(basis, constant, notes)

    sketch = quantiles_from
    if sketch is not None:
        _check_sketches_match(sketch, state)
    if sketch is None:
        quantile_rule = median_rule = "not available: partial states carry no order statistics"
    else:
        quantile_rule = (
            f"approximate: smallest retained item whose rank reaches p in the union of {sketch.sketches} KLL "
            f"sketch(es) (Karnin, Lang & Liberty 2016; Apache DataSketches, inclusive rank), normalized rank "
            f"error {sketch.normalized_rank_error:.3g}"
        )
        median_rule = "approximate: the 0.5 quantile of the KLL sketches"

    descriptors: dict[str, Descriptor] = {}
    _moment_descriptors(
        descriptors,
        sums,
        basis,
        constant,
        notes,
        mean_label="arithmetic mean, merged from partial states (Chan, Golub & LeVeque 1979)",
        lowest=state.minimum,
    )
    descriptors["minimum"] = Descriptor(state.minimum, "smallest value")
    descriptors["maximum"] = Descriptor(state.maximum, "largest value")
    spread_range = None if basis.single else notes.finite(state.maximum - state.minimum, "range")
    descriptors["range"] = Descriptor(spread_range, "maximum - minimum")

    probabilities = np.array(options.probabilities, dtype=np.float64)
    undefined = "single" if basis.single else "constant" if constant else None
    if sketch is None:
        requested = np.full(probabilities.size, np.nan)
        for name, label in _QUANTILE_LABELS.items():
            descriptors[name] = Descriptor(None, median_rule if name == "median" else label)
    else:
        robust_probabilities = _ROBUST_PROBABILITIES
        found = _sketch_quantiles(
            sketch, state, np.concatenate(([0.5, 0.25, 0.75], robust_probabilities, probabilities))
        )
        median, quartiles = float(found[0]), found[1:3]
        robust_values, requested = found[3 : 3 + robust_probabilities.size], found[3 + robust_probabilities.size :]
        descriptors["median"] = Descriptor(median, median_rule)
        iqr = None if basis.single else notes.finite(float(quartiles[1] - quartiles[0]), "interquartile_range")
        descriptors["interquartile_range"] = Descriptor(iqr, "Q(0.75) - Q(0.25), approximate quantiles (KLL sketches)")
        _quantile_shape(descriptors, robust_values, "approximate quantiles (KLL sketches)", undefined, notes)
        _mean_median_gap(descriptors)
        notes.add(
            "approximate_quantiles",
            f"the median and quantiles (and the IQR, quartile skewness, octile kurtosis and mean-median gap built "
            f"on them) come from KLL sketches of {sketch.n} values: each is a value whose true rank is within "
            f"{sketch.normalized_rank_error:.3g} x n of the requested p x n (the library's 99% bound for k = "
            f"{sketch.k}), not the exact order statistic"
            + ("; float sketches hold values rounded to float32" if "float" in sketch.item_types else ""),
            ["quantiles", *_FROM_QUANTILES],
        )
        _note_asymmetry(descriptors, found[:3][[1, 0, 2]], basis, notes)
    descriptors["median_absolute_deviation"] = Descriptor(None, "median of |x - median|")
    descriptors["median_absolute_deviation_normal"] = Descriptor(
        None, f"{NORMAL_MAD_FACTOR} x median of |x - median| (consistent for the normal sigma)"
    )
    descriptors["medcouple"] = Descriptor(None, "median of h(x_i, x_j) over x_i <= median <= x_j (Brys et al. 2004)")
    descriptors["half_sample_mode"] = Descriptor(None, "half-sample mode (Bickel & Fruhwirth 2006)")
    for name in ("l_location", "l_scale", "l_skewness", "l_kurtosis"):
        descriptors[name] = Descriptor(None, "L-moments (Hosking 1990)")
    descriptors["lag1_autocorrelation"] = Descriptor(
        None, "r(1) = sum (x_i - mean)(x_i+1 - mean) / sum (x_i - mean)^2"
    )
    missing = _NEEDS_VALUES + (("quantiles",) + _FROM_QUANTILES if sketch is None else ())
    notes.add(
        "not_available_from_states",
        "partial states carry only counts, moments and extremes; these descriptors need the values themselves"
        + (" (send KLL sketches of the same data for approximate quantiles)" if sketch is None else ""),
        [*missing, "modes", "tail_contributions"],
    )
    # Keep the descriptor order of describe's responses.
    descriptors = {name: descriptors[name] for name in SCALAR_DESCRIPTORS}

    top = min(options.moment_order, state.order)
    moments = _moments(sums, top, basis.single, constant, notes)
    if options.moment_order > state.order:
        extra = options.moment_order - state.order
        moments.order = options.moment_order
        for column in (moments.raw, moments.central, moments.standardized):
            column.extend([None] * extra)
        notes.add(
            "beyond_state_order",
            f"the states carry central sums up to order {state.order} (the lowest order among them); "
            f"moments of order {state.order + 1} to {options.moment_order} are unknown",
            ["moments"],
        )
    reason = None if integer else "the tests need observations with whole counts"
    _explain_remaining_nulls(descriptors, notes)
    return Description(
        kind=kind,
        size=Size(
            n=int(count) if integer else count,
            total_weight=count,
            omitted=0,
            distinct_values=None,
            zero_weight=0,
            effective_n=None,
        ),
        descriptors=descriptors,
        moments=moments,
        quantiles=[
            Quantile(probability=float(p), value=_finite_or_none(float(v)))
            for p, v in zip(probabilities, requested)
        ],
        modes=None,
        shape_estimators=_shape_estimators(sums, basis, constant),
        tail_contributions=None,
        grouping=None,
        normality=_normality_tests(reason, sums, basis, constant, count, notes),
        conventions=Conventions(
            convention="population" if basis.population else "sample",
            variance_divisor=basis.divisor_label,
            skewness=basis.skewness_family,
            kurtosis=basis.kurtosis_family,
            quantile_type=None,
            quantile_definition=quantile_rule,
            median=median_rule,
            central_moments="plug-in: sum of w (x - mean)^k divided by the total weight; merged exactly from "
            "partial states (Pébay 2008)",
            normal_mad_factor=NORMAL_MAD_FACTOR,
            weights=WeightMeaning.FREQUENCY.value,
        ),
        warnings=notes.items,
        sketches=None
        if sketch is None
        else QuantileSketches(
            method="union of KLL sketches (Karnin, Lang & Liberty 2016; Apache DataSketches)",
            sketches=sketch.sketches,
            n=sketch.n,
            k=sketch.k,
            retained=sketch.retained,
            normalized_rank_error=sketch.normalized_rank_error,
            item_types=list(sketch.item_types),
        ),
    )


def _check_sketches_match(sketch: SketchUnion, state: PartialState) -> None:
    """The sketches must hold the states' values: the same count and the same extremes."""
    if sketch.n != state.count:
        raise _reject(
            "sketches",
            f"the sketches summarise {sketch.n} values but the states count {state.count:g}; "
            "send sketches of the same data",
        )
    for name, ours, theirs in (("minimum", state.minimum, sketch.minimum), ("maximum", state.maximum, sketch.maximum)):
        # A float sketch holds its extreme rounded to float32.
        with np.errstate(over="ignore"):
            rounded = float(np.float32(ours))
        if theirs not in (ours, rounded):
            raise _reject(
                "sketches",
                f"the sketches' {name} {theirs!r} differs from the states' {ours!r}; send sketches of the same data",
            )


def _sketch_quantiles(sketch: SketchUnion, state: PartialState, probabilities: np.ndarray) -> np.ndarray:
    """Quantiles from the sketches; p = 0 and 1 are the state's exact extremes."""
    values = sketch.quantiles(probabilities)
    values[probabilities == 0.0] = state.minimum
    values[probabilities == 1.0] = state.maximum
    return values


__all__ = [
    "MAX_ORDER",
    "MIN_ORDER",
    "PartialState",
    "check_states",
    "describe_state",
    "merge",
    "merge_states",
    "partial_state",
    "state_of",
]
