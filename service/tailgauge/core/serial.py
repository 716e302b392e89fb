"""Serial dependence of ordered samples: the lag-1 autocorrelation, every autocovariance, the
effective sample size (Geyer 1992) and the automatic block lengths (Politis & White 2004)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import fft

from tailgauge.core.moments import CentralSums

_BLOCK = 1 << 16


def lag1_autocorrelation(values: np.ndarray, sums: CentralSums) -> float:
    """``r1 = sum_{i<n} (x_i - xbar)(x_{i+1} - xbar) / sum_i (x_i - xbar)**2``.

    This is the definition used for the certified values of the NIST StRD univariate
    datasets. Deviations are the scaled deviations of ``sums`` (the same exact power-of-two
    scaling as its power sums), so the products cannot overflow; the denominator is the
    already-computed second central sum. NaN for constant data.
    """
    denominator = float(sums.sums[2])
    if denominator <= 0.0 or values.size < 2:
        return float("nan")
    numerator = 0.0
    for start in range(0, values.size - 1, _BLOCK):
        chunk = sums.scaled_deviations(values[start : start + _BLOCK + 1])
        numerator += float(np.sum(chunk[:-1] * chunk[1:]))
    return numerator / denominator


def autocovariances(values: np.ndarray, sums: CentralSums) -> np.ndarray:
    """Every autocovariance ``c_k = n^-1 sum_{i<n-k} d_i d_{i+k}``, k = 0 .. n-1, of the scaled
    deviations ``d`` of ``sums`` (the same power-of-two scaling: ratios of them are exact
    autocorrelations), from one real FFT of the deviations padded to at least 2n (no circular
    wrap). Working memory about ``AUTOCOVARIANCE_BYTES_PER_VALUE`` per value."""
    n = values.size
    deviations = sums.scaled_deviations(values)
    length = fft.next_fast_len(2 * n, real=True)
    spectrum = fft.rfft(deviations, n=length)
    del deviations
    np.multiply(spectrum, spectrum.conj(), out=spectrum)
    power = spectrum.real.copy()
    del spectrum
    covariances = fft.irfft(power, n=length)[:n]
    covariances /= n
    return covariances


# Working memory of autocovariances() per value (the padded deviations, the spectrum, the power
# and the inverse transform): tracemalloc sees 41 bytes at n = 1e3 to 2e6 (checked in
# tests/core/test_serial.py); the FFT's own buffers are outside its view, hence the margin.
AUTOCOVARIANCE_BYTES_PER_VALUE = 96


def integrated_time(covariances: np.ndarray) -> float | None:
    """Geyer's (1992) initial positive sequence estimate of ``tau = 1 + 2 sum_k rho_k``: the sums
    of adjacent pairs ``G_m = c_2m + c_2m+1`` are added while they stay positive, and
    ``tau = (-c_0 + 2 sum_m G_m) / c_0`` (C. J. Geyer, "Practical Markov chain Monte Carlo",
    Statistical Science 7, 1992, section 3.3); at or below 0 when neighbours alternate strongly
    (see :func:`effective_size`). ``None`` for constant data (c_0 = 0) or a non-finite sum."""
    c0 = float(covariances[0]) if covariances.size else 0.0
    if not c0 > 0.0:
        return None
    pairs = covariances[: 2 * (covariances.size // 2)].reshape(-1, 2).sum(axis=1)
    stops = np.flatnonzero(pairs <= 0.0)
    kept = pairs[: stops[0]] if stops.size else pairs
    tau = (-c0 + 2.0 * float(np.sum(kept))) / c0
    return tau if math.isfinite(tau) else None


def effective_size(covariances: np.ndarray) -> float | None:
    """``n / tau`` with Geyer's initial positive sequence ``tau`` (:func:`integrated_time`): the
    number of independent observations whose mean is as precise as this series' mean.

    Negatively correlated neighbours make tau small and n / tau large, without bound as tau
    nears 0 or passes below it (a series that alternates): tau is taken at least
    ``1 / log10(n)``, so the effective n is at most ``n log10 n`` (the floor Stan puts on tau,
    recalled rather than looked up), and at least 1 for n <= 10 (the effective n at most n)."""
    tau = integrated_time(covariances)
    if tau is None:
        return None
    n = covariances.size
    floor = 1.0 / math.log10(n) if n > 10 else 1.0
    return n / max(tau, floor)


# Politis & White (2004), with the correction of Patton, Politis & White (2009): the bandwidth
# m-hat is the first lag that starts K_N consecutive autocorrelations inside +-c sqrt(log10 n / n),
# c = 2, K_N = max(5, floor(log10 n)); M = 2 m-hat, at most ceil(sqrt n) + K_N (also when no such
# run exists). These tuning choices are those documented by the arch package (8.0.0), taken there
# from Patton's program.
_BAND = 2.0


@dataclass(frozen=True)
class BlockLengths:
    stationary: float  # expected block length of the stationary bootstrap
    circular: float  # block length of the circular (and moving) block bootstrap
    bandwidth: int  # M, the flat-top window's width in lags


def optimal_block_lengths(covariances: np.ndarray) -> BlockLengths:
    """The automatic block lengths of Politis & White (2004), corrected by Patton, Politis &
    White (2009): ``b = (2 G^2 / D)^(1/3) n^(1/3)`` with ``G = sum_{|k|<=M} lambda(k/M) |k| c_k``,
    ``D = 2 g^2`` (stationary) or ``4/3 g^2`` (circular), ``g = sum_{|k|<=M} lambda(k/M) c_k``
    and the flat-top window ``lambda(t) = min(1, 2(1 - |t|))``; each at most
    ``ceil(min(3 sqrt n, n / 3))`` and at least 1."""
    n = covariances.size
    ceiling = max(1.0, math.ceil(min(3.0 * math.sqrt(n), n / 3.0)))
    c0 = float(covariances[0]) if n else 0.0
    if n < 3 or not c0 > 0.0:
        return BlockLengths(1.0, 1.0, 0)
    runs = max(5, int(math.log10(n)))
    widest = int(math.ceil(math.sqrt(n))) + runs
    # Autocorrelations at lags 1 .. widest - 1; windows of `runs` consecutive lags among them:
    # the first lag j whose window j .. j + runs - 1 lies inside the band.
    lags = min(widest - 1, n - 1)
    band = _BAND * math.sqrt(math.log10(n) / n)
    inside = np.abs(covariances[1 : lags + 1] / c0) < band
    found = np.empty(0, dtype=np.intp)
    if inside.size >= runs:
        window = np.convolve(inside.astype(np.int64), np.ones(runs, dtype=np.int64), mode="valid")
        found = np.flatnonzero(window == runs)
    bandwidth = min(2 * int(found[0] + 1), widest, n - 1) if found.size else min(widest, n - 1)
    k = np.arange(1, bandwidth + 1, dtype=np.float64)
    window_weights = np.minimum(1.0, 2.0 * (1.0 - k / bandwidth))
    c = covariances[1 : bandwidth + 1]
    g_sum = 2.0 * float(np.sum(window_weights * k * c))
    long_run = c0 + 2.0 * float(np.sum(window_weights * c))
    if not long_run != 0.0 or g_sum == 0.0:
        return BlockLengths(1.0, 1.0, bandwidth)
    ratio = 2.0 * g_sum * g_sum / (long_run * long_run)
    stationary = (ratio / 2.0) ** (1.0 / 3.0) * n ** (1.0 / 3.0)
    circular = (ratio / (4.0 / 3.0)) ** (1.0 / 3.0) * n ** (1.0 / 3.0)
    return BlockLengths(
        min(max(stationary, 1.0), ceiling), min(max(circular, 1.0), ceiling), bandwidth
    )
