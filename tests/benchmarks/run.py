"""Benchmarks printed as ratios taken in one run (never assertions: the machines are shared).

Usage: make bench            (all sections)
       python tests/benchmarks/run.py moments
       python tests/benchmarks/run.py merge=1e7     (a section's size, where it takes one)
"""

from __future__ import annotations

import os

# As the service runs (deploy/gunicorn.conf.py): BLAS single-threaded, beside the resampling's
# own threads. Set before numpy loads; an explicit setting in the environment wins.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import sys  # noqa: E402
from pathlib import Path  # noqa: E402
import time  # noqa: E402
from collections.abc import Callable  # noqa: E402

import numpy as np  # noqa: E402


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

    from tailgauge.core import central_sums

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
    print(f"  tailgauge.core moments     {t_ours * 1e3:8.2f} ms   {t_ours / one_sum:5.2f}x   (target <= 6x)")
    print(f"  scipy.stats.describe     {t_describe * 1e3:8.2f} ms   {t_describe / one_sum:5.2f}x")


def bench_tables() -> None:
    """Issue 3: a 100,000-outcome count table and a 1,000-bin histogram, against expanding the data."""
    import scipy.stats

    from tailgauge.core import DescribeOptions, describe, from_bins, from_table

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


def timed_peak(fn: Callable[[], object], repeats: int = 1) -> tuple[float, float, str]:
    """(best seconds of ``repeats`` untraced calls, peak traced MB of one more call, and the
    process's user and system CPU seconds per untraced call).

    numpy's buffers are traced by tracemalloc, which slows every allocation, so the time is
    taken without it. System time is mostly the kernel handing out fresh pages: on these
    virtual machines it can exceed the arithmetic, so it is printed beside the wall time."""
    import resource
    import tracemalloc

    before = resource.getrusage(resource.RUSAGE_SELF)
    elapsed = best_of(fn, repeats)
    after = resource.getrusage(resource.RUSAGE_SELF)
    cpu = (
        f"user {(after.ru_utime - before.ru_utime) / repeats:.2f} s,"
        f" system {(after.ru_stime - before.ru_stime) / repeats:.2f} s per call"
    )
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1] / 2**20
    tracemalloc.stop()
    return elapsed, peak, cpu


def bench_intervals() -> None:
    """Issue 4: BCa intervals of every descriptor against scipy.stats.bootstrap of the skewness alone."""
    import scipy.stats

    from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array, from_table

    rng = np.random.default_rng(20261203)
    skew = lambda sample, axis=-1: scipy.stats.skew(sample, axis=axis)
    options = DescribeOptions(interval=IntervalOptions(method="bca", resamples=9999, seed=7))
    print("intervals: BCa, 9,999 resamples")

    x = rng.gamma(4.0, 2.0, 10_000)
    t_ours, m_ours, cpu_ours = timed_peak(lambda: describe(from_array(x), options, kind="samples"), repeats=3)
    t_scipy, m_scipy, cpu_scipy = timed_peak(
        lambda: scipy.stats.bootstrap((x,), skew, n_resamples=9999, method="BCa", random_state=1)
    )
    print(
        f"  n = 10,000: every descriptor {t_ours:6.2f} s (best of 3), peak {m_ours:7.1f} MB;"
        f" scipy (skewness alone) {t_scipy:6.2f} s, peak {m_scipy:7.1f} MB;"
        f" {t_scipy / t_ours:5.1f}x faster, {m_scipy / m_ours:5.1f}x less memory (targets >= 10x, >= 20x)\n"
        f"    CPU: ours {cpu_ours}; scipy {cpu_scipy}"
    )

    y = rng.gamma(4.0, 2.0, 100_000)
    t_ours, m_ours, cpu_ours = timed_peak(lambda: describe(from_array(y), options, kind="samples"), repeats=2)
    # scipy at n = 1e5 takes minutes: time its two parts on a fraction and scale them up.
    t_resample = best_of(
        lambda: scipy.stats.bootstrap((y,), skew, n_resamples=999, method="percentile", random_state=1), repeats=1
    )
    held_out = 2_000
    start = time.perf_counter()
    for i in range(held_out):
        scipy.stats.skew(np.delete(y, i))
    t_jackknife = (time.perf_counter() - start) * (y.size / held_out)
    t_scipy = t_resample * 9999 / 999 + t_jackknife
    print(
        f"  n = 100,000: every descriptor {t_ours:6.2f} s (best of 2), peak {m_ours:7.1f} MB; scipy estimated {t_scipy:7.1f} s"
        f" (999 resamples x 10.01 + {held_out} of {y.size} jackknife fits x {y.size // held_out});"
        f" {t_scipy / t_ours:5.1f}x faster (target >= 30x)\n    CPU: ours {cpu_ours}"
    )

    values = np.arange(50, dtype=np.float64)
    weights = rng.dirichlet(np.ones(50))
    table_options = DescribeOptions(interval=IntervalOptions(method="bca", resamples=10_000, seed=7))
    for total in (10_000, 1_000_000, 100_000_000):
        counts = np.maximum(np.round(weights * total), 1.0)
        data = lambda: from_table(values, counts, probabilities=False, normalise=False)
        t_table = best_of(lambda: describe(data(), table_options, kind="table"), repeats=3)
        print(f"  table k = 50, total count {int(counts.sum()):>11,}: every descriptor with intervals {t_table * 1e3:7.1f} ms (target <= 50 ms, flat)")


