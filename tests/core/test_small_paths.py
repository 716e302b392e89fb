"""Small-sample paths of the half-sample mode and the raw-sample L-moments against the previous
code, kept verbatim below as oracles: the same numbers bit for bit.

* ``half_sample_mode`` finds every window's width at once for up to 65,536 observations
  (``reference_half_sample_mode`` / ``reference_shortest_window``: one chunk at a time into a
  buffer);
* ``sample_lmoments`` of fewer than 4,096 raw observations does its one block's combination on
  Python floats (``reference_blocked_pwm``: per-block arrays), the same products and sums in
  the same order.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from tailgauge.core import half_sample, lmoments

REFERENCE_WINDOW_CHUNK = 1 << 16
REFERENCE_BLOCK = 4096
REFERENCE_BLOCKS_PER_PASS = 64
REFERENCE_UNIT_POWERS = np.vander(np.arange(REFERENCE_BLOCK, dtype=np.float64) / REFERENCE_BLOCK, 4, increasing=True)


def reference_shortest_window(x: np.ndarray, size: int) -> int:
    """First start of the ``size`` consecutive sorted values spanning the shortest interval.

    The widths are taken a cache-sized chunk at a time into one small buffer: a width array as
    long as the data would cost more in fresh memory than the subtraction itself.
    """
    starts = x.size - size + 1
    buffer = np.empty(min(starts, REFERENCE_WINDOW_CHUNK))
    best, best_width = 0, np.inf
    for first in range(0, starts, REFERENCE_WINDOW_CHUNK):
        last = min(starts, first + REFERENCE_WINDOW_CHUNK)
        widths = buffer[: last - first]
        with np.errstate(over="ignore", invalid="ignore"):  # a width beyond float64 is inf
            np.subtract(x[first + size - 1 : last + size - 1], x[first:last], out=widths)
        at = int(np.argmin(widths))
        if widths[at] < best_width:  # strict: the first shortest window wins ties
            best, best_width = first + at, float(widths[at])
    return best


def reference_half_sample_mode(values: np.ndarray, counts: np.ndarray | None = None) -> float:
    """Bickel & Frühwirth's half-sample mode of sorted observations (or distinct values with whole counts).

    Repeatedly keep the ``ceil(n/2)`` consecutive observations spanning the shortest interval
    (the first such window on ties) until at most three remain; then two give their mean,
    three give the mean of the closer pair (the middle value when both gaps are equal).

    With counts, the windows are found on the cumulative counts without expanding: the shortest
    window starting inside a run of equal values starts at the run's first observation, so only
    run starts are candidates, and the kept window may cut the runs at its two ends.
    """
    x = values
    if counts is None:
        while x.size > 3:
            half = (x.size + 1) // 2
            start = reference_shortest_window(x, half)
            x = x[start : start + half]
        counts = np.ones(x.size, dtype=np.int64)
    c = np.asarray(counts, dtype=np.int64)
    n = int(c.sum())
    while n > 3:
        half = (n + 1) // 2
        cumulative = np.cumsum(c)
        starts = cumulative - c  # observations before each run
        candidates = np.flatnonzero(starts + half <= n)
        ends = np.searchsorted(cumulative, starts[candidates] + half, side="left")  # run of the last one kept
        with np.errstate(over="ignore"):
            # A width beyond float64 is inf and never the shortest.
            widths = x[ends] - x[candidates]
        best = int(np.argmin(widths))
        first, last = int(candidates[best]), int(ends[best])
        kept = c[first : last + 1].copy()
        kept[-1] = starts[first] + half - (cumulative[last] - c[last])
        x, c, n = x[first : last + 1], kept, half
    remaining = np.repeat(x, c)
    if remaining.size == 1:
        return float(remaining[0])
    if remaining.size == 2:
        return float(0.5 * remaining[0] + 0.5 * remaining[1])
    with np.errstate(over="ignore"):
        left, right = remaining[1] - remaining[0], remaining[2] - remaining[1]
    if left < right:
        return float(0.5 * remaining[0] + 0.5 * remaining[1])
    if left > right:
        return float(0.5 * remaining[1] + 0.5 * remaining[2])
    return float(remaining[1])


def reference_blocked_pwm(values: np.ndarray, exponent: int) -> tuple[np.ndarray, float]:
    """The work of :func:`_raw_pwm`, scaling each pass by ``2**exponent`` when it is not 0."""
    n = values.size
    # np.ldexp scales exactly even where 2**exponent itself is not a float64 (subnormal data).
    centre = float(np.ldexp(values[n // 2], exponent))
    blocks = -(-n // REFERENCE_BLOCK)
    moments = np.zeros((blocks, 4))
    work = np.empty(min(n, REFERENCE_BLOCK * REFERENCE_BLOCKS_PER_PASS))
    for first in range(0, blocks, REFERENCE_BLOCKS_PER_PASS):
        start = first * REFERENCE_BLOCK
        stop = min(n, start + REFERENCE_BLOCK * REFERENCE_BLOCKS_PER_PASS)
        chunk = work[: stop - start]
        if exponent:
            np.ldexp(values[start:stop], exponent, out=chunk)
            np.subtract(chunk, centre, out=chunk)
        else:
            np.subtract(values[start:stop], centre, out=chunk)
        whole = (stop - start) // REFERENCE_BLOCK
        if whole:
            moments[first : first + whole] = chunk[: whole * REFERENCE_BLOCK].reshape(whole, REFERENCE_BLOCK) @ REFERENCE_UNIT_POWERS
        if whole * REFERENCE_BLOCK < chunk.size:
            rest = chunk[whole * REFERENCE_BLOCK :]
            moments[first + whole] = rest @ REFERENCE_UNIT_POWERS[: rest.size]
    # C(j - 1, r) r! = prod_{m < r} (a_m + B u) with a_m = j0 - 1 - m (j0 the block's first
    # rank), expanded in powers of u: coefficients of u^q are B^q e_{r-q}(a_0 .. a_{r-1}).
    a0 = np.arange(blocks, dtype=np.float64) * REFERENCE_BLOCK  # j0 - 1
    a1, a2 = a0 - 1.0, a0 - 2.0
    big = float(REFERENCE_BLOCK)
    ones = np.ones(blocks)
    coefficients = [
        [ones],
        [a0, big * ones],
        [a0 * a1, big * (a0 + a1), big**2 * ones],
        [a0 * a1 * a2, big * (a0 * a1 + a0 * a2 + a1 * a2), big**2 * (a0 + a1 + a2), big**3 * ones],
    ]
    b = np.empty(4)
    for r in range(4):
        weighted = sum(c * moments[:, q] for q, c in enumerate(coefficients[r]))
        falling = math.prod(n - 1 - m for m in range(r))  # (n - 1)! / (n - 1 - r)!
        b[r] = float(np.sum(weighted)) / (n * falling)
    return b, centre


def reference_sample_lmoments(values: np.ndarray, exponent: int = 0) -> tuple[float, float, float, float]:
    """The previous raw-sample path: scale the four PWMs when nothing nears float64's limits."""
    largest = max(abs(float(values[0])), abs(float(values[-1])))
    if 2.0**-500 < largest < 2.0**500:
        b, centre = reference_blocked_pwm(values, 0)
        b, centre = np.ldexp(b, exponent), math.ldexp(centre, exponent)
    else:
        b, centre = reference_blocked_pwm(values, exponent)
    l1, l2, l3, l4 = lmoments._COMBINATION @ b
    return float(l1) + centre, float(l2), float(l3), float(l4)


