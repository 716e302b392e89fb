"""The tail statistics of many rows: trimmed and winsorized means, geometric and harmonic means,
Hill's index and the tail means, by the rules ``describe`` uses for one row
(:mod:`tailgauge.core.quantile_integrals`, :mod:`tailgauge.core.location_means`).

Each costs at most one prefix sum over the support per row (taken a part of rows at a time,
``quantile_integrals.PART_BYTES``), or one matrix-vector product for the geometric and
harmonic means.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from tailgauge.core import location_means
from tailgauge.core import quantile_integrals as qi
from tailgauge.core.resample.draws import Plan

TRIMMED = ("trimmed_mean", "winsorized_mean")
# Keys of the tail means (as describe.tails names them): level i's upper and lower tail.
UPPER, LOWER = "tail_mean_upper:", "tail_mean_lower:"


@dataclass(frozen=True, eq=False)
class TailSpec:
    """What the tail statistics read: the tail levels, the trimmed share per end and Hill's k
    (``None`` when the index is not resampled)."""

    levels: np.ndarray = field(default_factory=lambda: np.empty(0))
    trim_proportion: float = 0.1
    tail_count: int | None = None


class TailColumns:
    """The columns one plan's tail statistics read, built once per plan: scaled deviations (and
    scaled edges for bins), ln x and 1 / x."""

    def __init__(self, plan: Plan) -> None:
        edges = None
        open_ends = (False, False)
        if plan.edges is not None:
            with np.errstate(over="ignore", invalid="ignore"):
                edges = plan.sums.scaled_deviations(plan.edges)
            open_ends = (bool(np.isinf(plan.edges[0])), bool(np.isinf(plan.edges[-1])))
        self.grid = qi.Grid(plan.powers[:, 1], edges, open_ends)
        self.grid.sums_column = 1  # view.sums[:, 1] = sum w d, d the scaled deviations
        positive = plan.values > 0.0
        self.logs = np.log(np.where(positive, plan.values, 1.0))
        self.log_grid = qi.Grid(self.logs)
        with np.errstate(divide="ignore", over="ignore"):
            self.reciprocals = np.where(positive, 1.0 / np.where(positive, plan.values, 1.0), np.nan)


def evaluate(plan: Plan, spec: TailSpec, columns: TailColumns, view, names: tuple[str, ...], out: dict) -> None:
    """Add the tail statistics among ``names`` of each row of ``view`` to ``out``. The trimming
    window and the tails are integrated together: one prefix sum over the support per row."""
    exponent = plan.sums.scale_exponent
    mean = plan.sums.mean
    trimming = any(name in names for name in TRIMMED)
    tails = bool(spec.levels.size) and any(name.startswith((UPPER, LOWER)) for name in names)
    with np.errstate(all="ignore"):
        lows, highs = [], []
        if trimming:
            low, high = qi.trim_window(view, spec.trim_proportion, plan.integer)
            lows.append(low)
            highs.append(high)
        if tails:
            tail_low, tail_high = qi.tail_windows(view, spec.levels)
            lows.append(tail_low)
            highs.append(tail_high)
        if lows:
            sums = qi.difference(view, columns.grid, np.concatenate(lows, axis=1), np.concatenate(highs, axis=1))
        if trimming:
            trimmed, winsorized = qi.trimmed_from(view, columns.grid, sums[:, :1], low, high)
            out["trimmed_mean"] = mean + np.ldexp(trimmed, exponent)
            out["winsorized_mean"] = mean + np.ldexp(winsorized, exponent)
        if tails:
            means = qi.means_from(view, columns.grid, sums[:, 1:] if trimming else sums, tail_low, tail_high)
            for i in range(spec.levels.size):
                out[f"{UPPER}{i}"] = mean + np.ldexp(means[:, i], exponent)
                out[f"{LOWER}{i}"] = mean + np.ldexp(means[:, spec.levels.size + i], exponent)
        if "geometric_mean" in names:
            out["geometric_mean"] = location_means.geometric_rows(view, columns.logs)
        if "harmonic_mean" in names:
            out["harmonic_mean"] = location_means.harmonic_rows(view, columns.reciprocals)
        if "upper_tail_index" in names and spec.tail_count is not None:
            out["upper_tail_index"] = qi.hill(view, plan.values, columns.log_grid, spec.tail_count)