def bench_order_statistics() -> None:
    """Issue 5: every order-statistic descriptor from one sort, against one np.sort of the array."""
    import statsmodels.stats.stattools as stattools

    from tailgauge.core import DescribeOptions, from_array, lmoments, order_statistics, robust
    from tailgauge.core.describe import ROBUST_PROBABILITIES

    rng = np.random.default_rng(20261204)
    print("order statistics: median, quantiles, IQR, MAD, quartile/octile shape, L-moments, medcouple")
    for n in (1_000_000, 10_000_000):
        x = rng.lognormal(0.0, 0.6, n)
        probabilities = np.concatenate(([0.25, 0.75], ROBUST_PROBABILITIES, DescribeOptions().probabilities))

        def without_medcouple():
            # The calls describe() makes for a raw sample's order statistics, in its order.
            data = from_array(x)
            median = order_statistics.median(data)  # sorts, once
            order_statistics.quantiles(data, probabilities, 7)  # quartiles, octiles, requested quantiles
            order_statistics.median_absolute_deviation(data, median)
            lmoments.sample_lmoments(data.sorted_values, None)
            robust.half_sample_mode(data.sorted_values)
            return data, median

        t_sort = best_of(lambda: np.sort(x), repeats=3)
        t_order = best_of(without_medcouple, repeats=3)
        data, median = without_medcouple()
        t_medcouple = best_of(lambda: robust.medcouple(data.sorted_values, None, median), repeats=1)
        print(
            f"  n = {n:>10,}: one np.sort {t_sort:6.3f} s; order statistics without medcouple "
            f"{t_order:6.3f} s ({t_order / t_sort:4.2f}x, target <= 1.5x); medcouple alone {t_medcouple:6.2f} s"
            f" ({(t_order + t_medcouple) / t_sort:4.1f}x with it)"
        )
    y = rng.lognormal(0.0, 0.6, 100_000)
    t_ours = best_of(lambda: robust.medcouple(np.sort(y), None, float(np.median(y))), repeats=3)
    t_fast = best_of(lambda: stattools.medcouple(y, use_fast=True), repeats=1)
    print(f"  medcouple n = 100,000: ours {t_ours:6.3f} s; statsmodels use_fast=True {t_fast:6.3f} s ({t_fast / t_ours:5.1f}x)")


def _merge_recipe_run(variant: str, n: int, chunks: int) -> None:
    """One variant of the recipe benchmark, in a fresh process; prints seconds and peak RSS growth."""
    import json
    import resource

    import dask.array as da

    from tailgauge.core import DescribeOptions, combine_sketches, describe_state, kll_sketch_bytes, merge_states
    from tailgauge.core import partial_state
    from tailgauge.recipes.dask_states import chunk_summaries

    baseline = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux
    start = time.perf_counter()
    if variant == "dask":
        x = da.random.default_rng(20261206).normal(250.0, 4.0, size=n, chunks=n // chunks)
        states, sketches = chunk_summaries(x, scheduler="threads")
        state, union = merge_states(states), combine_sketches(sketches)
    else:
        x = np.random.default_rng(20261206).normal(250.0, 4.0, size=n)
        state, union = partial_state(x), combine_sketches([kll_sketch_bytes(x)])
    describe_state(state, DescribeOptions(), union)
    elapsed = time.perf_counter() - start
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({"seconds": elapsed, "peak_mb": (peak - baseline) / 1024}))


