"""Benchmarks printed as ratios taken in one run (never assertions: the machines are shared).

Usage: make bench            (all sections)
       python tests/benchmarks/run.py moments
"""

from __future__ import annotations

import sys
import time
from collections.abc import Callable

import numpy as np


def best_of(fn: Callable[[], object], repeats: int = 7) -> float:
    """Smallest wall time of ``repeats`` calls: the least disturbed by other load."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def bench_moments() -> None:
    """Issue 2: mean, variance, third and fourth central moments of 1e7 float64 values."""
    import scipy.stats

    from service.core import central_sums

    x = np.random.default_rng(20261201).normal(250.0, 4.0, 10_000_000)

    def ours() -> tuple[float, float, float, float]:
        sums = central_sums(x, None, 4)
        return sums.mean, sums.central_moment(2), sums.central_moment(3), sums.central_moment(4)

    one_sum = best_of(lambda: np.sum(x))
    t_ours = best_of(ours)
    t_describe = best_of(lambda: scipy.stats.describe(x), repeats=3)
    one_sum = min(one_sum, best_of(lambda: np.sum(x)))
    print("moments: 1e7 float64 values (mean, variance, m3, m4)")
    print(f"  one np.sum pass          {one_sum * 1e3:8.2f} ms   1.00x")
    print(f"  service.core moments     {t_ours * 1e3:8.2f} ms   {t_ours / one_sum:5.2f}x   (target <= 6x)")
    print(f"  scipy.stats.describe     {t_describe * 1e3:8.2f} ms   {t_describe / one_sum:5.2f}x")


def bench_tables() -> None:
    """Issue 3: a 100,000-outcome count table and a 1,000-bin histogram, against expanding the data."""
    import scipy.stats

    from service.core import DescribeOptions, describe, from_bins, from_table

    rng = np.random.default_rng(20261202)
    k = 100_000
    values = np.sort(rng.normal(80.0, 12.0, k))
    options = DescribeOptions()
    print("tables: k = 100,000 distinct outcomes with counts")
    for mean_count in (10, 100):
        counts = rng.poisson(mean_count, k).astype(np.float64) + 1.0
        total = int(counts.sum())
        table = lambda: describe(from_table(values, counts, probabilities=False, normalise=False), options, kind="table")
        expanded = lambda: scipy.stats.describe(np.repeat(values, counts.astype(np.int64)))
        t_table = best_of(table, repeats=5)
        t_expanded = best_of(expanded, repeats=3)
        print(
            f"  total count {total:>11,}: table (every descriptor) {t_table * 1e3:8.2f} ms;"
            f" np.repeat + scipy.stats.describe {t_expanded * 1e3:8.2f} ms; ratio {t_expanded / t_table:6.1f}x"
        )
    edges = np.linspace(0.0, 200.0, 1001)
    counts = rng.poisson(5_000, 1000).astype(np.float64)
    midpoints = 0.5 * (edges[:-1] + edges[1:])
    t_bins = best_of(lambda: describe(from_bins(list(edges), list(counts)), options, kind="bins"), repeats=5)
    t_expanded = best_of(lambda: scipy.stats.describe(np.repeat(midpoints, counts.astype(np.int64))), repeats=3)
    print(
        f"  1,000-bin histogram, total {int(counts.sum()):,}: bins {t_bins * 1e3:8.2f} ms;"
        f" np.repeat + scipy.stats.describe {t_expanded * 1e3:8.2f} ms; ratio {t_expanded / t_bins:6.1f}x"
    )


SECTIONS = {"moments": bench_moments, "tables": bench_tables}


def main(argv: list[str]) -> None:
    chosen = argv or list(SECTIONS)
    for name in chosen:
        SECTIONS[name]()


if __name__ == "__main__":
    main(sys.argv[1:])
