"""Merging partial states exactly: Pébay's pairwise update, vectorised over many pairs, and the
tree reduction of a list of states."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tailgauge.core.errors import UncomputableInput
from tailgauge.core.partial.state import PartialState
from tailgauge.core.partial.validation import check_states


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
        raise UncomputableInput.at(path, f"the central sum of order {j} of the union is outside float64's range")
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
        raise UncomputableInput.at(path, "give at least one partial state")
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