def bench_merge(size: str = "1e8") -> None:
    """Issue 6: merging 10,000 partial states; the Dask recipe against one in-memory computation."""
    import json
    import pathlib
    import subprocess

    from tailgauge.core import merge, merge_states, partial_state

    rng = np.random.default_rng(20261205)
    x = rng.gamma(2.0, 3.0, 1_000_000)
    pieces = np.split(x, 10_000)
    states = [partial_state(p) for p in pieces]
    print("merge: partial states and the Dask recipe")

    def fold():
        state = states[0]
        for other in states[1:]:
            state = merge(state, other)
        return state

    t_direct = best_of(lambda: partial_state(x), repeats=5)
    t_tree = best_of(lambda: merge_states(states), repeats=5)
    t_fold = best_of(fold, repeats=1)
    print(
        f"  10,000 states of 100 values: merge_states (checks + tree) {t_tree * 1e3:7.1f} ms;"
        f" one-by-one merge() {t_fold * 1e3:7.1f} ms ({t_fold / t_tree:4.1f}x);"
        f" partial_state of the 1e6 values themselves {t_direct * 1e3:6.1f} ms ({t_tree / t_direct:4.2f}x)"
    )

    n, chunks = int(float(size)), 100
    here = pathlib.Path(__file__).resolve()
    results = {}
    for variant in ("dask", "memory"):
        code = f"import sys; sys.path.insert(0, {str(here.parent)!r}); import run; run._merge_recipe_run({variant!r}, {n}, {chunks})"
        done = subprocess.run(
            [sys.executable, "-c", code], cwd=here.parents[2], capture_output=True, text=True, check=True
        )
        results[variant] = json.loads(done.stdout.strip().splitlines()[-1])
    dask_run, memory_run = results["dask"], results["memory"]
    print(
        f"  {n:.0e} values, {chunks} chunks (generate, state + KLL sketch per chunk, merge, describe):"
        f" dask threads {dask_run['seconds']:6.1f} s, peak RSS +{dask_run['peak_mb']:7.1f} MB;"
        f" in memory {memory_run['seconds']:6.1f} s, +{memory_run['peak_mb']:7.1f} MB;"
        f" time {dask_run['seconds'] / memory_run['seconds']:4.2f}x, memory"
        + (f" {memory_run['peak_mb'] / dask_run['peak_mb']:5.1f}x less" if dask_run["peak_mb"] > 0 else " (dask: no growth)")
    )


def bench_transport(size: str = "1e6") -> None:
    """Issue 7: 1e6 values through gunicorn by body format (tests/benchmarks/transport.py)."""
    import transport  # same directory; run.py is started as a script

    print("\n== transport: round trip through gunicorn on loopback ==")
    transport.main(int(float(size)))


def bench_cost() -> None:
    """The cost model beside measured peaks and times (tests/benchmarks/cost.py)."""
    import subprocess

    print("\n== cost: the per-request plan beside measured memory and time ==")
    subprocess.run([sys.executable, str(Path(__file__).with_name("cost.py"))], check=True)


SECTIONS = {
    "cost": bench_cost,
    "moments": bench_moments,
    "tables": bench_tables,
    "intervals": bench_intervals,
    "order": bench_order_statistics,
    "merge": bench_merge,
    "transport": bench_transport,
}


def main(argv: list[str]) -> None:
    chosen = argv or list(SECTIONS)
    print(f"OPENBLAS_NUM_THREADS={os.environ['OPENBLAS_NUM_THREADS']} (the service's setting, deploy/gunicorn.conf.py)")
    for token in chosen:
        name, _, size = token.partition("=")
        SECTIONS[name](size) if size else SECTIONS[name]()


if __name__ == "__main__":
    main(sys.argv[1:])
