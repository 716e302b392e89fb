"""What to describe and by which convention: the options every descriptor request carries."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

from tailgauge.core import resample
from tailgauge.core.selection import EVERYTHING, Selection

Convention = Literal["sample", "population"]
# Joanes & Gill (1998) families of the skewness and (excess) kurtosis estimators.
SkewnessEstimator = Literal["g1", "G1", "b1"]
KurtosisEstimator = Literal["g2", "G2", "b2"]
# Hyndman & Fan (1996) sample quantile types.
QuantileType = Literal[1, 2, 3, 4, 5, 6, 7, 8, 9]
# Whether the order of the values carries information: exchangeable (resample single values) or
# as_sent (a series in observation order: resample blocks; effective n from the autocorrelation).
Order = Literal["exchangeable", "as_sent"]
BlockScheme = Literal["stationary", "circular", "moving"]

DEFAULT_PROBABILITIES = (0.01, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.99)


@dataclass(frozen=True)
class DescribeOptions:
    """What to compute and by which convention (typed by the caller's schema).

    ``None`` means "the default for these data": the sample convention except for a
    probability table (population); quantile type 7 for whole counts, type 2 for other
    weights, type 1 (the distribution function's inverse) for probabilities. The rules that
    tie options to the data are checked in :mod:`tailgauge.core.describe.validation`.
    """

    convention: Convention | None = None
    skewness_estimator: SkewnessEstimator | None = None
    kurtosis_estimator: KurtosisEstimator | None = None
    probabilities: tuple[float, ...] = DEFAULT_PROBABILITIES
    quantile_type: QuantileType | None = None
    moment_order: int = 4
    modes_limit: int = 100
    sheppard_correction: bool = False
    contributions_limit: int = 1000
    interval: resample.IntervalOptions | None = None
    order: Order = "exchangeable"
    # With order as_sent: the block scheme (None: stationary) and the (expected) block length
    # (None: chosen by Politis & White 2004); checked in validation.
    block_scheme: BlockScheme | None = None
    block_length: float | None = None
    max_resample_work: float = 1e9
    deadline: float | None = None
    subset_rows: int = 100_000
    resample_threads: int = 2
    # Peak memory one request may plan (cost.admit); inf: no limit.
    max_memory_bytes: float = math.inf
    # Already admitted by the caller (a comparison admits both inputs together).
    admitted: bool = False
    # What the answer shows and what is computed for it (tailgauge.core.selection); None: everything.
    descriptors: Selection | None = None
    # Tails (core/tail_measures.py, core/location_means.py): thresholds of the exceedances, levels of
    # the tail means, the share trimmed from each end, and k of Hill's estimator (None: round(sqrt(n))).
    thresholds: tuple[float, ...] = ()
    tail_levels: tuple[float, ...] = ()
    trim_proportion: float = 0.1
    tail_count: int | None = None

    @property
    def selection(self) -> Selection:
        return EVERYTHING if self.descriptors is None else self.descriptors
