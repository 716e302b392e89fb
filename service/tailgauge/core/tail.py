"""Which outcomes drive skewness and kurtosis: each support value's share of the standardized moments.

For support values ``x_i`` with weights ``w_i`` (total ``W``), plug-in standard deviation
``sigma`` and mean ``mu``, the contributions

    third_i  = w_i (x_i - mu)^3 / (W sigma^3)      (signed)
    fourth_i = w_i (x_i - mu)^4 / (W sigma^4)      (non-negative)

sum exactly to the plug-in standardized third moment ``g1`` and fourth moment ``b2 = g2 + 3``.
A value far out in a tail has a large ``fourth``; the sign of ``third`` says which tail.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from tailgauge.core.moments import CentralSums


@dataclass(frozen=True)
class Contributions:
    values: np.ndarray
    weights: np.ndarray
    third: np.ndarray
    fourth: np.ndarray
    complete: bool  # False when only the largest contributors are listed


def contributions(
    values: np.ndarray, weights: np.ndarray, sums: CentralSums, *, limit: int, largest_only: bool
) -> Contributions:
    """Contributions of each support value, all of them in value order or the ``limit`` largest.

    The largest by ``fourth`` (the tail weight) are kept, in value order, when ``largest_only``
    or when there are more than ``limit`` values. ``values`` are ascending (a support), so the
    largest lie in the two tails: with many values only the tails that can hold them are
    computed (:func:`_tails`), by the same arithmetic.
    """
    m2 = sums.scaled_central_moment(2)
    total = float(np.sum(weights))
    share = weights / total  # proportions first: huge counts cannot overflow the products
    if values.size > max(_TAILS_FROM * limit, _TAILS_AT_LEAST):
        found = _tails(values, share, weights, sums, m2, limit)
        if found is not None:
            return found
    third, fourth = _shares(values, share, sums, m2)
    if largest_only or values.size > limit:
        if values.size > limit:
            # Select the largest by the tail weight in linear time; only those few are ordered.
            chosen = np.argpartition(-fourth, limit - 1)[:limit]
        else:
            chosen = np.arange(values.size)
        mask = np.zeros(values.size, dtype=bool)
        mask[chosen] = True
        keep = np.flatnonzero(mask)  # back into value order, without sorting anything
        return Contributions(values[keep], weights[keep], third[keep], fourth[keep], complete=keep.size == values.size)
    return Contributions(values, weights, third, fourth, complete=True)


# Above this many times ``limit`` values (and at least _TAILS_AT_LEAST), only the tails are
# computed; below, computing every value costs less than finding the tails.
_TAILS_FROM = 8
_TAILS_AT_LEAST = 4096


def _shares(values: np.ndarray, share: np.ndarray, sums: CentralSums, m2: float) -> tuple[np.ndarray, np.ndarray]:
    """(third, fourth) of each value with its share of the weight."""
    with np.errstate(over="ignore", invalid="ignore"):
        # An outlier whose share underflows can lie beyond float64 standard deviations out:
        # its contributions are then infinite, which describe reports as not representable.
        standardized = sums.scaled_deviations(values) / np.sqrt(m2)
        squared = standardized * standardized
        third = share * squared * standardized
        fourth = share * squared * squared
        far = ~(np.isfinite(third) & np.isfinite(fourth))
        if far.any():
            # A tiny share far out (2.5e-318 of the weight at 1e159 sd) overflows z^3 although
            # share z^3 is representable: take the roots of the share first. What is still
            # infinite is beyond float64, and describe reports it as not representable.
            third[far] = (np.cbrt(share[far]) * standardized[far]) ** 3
            fourth[far] = (np.sqrt(np.sqrt(share[far])) * standardized[far]) ** 4
    return third, fourth


def _tails(
    values: np.ndarray, share: np.ndarray, weights: np.ndarray, sums: CentralSums, m2: float, limit: int
) -> Contributions | None:
    """The ``limit`` largest contributions of ascending ``values``, computing only the tails.

    The ``limit`` values at each end give a threshold ``T``, the ``limit``-th largest ``fourth``
    among them; a value with ``|z| < r``, ``r^4 = T / max(share)``, has ``fourth < T`` and cannot
    be among the largest. The standardized values are ascending, so ``|z| >= r`` is two runs at
    the ends, found by binary search; only those are computed and selected from. ``None`` (the
    caller computes every value) where ``T`` is zero or not finite.
    """
    n = values.size
    ends = np.concatenate((np.arange(limit), np.arange(n - limit, n)))
    _, end_fourth = _shares(values[ends], share[ends], sums, m2)
    threshold = float(np.partition(end_fourth, end_fourth.size - limit)[end_fourth.size - limit])
    largest_share = float(np.max(share))
    if not (np.isfinite(threshold) and threshold > 0.0 and largest_share > 0.0):
        return None
    # A relative slack of 1e-9 covers the rounding of share z^4 against r^4.
    reach = (threshold / largest_share) ** 0.25 * (1.0 - 1e-9)
    with np.errstate(over="ignore", invalid="ignore"):
        standardized = sums.scaled_deviations(values) / np.sqrt(m2)
    low = int(np.searchsorted(standardized, -reach, side="right"))
    high = int(np.searchsorted(standardized, reach, side="left"))
    region = np.concatenate((np.arange(low), np.arange(high, n))) if high > low else np.arange(n)
    third, fourth = _shares(values[region], share[region], sums, m2)
    chosen = np.argpartition(-fourth, limit - 1)[:limit]
    mask = np.zeros(region.size, dtype=bool)
    mask[chosen] = True
    keep = np.flatnonzero(mask)  # region is ascending: value order again
    where = region[keep]
    return Contributions(values[where], weights[where], third[keep], fourth[keep], complete=False)
