"""The partial state: count, mean, central sums and extremes of one part of the data.

State of order ``p`` (4 to 12): ``count`` (number of values, or their total frequency weight),
``mean``, ``central_sums = (M2, ..., Mp)`` with ``Mj = sum w (x - mean)**j``, and the exact
``minimum`` and ``maximum`` (``None`` for an empty state).
"""

from __future__ import annotations

from dataclasses import dataclass


MIN_ORDER = 4


MAX_ORDER = 12


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
        check_order(order)
        return cls(0.0, 0.0, (0.0,) * (order - 1), None, None)


def check_order(order: int) -> None:
    if not (isinstance(order, int) and MIN_ORDER <= order <= MAX_ORDER):
        raise ValueError(f"order must be an integer from {MIN_ORDER} to {MAX_ORDER}, not {order!r}")