def _samples(seed: int, sizes) -> list[np.ndarray]:
    rng = np.random.default_rng(seed)
    out = []
    for n in sizes:
        out.append(np.sort(rng.lognormal(0.0, 0.6, n)))
        out.append(np.sort(rng.standard_cauchy(n)))
        out.append(np.sort(rng.pareto(1.1, n)))
        out.append(np.sort(np.round(rng.normal(0.0, 3.0, n))))  # ties
        out.append(np.sort(rng.normal(1e6, 1.0, n)))  # a large common part
        out.append(np.sort(rng.normal(0.0, 1e307, n)))  # widths beyond float64
    return out


def _same(a: float, b: float) -> bool:
    return a == b or (math.isnan(a) and math.isnan(b))


HSM_SIZES = list(range(1, 40)) + [63, 64, 65, 99, 100, 101, 255, 1000, 4097, 65536, 65537, 70001]


@pytest.mark.parametrize("seed", range(3))
def test_half_sample_mode_equals_the_previous_code(seed):
    for x in _samples(seed, HSM_SIZES):
        assert _same(half_sample.half_sample_mode(x), reference_half_sample_mode(x)), x.size


def test_half_sample_mode_with_infinite_widths_and_infinities_equals_the_previous_code():
    cases = [
        np.array([-1.7e308, -1.6e308, 1.6e308, 1.7e308]),
        np.array([-1.7e308, 0.0, 1.7e308, 1.75e308, 1.79e308]),
        np.array([-np.inf, -1.0, 0.0, 2.0, np.inf]),
        np.array([-np.inf, -np.inf, np.inf, np.inf, np.inf]),
        np.full(9, 3.5),
    ]
    for x in cases:
        with np.errstate(invalid="ignore", over="ignore"):
            assert _same(half_sample.half_sample_mode(x), reference_half_sample_mode(x)), x


LMOMENT_SIZES = list(range(4, 40)) + [64, 99, 100, 101, 1000, 4095, 4096, 4097, 9000]


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("exponent", [0, -3, 9])
def test_raw_sample_lmoments_equal_the_previous_code(seed, exponent):
    for x in _samples(100 + seed, LMOMENT_SIZES):
        with np.errstate(all="ignore"):  # the 1e307 sample overflows in both (describe scales it first)
            got = lmoments.sample_lmoments(x, None, exponent)
            expected = reference_sample_lmoments(x, exponent)
        assert all(_same(a, b) for a, b in zip(got, expected)), x.size


def test_raw_sample_lmoments_of_extreme_magnitudes_equal_the_previous_code():
    """Data near float64's limits take the path that scales each pass (exponent not 0)."""
    rng = np.random.default_rng(9)
    for scale, exponent in ((1e-310, 1030), (1e300, -1000), (1e-200, 660)):
        for n in (4, 5, 100, 4095, 4097):
            x = np.sort(rng.lognormal(0.0, 1.0, n)) * scale
            got = lmoments.sample_lmoments(x, None, exponent)
            expected = reference_sample_lmoments(x, exponent)
            assert all(_same(a, b) for a, b in zip(got, expected)), (scale, n)
