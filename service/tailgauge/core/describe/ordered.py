"""Ordered samples: what describing a series in the order sent adds (options.order = as_sent),
and the warning that intervals assume independence when an unordered request's data are not.

* ``serial_of``: every autocovariance (one FFT), the effective n (Geyer 1992, initial positive
  sequence) and the automatic block lengths (Politis & White 2004, corrected by Patton, Politis
  & White 2009);
* ``blocks_of``: how the engine resamples the series (``resample.Blocks``);
* ``effective_mean_interval``: the classical interval of the mean with the effective n;
* ``note_serial_dependence``: without as_sent, ``serial_dependence`` when intervals were asked
  for and the lag-1 autocorrelation is significant at the 1 % level (standard error 1/sqrt(n)
  under independence: Box & Jenkins; Bartlett 1946).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from tailgauge.core import serial
from tailgauge.core.classical import ClassicalInterval
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.results import Descriptor, Quantile
from tailgauge.core.describe.warnings import Warnings
from tailgauge.core.moments import CentralSums
from tailgauge.core.registry import WarningCode
from tailgauge.core.resample import Blocks
from tailgauge.core.weighted import WeightedData

# Two-sided level of the lag-1 test behind serial_dependence.
SERIAL_TEST_LEVEL = 0.01
EFFECTIVE_MEAN_METHOD = "student_t_effective_n"
# Classical intervals other than the mean's assume independent observations: not given for
# ordered samples.
INDEPENDENT_CLASSICAL = ("variance", "standard_deviation", "median")


@dataclass(frozen=True, eq=False)
class Serial:
    """The serial structure of an ordered sample."""

    covariances: np.ndarray  # scaled autocovariances, lags 0 .. n - 1
    effective_n: float | None
    lengths: serial.BlockLengths


def serial_of(data: WeightedData, sums: CentralSums) -> Serial:
    covariances = serial.autocovariances(data.values, sums)
    return Serial(covariances, serial.effective_size(covariances), serial.optimal_block_lengths(covariances))


def blocks_of(data: WeightedData, options: DescribeOptions, structure: Serial) -> tuple[Blocks, str]:
    """The engine's blocks, and how their length was chosen ("politis_white" or "given")."""
    scheme = options.block_scheme or "stationary"
    if options.block_length is not None:
        length, chosen = float(options.block_length), "given"
    else:
        automatic = structure.lengths.stationary if scheme == "stationary" else structure.lengths.circular
        length, chosen = automatic, "politis_white"
        if scheme != "stationary":
            length = float(min(max(round(automatic), 1), data.count))
    support = data.support.values
    rows = np.searchsorted(support, data.values).astype(np.int64)
    return Blocks(scheme, length, rows, int(support.size)), chosen


def effective_mean_interval(mean: float, sd: float, effective_n: float, level: float) -> ClassicalInterval | None:
    """``mean +- t_{n_eff - 1} s / sqrt(n_eff)``: Student's t with the effective n in place of n
    (``None`` when n_eff <= 1 leaves no degrees of freedom, or the bounds are not finite)."""
    if not effective_n > 1.0:
        return None
    with np.errstate(all="ignore"):
        half = float(stats.t.ppf(0.5 + level / 2.0, effective_n - 1.0)) * sd / math.sqrt(effective_n)
    low, high = mean - half, mean + half
    if not (math.isfinite(low) and math.isfinite(high)):
        return None
    return ClassicalInterval(
        low,
        high,
        level,
        EFFECTIVE_MEAN_METHOD,
        None,
        f"a stationary series whose mean is near normal: n replaced by the effective n = {effective_n:.6g} "
        "from the autocorrelations (Geyer 1992, initial positive sequence)",
    )


def lag1_threshold(n: float) -> float:
    """|r1| beyond this is significant at SERIAL_TEST_LEVEL (two-sided), standard error 1/sqrt(n)."""
    return float(special.ndtri(1.0 - SERIAL_TEST_LEVEL / 2.0)) / math.sqrt(n)


def note_serial_dependence(
    data: WeightedData,
    sums: CentralSums | None,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    notes: Warnings,
) -> None:
    """``serial_dependence`` naming the intervals given, when the lag-1 autocorrelation of an
    unweighted sample in the order sent is significant at the 1 % level."""
    n = data.count
    if not data.ordered or data.weights is not None or sums is None or n < 3:
        return
    computed = descriptors.get("lag1_autocorrelation")
    r1 = computed.value if computed is not None and computed.value is not None else None
    if r1 is None:
        value = serial.lag1_autocorrelation(data.values, sums)
        r1 = value if math.isfinite(value) else None
    if r1 is None or abs(r1) <= lag1_threshold(n):
        return
    named = [
        name for name, d in descriptors.items() if d.interval is not None or d.classical_interval is not None
    ]
    if any(q.interval is not None or q.classical_interval is not None for q in quantiles):
        named.append("quantiles")
    if not named:
        return
    notes.add(
        WarningCode.SERIAL_DEPENDENCE,
        f"the lag-1 autocorrelation of the values in the order sent is {r1:.3g}, beyond "
        f"+-{lag1_threshold(n):.3g} (significant at the 1 % level, standard error 1/sqrt(n) under "
        "independence): these intervals assume independent observations and are likely too narrow "
        '(a samples request with options.order "as_sent" resamples blocks of the series instead)',
        named,
    )


def note_independent_classical(descriptors: dict[str, Descriptor], quantiles: list[Quantile], notes: Warnings) -> None:
    """For an ordered sample: the classical intervals that assume independence are not given."""
    named = [name for name in INDEPENDENT_CLASSICAL if descriptors[name].value is not None]
    if any(q.value is not None for q in quantiles):
        named.append("quantiles")
    if named:
        notes.add(
            WarningCode.SERIAL_DEPENDENCE,
            "the chi-square and order-statistic classical intervals assume independent observations: "
            "not given for a series in the order sent (options.order as_sent); the bootstrap intervals "
            "resample blocks, and the mean's classical interval uses the effective n",
            named,
        )
