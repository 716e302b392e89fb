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
    or when there are more than ``limit`` values.
    """
    m2 = sums.scaled_central_moment(2)
    total = float(np.sum(weights))
    share = weights / total  # proportions first: huge counts cannot overflow the products
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
