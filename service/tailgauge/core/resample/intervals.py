"""Interval methods over bootstrap replicates: percentile (Efron & Tibshirani 1993, eq. 13.5),
basic (Davison & Hinkley 1997, eq. 5.6) and BCa (eq. 14.10-14.15), with the acceleration from
the jackknife (eq. 14.15) of one or several independently resampled inputs; and the results a
bootstrap hands back.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from tailgauge.core.moments import scale_by_power_of_two
from tailgauge.core.registry import BOOTSTRAP_DESCRIPTORS

# Fewer observations than this make any bootstrap interval doubtful (common practice).
SMALL_SAMPLE = 20
# Fewer distinct values than this make the bootstrap distribution of order statistics lumpy.
FEW_DISTINCT = 20


@dataclass(frozen=True)
class IntervalOptions:
    method: str = "bca"
    level: float = 0.95
    resamples: int = 9999
    seed: int = 0


@dataclass(frozen=True)
class Interval:
    low: float | None
    high: float | None
    level: float
    method: str


@dataclass(frozen=True)
class BootstrapResult:
    """Interval and bootstrap standard error of one statistic (``None`` where undefined)."""

    interval: Interval | None
    standard_error: float | None
    reason: str | None = None  # why the interval is missing, or why the method fell back
    acceleration: float | None = None  # BCa's jackknife acceleration, when computed


def percentile(samples: np.ndarray, fractions: np.ndarray) -> np.ndarray:
    """``np.quantile(samples, fractions, method="linear")`` of a 1-d float array, bit for bit,
    without its general machinery (a bootstrap asks this of every statistic).

    The same arithmetic as numpy (2.x): virtual index ``(n - 1) f``, neighbours ``floor`` and
    ``floor + 1`` (the last value beyond the end, the first below the start, the last for a
    NaN fraction), ``gamma`` the index less the lower neighbour, and the two-sided lerp
    ``a + (b - a) t``, or ``b - (b - a)(1 - t)`` for ``t >= 0.5``, after numpy's partition at
    the same ranks. Tests compare it with ``np.quantile``.
    """
    values = np.asarray(samples, dtype=np.float64).ravel()
    fractions = np.asarray(fractions, dtype=np.float64)
    n = values.size
    virtual = (n - 1) * fractions
    previous = np.floor(virtual)
    following = previous + 1.0
    beyond = (virtual >= n - 1) | np.isnan(virtual)
    previous[beyond] = -1.0
    following[beyond] = -1.0
    before = virtual < 0
    previous[before] = 0.0
    following[before] = 0.0
    previous = previous.astype(np.intp)
    following = following.astype(np.intp)
    ordered = values.copy()
    # numpy's own list of ranks (first and last included): values equal as numbers (0.0 and
    # -0.0) then land where numpy's partition puts them.
    ordered.partition(np.unique(np.concatenate(([0, -1], previous, following))))
    low, high = ordered[previous], ordered[following]
    gamma = np.asarray(virtual - previous, dtype=np.float64)
    span = high - low
    result = low + span * gamma
    np.subtract(high, span * (1.0 - gamma), out=result, where=gamma >= 0.5)
    return result


def interval_from_replicates(
    estimate: float,
    replicates: np.ndarray,
    jackknives: list[tuple[np.ndarray, np.ndarray]] | None,
    options: IntervalOptions,
) -> BootstrapResult:
    """Interval and standard error of one statistic from its bootstrap replicates.

    ``jackknives`` (BCa only) holds, for each independently resampled input, the statistic's
    leave-one-out values over that input's support rows and how many observations each row
    stands for; with one input this is the ordinary jackknife of eq. 14.15, with two it is the
    two-sample acceleration (see :func:`acceleration`). ``None`` makes BCa fall back to the
    percentile interval, with the reason.
    """
    if not np.all(np.isfinite(replicates)):
        return BootstrapResult(None, None, "some resamples leave this descriptor undefined")
    # Work in units of a power of two near the largest magnitude: exact, and neither the
    # squared deviations of the standard error nor the cubes of the acceleration can overflow.
    largest = float(np.max(np.abs(replicates)))
    largest = max(largest, abs(estimate))
    exponent = math.frexp(largest)[1] if largest > 0.0 else 0
    scaled = np.ldexp(replicates, -exponent)
    scaled_estimate = math.ldexp(estimate, -exponent)
    scaled_jackknives = None
    if jackknives is not None:
        scaled_jackknives = [(np.ldexp(values, -exponent), weights) for values, weights in jackknives]
    alpha = 1.0 - options.level
    se = None
    if replicates.size > 1:
        se = scale_by_power_of_two(float(np.std(scaled, ddof=1)), exponent)
        se = None if math.isnan(se) else se
    tails = np.array([alpha / 2.0, 1.0 - alpha / 2.0])
    method, reason, accel = options.method, None, None
    if method == "bca":
        fractions, reason, accel = bca_fractions(scaled_estimate, scaled, scaled_jackknives, tails)
        if fractions is None:
            method = "percentile"
            fractions = tails
    else:
        fractions = tails
    low, high = percentile(scaled, fractions)
    if method == "basic":
        low, high = 2.0 * scaled_estimate - high, 2.0 * scaled_estimate - low
    low, high = scale_by_power_of_two(float(low), exponent), scale_by_power_of_two(float(high), exponent)
    if se is not None and not math.isfinite(se):
        se = None
    if not (math.isfinite(low) and math.isfinite(high)):
        return BootstrapResult(None, se, "the interval's bounds lie beyond float64's range", accel)
    return BootstrapResult(Interval(low, high, options.level, method), se, reason, accel)


def acceleration(jackknives: list[tuple[np.ndarray, np.ndarray]]) -> float | None:
    """BCa's acceleration from the jackknife of each independently resampled input.

    For input i with n_i observations and leave-one-out values theta_(ij) (row j counted
    ``weights[j]`` times), U_ij = (n_i - 1)(mean_j theta_(ij) - theta_(ij)) and

        a = sum_i sum_j U_ij^3 / n_i^3 / (6 [sum_i sum_j U_ij^2 / n_i^2]^(3/2)).

    With one input the factors (n - 1) / n cancel and this is Efron & Tibshirani (1993),
    eq. 14.15; with several it is the multi-sample form scipy.stats.bootstrap (1.17.1) uses,
    whose source cites the same book (sections 14.3 and 15.4). ``None`` when every left-out
    observation gives the same value (no acceleration can be estimated).
    """
    parts = []
    with np.errstate(all="ignore"):
        for values, weights in jackknives:
            n = float(np.sum(weights))
            centre = np.sum(weights * values) / n
            parts.append((weights, (n - 1.0) / n * (centre - values)))
    # a is scale-free (cubes over the 3/2 power of squares), so the influences are divided by
    # their largest magnitude first: cubes of influences near 1e300 cannot overflow.
    largest = max(float(np.max(np.abs(influence))) if influence.size else 0.0 for _, influence in parts)
    if largest == 0.0 or not math.isfinite(largest):
        return None
    numerator = denominator = 0.0
    with np.errstate(all="ignore"):
        for weights, influence in parts:
            scaled = influence / largest
            numerator += float(np.sum(weights * scaled**3))
            denominator += float(np.sum(weights * scaled**2))
    spread = denominator**1.5
    if spread == 0.0 or not math.isfinite(spread) or not math.isfinite(numerator):
        return None
    return numerator / (6.0 * spread)


def bca_fractions(estimate, replicates, jackknives, tails):
    """Adjusted tail fractions of BCa (Efron & Tibshirani 1993, eq. 14.10) and the acceleration,
    or None, why, None."""
    below = np.count_nonzero(replicates < estimate)
    equal = np.count_nonzero(replicates == estimate)
    if equal == replicates.size:
        return None, "every resample gives the estimate itself", None
    proportion = (below + 0.5 * equal) / replicates.size
    if not 0.0 < proportion < 1.0:
        return None, "the estimate lies outside the bootstrap distribution", None
    z0 = special.ndtri(proportion)
    if jackknives is None or not all(np.all(np.isfinite(values)) for values, _ in jackknives):
        return None, "the jackknife is undefined for some left-out observation", None
    accel = acceleration(jackknives)
    if accel is None:
        return None, "the jackknife shows no variation, so the acceleration is undefined", None
    # A level within rounding of 1 puts a tail at 0 or 1 (z infinite): the adjustment is then
    # undefined, which the check below reports, not a floating-point warning.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        z = special.ndtri(tails)
        adjusted = special.ndtr(z0 + (z0 + z) / (1.0 - accel * (z0 + z)))
    if not np.all(np.isfinite(adjusted)):
        return None, "the BCa adjustment is undefined for these data", accel
    return adjusted, None, accel


@dataclass(frozen=True, eq=False)
class Replicates:
    """Every statistic of every resample of one input, kept so two inputs can be contrasted.

    ``values[name]`` is a rounds x resamples array: one round for the ordinary bootstrap, one
    round per subset for the bag of little bootstraps (``subsets``). Names are those of
    ``Statistics.evaluate`` (``quantile:i`` for the i-th requested probability).
    ``jackknife[name]`` holds the leave-one-out value of each support row and
    ``jackknife_weights`` how many observations each row stands for (BCa only; else ``None``).
    """

    values: dict[str, np.ndarray]
    jackknife: dict[str, np.ndarray] | None
    jackknife_weights: np.ndarray | None
    subsets: bool
    # Statistics not resampled for this input, with the reason (e.g. too costly within the budget).
    left_out: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class BootstrapOutcome:
    results: dict[str, BootstrapResult]
    quantiles: list[BootstrapResult]
    resamples: int
    scheme: str
    notes: list[str]
    accelerations: dict[str, float]
    replicates: Replicates | None = None
    # Descriptors with an estimate that the engine left out for this request, and why.
    left_out: dict[str, str] = field(default_factory=dict)


# What the engine resamples: the registry's bootstrap descriptors (in response order).
INTERVAL_DESCRIPTORS = BOOTSTRAP_DESCRIPTORS
