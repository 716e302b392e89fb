"""Every rule a partial-state input must meet, checked before anything is merged or described:
the values and weights a state is made of, the samples a state may be asked of, callers' states
(consistency), and a request describing merged states (options and sketches)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from tailgauge.core.describe import DescribeOptions
from tailgauge.core.errors import Location, UncomputableInput
from tailgauge.core.partial.state import MAX_ORDER, MIN_ORDER, PartialState
from tailgauge.core.weighted import WeightedData, WeightMeaning

if TYPE_CHECKING:
    from tailgauge.core.sketches import SketchUnion


# Rounding allowed when checking a caller's state for consistency: the mean may lie this far
# (relative to the magnitude of the extremes) outside [minimum, maximum], and the deviations
# bounding the central sums may exceed the range by as much.
CONSISTENCY_TOLERANCE = 2.0**-30


def first_positions(mask: np.ndarray, path: str, message: str) -> list[Location]:
    return [Location(f"{path}[{i}]", message) for i in np.flatnonzero(mask)[:10]]


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
        slack = CONSISTENCY_TOLERANCE * np.maximum(np.abs(minimum), np.abs(maximum))
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


def _check_sketches_match(sketch: SketchUnion, state: PartialState) -> None:
    """The sketches must hold the states' values: the same count and the same extremes."""
    if sketch.n != state.count:
        raise UncomputableInput.at(
            "sketches",
            f"the sketches summarise {sketch.n} values but the states count {state.count:g}; "
            "send sketches of the same data",
        )
    for name, ours, theirs in (("minimum", state.minimum, sketch.minimum), ("maximum", state.maximum, sketch.maximum)):
        # A float sketch holds its extreme rounded to float32.
        with np.errstate(over="ignore"):
            rounded = float(np.float32(ours))
        if theirs not in (ours, rounded):
            raise UncomputableInput.at(
                "sketches",
                f"the sketches' {name} {theirs!r} differs from the states' {ours!r}; send sketches of the same data",
            )


def checked_values(values, weights) -> tuple[np.ndarray, np.ndarray | None]:
    """``values`` and optional frequency ``weights`` as float64 arrays, entries of weight zero left
    out; raises :class:`UncomputableInput` for non-finite values or weights, negative weights or
    mismatched lengths (located at ``values[i]``, ``weights[i]``)."""
    array = np.ascontiguousarray(values, dtype=np.float64).ravel()
    bad = ~np.isfinite(array)
    if bad.any():
        raise UncomputableInput(
            detail=f"{int(bad.sum())} value(s) are missing (NaN) or infinite; drop them before computing a state",
            locations=first_positions(bad, "values", "not a finite number"),
        )
    weight_array = None
    if weights is not None:
        weight_array = np.ascontiguousarray(weights, dtype=np.float64).ravel()
        if weight_array.size != array.size:
            raise UncomputableInput.at("weights", f"has {weight_array.size} entries for {array.size} values; give one weight per value")
        bad = ~(np.isfinite(weight_array) & (weight_array >= 0.0))
        if bad.any():
            raise UncomputableInput(
                detail=f"{int(bad.sum())} weight(s) are negative or not finite",
                locations=first_positions(bad, "weights", "frequency weights are finite and >= 0"),
            )
        positive = weight_array > 0.0
        if not positive.all():
            array, weight_array = array[positive], weight_array[positive]
    return array, weight_array


def check_state_source(data: WeightedData) -> None:
    """A state is of a sample with a count of observations: not of reliability weights (no
    count), a probability table or bins (no values). Located at ``options.partial_state``."""
    path = "options.partial_state"
    if data.binned:
        raise UncomputableInput.at(path, "binned counts have no values to summarise; partial states are for samples")
    if data.meaning is WeightMeaning.RELIABILITY:
        raise UncomputableInput.at(
            path,
            "reliability weights carry no count of observations, so their states cannot be merged; "
            "use frequency weights or none",
        )
    if data.meaning is WeightMeaning.PROBABILITY:
        raise UncomputableInput.at(path, "a probability table is a whole distribution, not a part of a sample")


def check_state_request(state: PartialState, options: DescribeOptions, sketches: SketchUnion | None) -> None:
    """What describing a merged state needs: a non-empty state, no option that needs the values
    (intervals, a quantile rule, thresholds, tail levels), and sketches of the same data when sketches are sent."""
    if state.count == 0.0:
        raise UncomputableInput.at("states", "every state is empty (count 0), so there is nothing to describe")
    if options.interval is not None:
        raise UncomputableInput.at(
            "options.interval",
            "bootstrap intervals resample the values; partial states carry only counts, moments and extremes",
        )
    if options.quantile_type is not None:
        raise UncomputableInput.at(
            "options.quantile_type",
            "quantile rules need the values; from states, quantiles come only from sketches, by their own rule",
        )
    for path, asked in (("options.thresholds", options.thresholds), ("options.tail_levels", options.tail_levels)):
        if asked:
            raise UncomputableInput.at(
                path,
                "exceedances and tail means need the values (or their order); partial states carry only counts, "
                "moments and extremes: send the values, or a table or bins of them, to a descriptor endpoint",
            )
    if sketches is not None:
        _check_sketches_match(sketches, state)
