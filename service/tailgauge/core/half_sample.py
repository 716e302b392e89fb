"""The half-sample mode (Bickel & Frühwirth): repeatedly keep the shortest window holding half
the observations.

Reference
---------
D. R. Bickel and R. Frühwirth, "On a fast, robust estimator of the mode", Computational
Statistics & Data Analysis 50(12), 3500-3530, 2006.
"""

from __future__ import annotations

import numpy as np

_WINDOW_CHUNK = 1 << 16


def _shortest_window(x: np.ndarray, size: int) -> int:
    """First start of the ``size`` consecutive sorted values spanning the shortest interval.

    The widths are taken a cache-sized chunk at a time into one small buffer: a width array as
    long as the data would cost more in fresh memory than the subtraction itself.
    """
    starts = x.size - size + 1
    buffer = np.empty(min(starts, _WINDOW_CHUNK))
    best, best_width = 0, np.inf
    for first in range(0, starts, _WINDOW_CHUNK):
        last = min(starts, first + _WINDOW_CHUNK)
        widths = buffer[: last - first]
        with np.errstate(over="ignore", invalid="ignore"):  # a width beyond float64 is inf
            np.subtract(x[first + size - 1 : last + size - 1], x[first:last], out=widths)
        at = int(np.argmin(widths))
        if widths[at] < best_width:  # strict: the first shortest window wins ties
            best, best_width = first + at, float(widths[at])
    return best


def half_sample_mode(values: np.ndarray, counts: np.ndarray | None = None) -> float:
    """Bickel & Frühwirth's half-sample mode of sorted observations (or distinct values with whole counts).

    Repeatedly keep the ``ceil(n/2)`` consecutive observations spanning the shortest interval
    (the first such window on ties) until at most three remain; then two give their mean,
    three give the mean of the closer pair (the middle value when both gaps are equal).

    With counts, the windows are found on the cumulative counts without expanding: the shortest
    window starting inside a run of equal values starts at the run's first observation, so only
    run starts are candidates, and the kept window may cut the runs at its two ends.
    """
    x = values
    if counts is None and x.size <= _WINDOW_CHUNK:
        # Few observations: every window's width at once, the first shortest kept (as
        # _shortest_window finds it in its one chunk).
        with np.errstate(over="ignore", invalid="ignore"):  # a width beyond float64 is inf
            while x.size > 3:
                half = (x.size + 1) // 2
                widths = x[half - 1 :] - x[: x.size - half + 1]
                at = int(widths.argmin())
                start = at if widths[at] < np.inf else 0
                x = x[start : start + half]
    if counts is None:
        while x.size > 3:
            half = (x.size + 1) // 2
            start = _shortest_window(x, half)
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
