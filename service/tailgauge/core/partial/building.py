"""Making partial states: of raw values (for a Dask or Spark task) or of a sample already in the
internal form (``options.partial_state``)."""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.errors import UncomputableInput
from tailgauge.core.moments import central_sums, scale_by_power_of_two
from tailgauge.core.partial.state import MIN_ORDER, PartialState, check_order
from tailgauge.core.partial.validation import check_state_source, checked_values
from tailgauge.core.weighted import WeightedData


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
    check_order(order)
    array, weight_array = checked_values(values, weights)
    if array.size == 0:
        return PartialState.empty(order)
    return _state_of_arrays(array, weight_array, order, "values")


def state_of(data: WeightedData, order: int = MIN_ORDER) -> PartialState:
    """The partial state of a sample already in the internal form (unit or frequency weights).

    Reliability weights carry no count of observations, and a probability table or binned counts
    no values, so states of them would not merge into a meaningful union: rejected, located at
    ``options.partial_state``.
    """
    check_order(order)
    check_state_source(data)
    return _state_of_arrays(data.values, data.weights, order, "options.partial_state")


def _state_of_arrays(values: np.ndarray, weights: np.ndarray | None, order: int, path: str) -> PartialState:
    weight_exponent = 0
    if weights is not None:
        with np.errstate(over="ignore"):
            total = float(np.sum(weights))
        if not math.isfinite(total) or total <= 0.0:
            raise UncomputableInput.at(path, "the weights sum to zero or beyond float64's range")
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
            raise UncomputableInput.at(
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
