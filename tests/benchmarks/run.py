"""Benchmarks printed as ratios taken in one run (never assertions: the machines are shared).

Usage: make bench                                   (every section, this tree)
       python tests/benchmarks/run.py --help
       python tests/benchmarks/run.py order moments      (sections by name)
       python tests/benchmarks/run.py merge=1e7          (a section's size, where it takes one)
       python tests/benchmarks/run.py --tree /path/to/other/checkout --json before.json
       python tests/benchmarks/run.py --quick            (reduced sizes and durations: a smoke run)

Each comparison alternates its sides within one loop and reports the median over rounds of the
ratio within a round, beside each side's best time (timing.py). The HTTP sections start gunicorn
from the tree under test (server.py). A figure the tree cannot produce (an option it does not
have) is printed as "n/a (not in this tree)". A summary table closes the run.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

# As the service runs (deploy/gunicorn.conf.py): BLAS single-threaded, beside the resampling's
# own threads. Set before numpy loads; an explicit setting in the environment wins.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import time
from collections.abc import Callable

import numpy as np
from timing import FIGURES, NA, alternate, best_of, record, traced_peak

HERE = Path(__file__).resolve().parent
THIS_TREE = HERE.parents[1]
TREE = THIS_TREE  # the tree under test (--tree)
QUICK = False


# --- the tree's options --------------------------------------------------------------------


def selecting(names: list[str] | tuple[str, ...], **others) -> object | str:
    """DescribeOptions computing only ``names`` (``options.descriptors``), or why there are none.

    The selection must work on a small input and leave out what was not asked for; otherwise the
    figure is not measurable on this tree."""
    import dataclasses

    from tailgauge.core import DescribeOptions, describe, from_array

    if "descriptors" not in {f.name for f in dataclasses.fields(DescribeOptions)}:
        return f"{NA}: DescribeOptions has no descriptors field"
    import tailgauge.core as core

    failure = ""
    # The tree's own way of making a selection (tailgauge.core.choose), else a plain collection.
    forms = [core.choose] if hasattr(core, "choose") else [tuple, frozenset, list]
    for form in forms:
        try:
            options = DescribeOptions(descriptors=form(names), **others)
            answer = describe(from_array(np.linspace(1.0, 2.0, 50) ** 2), options, kind="samples")
            if hasattr(core, "restricted"):  # the answer as the edge sends it
                answer = core.restricted(answer, options.descriptors)
            break
        except Exception as error:  # noqa: BLE001 - reported, not raised
            failure = failure or f"n/a (descriptors={list(names)}: {type(error).__name__}: {str(error)[:100]})"
    else:
        return failure
    present = set(getattr(answer, "descriptors", {}) or {})
    if present - set(names):
        return f"n/a (descriptors={list(names)} not honoured: {sorted(present - set(names))[:3]} computed too)"
    return options


# --- row 4 ---------------------------------------------------------------------------------


def bench_moments(size: str = "") -> None:
    """Row 4: mean, variance, third and fourth central moments against one np.sum."""
    import scipy.stats
    from tailgauge.core import central_sums, describe, from_array

    n = int(float(size)) if size else (1_000_000 if QUICK else 10_000_000)
    rounds = 5 if QUICK else 9
    x = np.random.default_rng(20261201).normal(250.0, 4.0, n)

    def ours() -> tuple[float, float, float, float]:
        sums = central_sums(x, None, 4)
        return sums.mean, sums.central_moment(2), sums.central_moment(3), sums.central_moment(4)

    # The moments member carries m3 and m4; the descriptor names come from the registry.
    chosen: object | str = NA
    for names in (["mean", "variance", "moments"], ["mean", "variance", "skewness", "kurtosis"]):
        chosen = selecting(names, moment_order=4)
        if not isinstance(chosen, str):
            break
    selected = chosen if isinstance(chosen, str) else (lambda: describe(from_array(x), chosen, kind="samples"))
    sides = {
        "np.sum": lambda: np.sum(x),
        "central_sums": ours,
        "describe(selected)": selected,
        "scipy.stats.describe": lambda: scipy.stats.describe(x),
    }
    result = alternate(sides, rounds)
    print(f"moments: {n:.0e} float64 values (mean, variance, m3, m4); {rounds} alternating rounds")
    print(result.show("np.sum"))
    print(result.show("central_sums", "np.sum", "tailgauge.core central_sums (m1..m4)", "<= 5x"))
    label = "describe, descriptors=" + (str(names) if not isinstance(chosen, str) else "...")
    print(result.show("describe(selected)", "np.sum", label, "<= 5x"))
    print(result.show("scipy.stats.describe", "np.sum"))
    record("4 moments", f"mean+variance+m3+m4 of {n:.0e} (central_sums) vs np.sum",
           result.ratio("central_sums", "np.sum"), "x", "<= 5x")
    record("4 moments", f"describe with only the moments, {n:.0e}, vs np.sum",
           result.ratio("describe(selected)", "np.sum"), "x", "<= 5x", result.failed.get("describe(selected)", ""))


# --- existing: large tables ----------------------------------------------------------------


def bench_tables() -> None:
    """A 100,000-outcome count table and a 1,000-bin histogram, against expanding the data."""
    import scipy.stats
    from tailgauge.core import DescribeOptions, describe, from_bins, from_table

    rng = np.random.default_rng(20261202)
    k = 10_000 if QUICK else 100_000
    rounds = 2 if QUICK else 3
    values = np.sort(rng.normal(80.0, 12.0, k))
    options = DescribeOptions()
    print(f"tables: k = {k:,} distinct outcomes with counts; {rounds} alternating rounds")
    for mean_count in (10, 100):
        counts = rng.poisson(mean_count, k).astype(np.float64) + 1.0
        total = int(counts.sum())
        result = alternate({
            "table": lambda: describe(from_table(values, counts, probabilities=False, normalise=False), options, kind="table"),
            "expanded": lambda: scipy.stats.describe(np.repeat(values, counts.astype(np.int64))),
        }, rounds)
        print(
            f"  total count {total:>11,}: table (every descriptor) {result.best('table') * 1e3:8.2f} ms;"
            f" np.repeat + scipy.stats.describe {result.best('expanded') * 1e3:8.2f} ms;"
            f" ratio {1 / result.ratio('table', 'expanded'):6.1f}x"
        )
    edges = np.linspace(0.0, 200.0, 1001)
    counts = rng.poisson(5_000, 1000).astype(np.float64)
    midpoints = 0.5 * (edges[:-1] + edges[1:])
    result = alternate({
        "bins": lambda: describe(from_bins(list(edges), list(counts)), options, kind="bins"),
        "expanded": lambda: scipy.stats.describe(np.repeat(midpoints, counts.astype(np.int64))),
    }, rounds)
    print(
        f"  1,000-bin histogram, total {int(counts.sum()):,}: bins {result.best('bins') * 1e3:8.2f} ms;"
        f" np.repeat + scipy.stats.describe {result.best('expanded') * 1e3:8.2f} ms;"
        f" ratio {1 / result.ratio('bins', 'expanded'):6.1f}x"
    )


# --- rows 5 and 6 --------------------------------------------------------------------------


def with_intervals(answer: object) -> str:
    """How many of the answer's descriptors got a bootstrap interval (the engine may leave some out)."""
    estimates = getattr(answer, "descriptors", {}) or {}
    given = [name for name, e in estimates.items() if getattr(e, "interval", None) is not None]
    missing = [name for name in estimates if name not in given]
    return f"intervals for {len(given)} of {len(estimates)} descriptors" + (
        f" (none for {', '.join(missing)})" if missing else "")


def bench_intervals() -> None:
    """Rows 5 and 6: BCa of every descriptor; the count table k = 50; against scipy.stats.bootstrap."""
    import scipy
    import scipy.stats
    from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array, from_table

    rng = np.random.default_rng(20261203)
    skew = lambda sample, axis=-1: scipy.stats.skew(sample, axis=axis)
    n, resamples = (2_000, 999) if QUICK else (10_000, 9999)
    batches = (50, 100, 500) if QUICK else (25, 50, 100, 500, 2000)
    rounds = 1 if QUICK else 2
    options = DescribeOptions(interval=IntervalOptions(method="bca", resamples=resamples, seed=7))
    print(f"intervals: BCa, {resamples:,} resamples (scipy {scipy.__version__}); {rounds} alternating round(s)")

    # Row 5: the count table.
    values = np.arange(50, dtype=np.float64)
    weights = rng.dirichlet(np.ones(50))
    table_options = DescribeOptions(interval=IntervalOptions(method="bca", resamples=10_000, seed=7))
    for total in (10_000, 1_000_000, 100_000_000):
        counts = np.maximum(np.round(weights * total), 1.0)
        t_table = best_of(lambda: describe(from_table(values, counts, probabilities=False, normalise=False),
                                           table_options, kind="table"), repeats=3 if QUICK else 5)
        print(f"  table k = 50, total count {int(counts.sum()):>11,}: every descriptor with 10,000 BCa resamples"
              f" {t_table * 1e3:7.1f} ms (best of {3 if QUICK else 5}; target <= 50 ms, flat)")
        record("5 count table", f"k = 50, 10,000 BCa, every descriptor, total {total:.0e}", t_table * 1e3, "ms", "<= 50 ms")

    # Row 6: n = 1e4 against scipy's default call and its batch sizes.
    x = rng.gamma(4.0, 2.0, n)
    sides: dict[str, Callable[[], object]] = {"ours": lambda: describe(from_array(x), options, kind="samples")}
    sides["scipy default"] = lambda: scipy.stats.bootstrap((x,), skew, n_resamples=resamples, method="BCa", random_state=1)
    for batch in batches:
        sides[f"scipy batch={batch}"] = lambda batch=batch: scipy.stats.bootstrap(
            (x,), skew, n_resamples=resamples, batch=batch, method="BCa", random_state=1)
    result = alternate(sides, rounds)
    best_batch = min(batches, key=lambda b: result.best(f"scipy batch={b}"))
    best_name = f"scipy batch={best_batch}"
    print(f"  n = {n:,}, every descriptor (ours) vs the skewness alone (scipy):")
    for name in sides:
        line = result.show(name)
        if name != "ours":
            line += f"   ours {result.ratio(name, 'ours'):5.1f}x faster"
        print(line)
    memory_ours, answer = traced_peak(sides["ours"])
    memory_best, _ = traced_peak(sides[best_name])
    print(f"    ours: {with_intervals(answer)}")
    print(f"    peak traced memory: ours {memory_ours:.1f} MB; {best_name} {memory_best:.1f} MB"
          f" ({memory_best / memory_ours:.1f}x)")
    edge = " (at the edge of the sizes tried: another size may do better)" if best_batch in (batches[0], batches[-1]) else ""
    print(f"    best batch: {best_batch}{edge} (tried {', '.join(map(str, batches))}); ratios are medians over rounds;"
          f" every scipy figure at n = {n:,} is measured, none extrapolated")
    record("6 BCa n=1e4", f"n = {n:.0e}, B = {resamples}: ours vs scipy default call", result.ratio("scipy default", "ours"),
           "x", "", "times faster")
    record("6 BCa n=1e4", f"n = {n:.0e}, B = {resamples}: ours vs scipy batch={best_batch} (best of {list(batches)})",
           result.ratio(best_name, "ours"), "x", ">= 10x", "times faster")

    # n = 1e5: scipy is estimated from parts, stated in full.
    m = 20_000 if QUICK else 100_000
    y = rng.gamma(4.0, 2.0, m)
    part_resamples, held_out = 999, 2_000
    answers = []
    t_ours = best_of(lambda: answers.append(describe(from_array(y), options, kind="samples")), repeats=1 if QUICK else 2)
    t_resample = best_of(lambda: scipy.stats.bootstrap(
        (y,), skew, n_resamples=part_resamples, batch=best_batch, method="percentile", random_state=1), repeats=1)
    # scipy's BCa jackknife: leave-one-out samples in blocks of `batch` rows, the statistic of
    # each block along the last axis (scipy.stats._resampling._jackknife_resample), timed on the
    # first `held_out` rows.
    try:
        from scipy.stats._resampling import _jackknife_resample

        start = time.perf_counter()
        done = 0
        for block in _jackknife_resample(y, best_batch, xp=np):
            skew(block)
            done += block.shape[0]
            if done >= held_out:
                break
        t_jack_part = time.perf_counter() - start
        how = f"scipy's own _jackknife_resample in blocks of {best_batch}"
    except (ImportError, TypeError):
        start = time.perf_counter()
        for i in range(held_out):
            scipy.stats.skew(np.delete(y, i))
        done, t_jack_part = held_out, time.perf_counter() - start
        how = "one np.delete + skew per left-out value"
    t_jackknife = t_jack_part * m / done
    t_scipy = t_resample * resamples / part_resamples + t_jackknife
    statement = (
        f"scipy at n = {m:,} is EXTRAPOLATED, not run: its {resamples:,} resamples are timed as {part_resamples} resamples"
        f" (method='percentile', batch={best_batch}) x {resamples / part_resamples:.2f}, plus its BCa jackknife timed"
        f" on the first {done:,} of {m:,} leave-one-out fits ({how}) x {m / done:.0f};"
        f" scipy's default call (batch=None) would build the {m:,} x {m - 1:,} jackknife array at once"
        f" ({m * (m - 1) * 8 / 1e9:.0f} GB of float64) and is not estimated"
    )
    print(f"  n = {m:,}: every descriptor {t_ours:6.2f} s; scipy estimated {t_scipy:7.1f} s"
          f" (resampling {t_resample * resamples / part_resamples:.1f} s + jackknife {t_jackknife:.1f} s);"
          f" {t_scipy / t_ours:5.1f}x faster; ours: {with_intervals(answers[-1])}\n    {statement}")
    record("6 BCa n=1e5", f"n = {m:.0e}, B = {resamples}: ours vs scipy batch={best_batch}, extrapolated", t_scipy / t_ours,
           "x", "", "times faster; scipy extrapolated, see the statement above")


# --- rows 2 and 3 --------------------------------------------------------------------------


def bench_order_statistics(size: str = "") -> None:
    """Row 2: every descriptor (medcouple included) against one np.sort; order statistics with
    and without the medcouple."""
    from statsmodels.stats import stattools
    from tailgauge.core import DescribeOptions, describe, from_array, lmoments, order_statistics, robust

    try:  # its own module since the medcouple's search filled robust.py
        from tailgauge.core.half_sample import half_sample_mode
    except ImportError:  # an older tree (--tree)
        half_sample_mode = robust.half_sample_mode

    rng = np.random.default_rng(20261204)
    sizes = (int(float(size)),) if size else ((100_000, 1_000_000) if QUICK else (1_000_000, 10_000_000))
    print("order statistics: every descriptor, and median/quantiles/IQR/MAD/octiles/L-moments/half-sample mode "
          "with and without the medcouple, against one np.sort")
    # Everything a default answer holds but the medcouple: its descriptors and its other members
    # (as many of them as the tree's options.descriptors accepts; the line says which).
    sample = describe(from_array(rng.lognormal(0.0, 0.6, 1000)), DescribeOptions(), kind="samples")
    scalars = [name for name in sample.descriptors if name != "medcouple"]
    members = [m for m in ("moments", "quantiles", "modes", "shape_estimators", "tail_contributions", "normality")
               if getattr(sample, m, None) not in (None, [], {}, ())]
    without: object | str = NA
    for names in (scalars + members, scalars + ["moments", "quantiles"], scalars):
        without = selecting(names)
        if not isinstance(without, str):
            left_out = sorted(set(members) - set(names))
            print("  without the medcouple: descriptors = every other descriptor"
                  + (f" + {', '.join(m for m in members if m in names)}" if set(members) & set(names) else "")
                  + (f" (not accepted by this tree, so also left out: {', '.join(left_out)})" if left_out else ""))
            break
    for n in sizes:
        rounds = 3 if n <= 1_000_000 else 2
        x = rng.lognormal(0.0, 0.6, n)
        try:
            from tailgauge.core.describe import ROBUST_PROBABILITIES
        except ImportError:
            ROBUST_PROBABILITIES = (0.125, 0.25, 0.375, 0.625, 0.75, 0.875)
        probabilities = np.concatenate(([0.25, 0.75], ROBUST_PROBABILITIES, DescribeOptions().probabilities))

        def order_without_medcouple():
            # The calls describe() makes for a raw sample's order statistics, in its order.
            data = from_array(x)
            median = order_statistics.median(data)  # sorts, once
            order_statistics.quantiles(data, probabilities, 7)  # quartiles, octiles, requested quantiles
            order_statistics.median_absolute_deviation(data, median)
            lmoments.sample_lmoments(data.sorted_values, None)
            half_sample_mode(data.sorted_values)
            return data, median

        def order_with_medcouple():
            data, median = order_without_medcouple()
            robust.medcouple(data.sorted_values, None, median)

        sides = {
            "np.sort": lambda: np.sort(x),
            "describe": lambda: describe(from_array(x), DescribeOptions(), kind="samples"),
            "describe without medcouple": without if isinstance(without, str)
            else (lambda: describe(from_array(x), without, kind="samples")),
            "order stats without medcouple": order_without_medcouple,
            "order stats with medcouple": order_with_medcouple,
        }
        result = alternate(sides, rounds)
        print(f"  n = {n:,}: {rounds} alternating rounds")
        print(result.show("np.sort"))
        print(result.show("describe", "np.sort", "describe, every descriptor", "<= 2.5x"))
        print(result.show("describe without medcouple", "np.sort", "describe, every descriptor but the medcouple"))
        print(result.show("order stats without medcouple", "np.sort"))
        print(result.show("order stats with medcouple", "np.sort"))
        record("2 every descriptor", f"describe of {n:.0e} values, medcouple included, vs np.sort",
               result.ratio("describe", "np.sort"), "x", "<= 2.5x")
        record("2 every descriptor", f"describe of {n:.0e} values, every descriptor but the medcouple, vs np.sort",
               result.ratio("describe without medcouple", "np.sort"), "x", "",
               result.failed.get("describe without medcouple", ""))
        record("2 every descriptor", f"order statistics of {n:.0e} without / with the medcouple, vs np.sort",
               result.ratio("order stats without medcouple", "np.sort"), "x", "",
               f"with it {result.ratio('order stats with medcouple', 'np.sort'):.2f}x"
               if result.times.get("order stats with medcouple") else result.failed.get("order stats with medcouple", ""))
    y = rng.lognormal(0.0, 0.6, 100_000)
    result = alternate({
        "ours": lambda: robust.medcouple(np.sort(y), None, float(np.median(y))),
        "statsmodels": lambda: stattools.medcouple(y, use_fast=True),
    }, 2)
    if result.times.get("ours") and result.times.get("statsmodels"):
        print(f"  medcouple n = 100,000: ours {result.best('ours'):6.3f} s; statsmodels use_fast=True"
              f" {result.best('statsmodels'):6.3f} s ({result.ratio('statsmodels', 'ours'):5.1f}x)")
    else:
        print(f"  medcouple n = 100,000: {result.failed}")


def bench_quantiles(size: str = "") -> None:
    """Row 3: nine quantiles of 1e7 values alone against np.quantile (method 'linear': type 7)."""
    from tailgauge.core import DEFAULT_PROBABILITIES, describe, from_array, order_statistics

    n = int(float(size)) if size else (1_000_000 if QUICK else 10_000_000)
    rounds = 3 if QUICK else 5
    x = np.random.default_rng(20261207).lognormal(0.0, 0.6, n)
    probabilities = np.asarray(DEFAULT_PROBABILITIES)
    only = selecting(["quantiles"])
    unsorted = getattr(order_statistics, "quantiles_unsorted", None)  # the selection path, where it exists
    sides = {
        "np.quantile": lambda: np.quantile(x, probabilities, method="linear"),
        "describe(quantiles)": only if isinstance(only, str) else (lambda: describe(from_array(x), only, kind="samples")),
        "order_statistics.quantiles": lambda: order_statistics.quantiles(from_array(x), probabilities, 7),
        "order_statistics.quantiles_unsorted": (lambda: unsorted(x, probabilities, 7)) if unsorted else NA,
    }
    if not isinstance(only, str):  # the same numbers, or the figure means nothing
        answer = describe(from_array(x), only, kind="samples")
        got = np.array([q.value for q in answer.quantiles])
        if not np.allclose(got, np.quantile(x, probabilities, method="linear"), rtol=1e-12, atol=0):
            raise AssertionError("describe's quantiles differ from np.quantile's type 7")
    result = alternate(sides, rounds)
    print(f"quantiles: {len(probabilities)} quantiles (type 7) of {n:.0e} values alone; {rounds} alternating rounds")
    print(result.show("np.quantile"))
    print(result.show("describe(quantiles)", "np.quantile", "describe, descriptors=['quantiles']", "<= 1.2x"))
    print(result.show("order_statistics.quantiles", "np.quantile", "order_statistics.quantiles (sorts)"))
    print(result.show("order_statistics.quantiles_unsorted", "np.quantile", "order_statistics.quantiles_unsorted"))
    record("3 quantiles", f"9 quantiles of {n:.0e} (describe, descriptors=['quantiles']) vs np.quantile",
           result.ratio("describe(quantiles)", "np.quantile"), "x", "<= 1.2x", result.failed.get("describe(quantiles)", ""))
    record("3 quantiles", f"9 quantiles of {n:.0e} on the sorted path vs np.quantile",
           result.ratio("order_statistics.quantiles", "np.quantile"), "x", "")
    record("3 quantiles", f"9 quantiles of {n:.0e} by selection (quantiles_unsorted) vs np.quantile",
           result.ratio("order_statistics.quantiles_unsorted", "np.quantile"), "x", "",
           result.failed.get("order_statistics.quantiles_unsorted", ""))


# --- existing: merge, transport, cost ------------------------------------------------------


def _merge_recipe_run(variant: str, n: int, chunks: int) -> None:
    """One variant of the recipe benchmark, in a fresh process; prints seconds and peak RSS growth."""
    import json

    import dask.array as da
    from tailgauge.core import (
        DescribeOptions,
        combine_sketches,
        describe_state,
        kll_sketch_bytes,
        merge_states,
        partial_state,
    )
    from tailgauge.recipes.dask_states import chunk_summaries

    # VmHWM of this process's own memory map. Not ru_maxrss: Linux carries that over from the
    # parent through fork and exec, so a child of a large benchmark process shows no growth.
    def high_water_kib() -> int:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1])
        raise RuntimeError("no VmHWM in /proc/self/status")

    baseline = high_water_kib()
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
    peak = high_water_kib()
    print(json.dumps({"seconds": elapsed, "peak_mb": (peak - baseline) / 1024}))


def bench_merge(size: str = "") -> None:
    """Merging 10,000 partial states; the Dask recipe against one in-memory computation."""
    import json
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

    result = alternate({"direct": lambda: partial_state(x), "tree": lambda: merge_states(states)}, 3 if QUICK else 5)
    t_direct, t_tree = result.best("direct"), result.best("tree")
    t_fold = best_of(fold, repeats=1)
    print(
        f"  10,000 states of 100 values: merge_states (checks + tree) {t_tree * 1e3:7.1f} ms;"
        f" one-by-one merge() {t_fold * 1e3:7.1f} ms ({t_fold / t_tree:4.1f}x);"
        f" partial_state of the 1e6 values themselves {t_direct * 1e3:6.1f} ms ({result.ratio('tree', 'direct'):4.2f}x)"
    )

    n, chunks = int(float(size or ("1e6" if QUICK else "1e8"))), 100
    results = {}
    for variant in ("dask", "memory"):
        code = f"import sys; sys.path.insert(0, {str(HERE)!r}); import run; run._merge_recipe_run({variant!r}, {n}, {chunks})"
        done = subprocess.run([sys.executable, "-c", code], cwd=TREE, capture_output=True, text=True, check=True)
        results[variant] = json.loads(done.stdout.strip().splitlines()[-1])
    dask_run, memory_run = results["dask"], results["memory"]
    print(
        f"  {n:.0e} values, {chunks} chunks (generate, state + KLL sketch per chunk, merge, describe):"
        f" dask threads {dask_run['seconds']:6.1f} s, peak RSS +{dask_run['peak_mb']:7.1f} MB;"
        f" in memory {memory_run['seconds']:6.1f} s, +{memory_run['peak_mb']:7.1f} MB;"
        f" time {dask_run['seconds'] / memory_run['seconds']:4.2f}x, memory"
        + (f" {memory_run['peak_mb'] / dask_run['peak_mb']:5.1f}x less" if dask_run["peak_mb"] > 0 else " (dask: no growth)")
    )


def bench_transport(size: str = "") -> None:
    """1e6 values through gunicorn by body format against in-process work (transport.py)."""
    import transport

    print("transport: round trip through gunicorn on loopback, alternating with the in-process computation")
    transport.main(int(float(size or ("1e5" if QUICK else "1e6"))), tree=TREE, repeats=3 if QUICK else 5)


def bench_cost() -> None:
    """The cost model beside measured peaks and times (cost.py, in a child process)."""
    import subprocess

    print("cost: the per-request plan beside measured memory and time")
    subprocess.run([sys.executable, str(HERE / "cost.py")] + (["--quick"] if QUICK else []), check=True, cwd=TREE)


def bench_gzip() -> None:
    """Compressed sizes, segments and times of the service's answers (compression.py)."""
    import compression

    print("gzip: the service's answers compressed at levels 1, 6, 9 (api/compression.py's threshold)")
    compression.main(QUICK)
def _http(name: str) -> Callable[[], None]:
    def section() -> None:
        import http_sections

        getattr(http_sections, name)(TREE, QUICK)

    section.__doc__ = None
    return section


SECTIONS: dict[str, tuple[Callable[..., None], str]] = {
    "small": (_http("bench_small"), "row 1: 100-value requests vs /health/live through gunicorn, 2 workers"),
    "order": (bench_order_statistics, "row 2: every descriptor vs np.sort; order statistics with/without medcouple"),
    "quantiles": (bench_quantiles, "row 3: 9 quantiles of 1e7 values alone vs np.quantile"),
    "moments": (bench_moments, "row 4: mean + variance + m3 + m4 of 1e7 vs np.sum"),
    "intervals": (bench_intervals, "rows 5, 6: count table k = 50; BCa n = 1e4 / 1e5 vs scipy.stats.bootstrap"),
    "balance": (_http("bench_balance"), "row 7: 8 connections opened at once against 2 workers"),
    "memory": (_http("bench_memory"), "row 8: 4 concurrent 2e6-value BCa requests in one worker: RSS"),
    "tables": (bench_tables, "k = 100,000 count tables and a 1,000-bin histogram vs expanding the data"),
    "merge": (bench_merge, "10,000 partial states; the Dask recipe (size: merge=1e8)"),
    "transport": (bench_transport, "1e6 values through gunicorn by body format (size: transport=1e6)"),
    "cost": (bench_cost, "the cost model beside measured memory and time"),
    "gzip": (bench_gzip, "answers compressed at levels 1, 6, 9: sizes, TCP segments, times"),
    "figures": (lambda size="": __import__("figures_section").bench_figures(QUICK, size), "a figure of 1e6 values, SVG and PNG, after describing them (size: figures=1e6)"),
    "histogram": (lambda: __import__("histogram_section").bench_histogram(TREE, QUICK), "200 exponential buckets described in process (histogram_section.py)"),
    "groups": (lambda size="": __import__("groups_bench").main(size, quick=QUICK), "1,000 x 1,000 and 10,000 x 100 groups"),
    "tails": (lambda size="": __import__("tail_sections").bench_tails(QUICK, size), "exceedances, tail means: added passes"),
}
SIZED = {"order", "quantiles", "moments", "merge", "transport", "figures", "tails"}


def summary() -> str:
    lines = ["| row | figure | measured | target |", "|---|---|---|---|"]
    for f in FIGURES:
        lines.append(f"| {f.row} | {f.figure} | {f.text()} | {f.target} |")
    return "\n".join(lines)


def parse(argv: list[str]) -> argparse.Namespace:
    listing = "\n".join(f"  {name:<10} {text}" for name, (_, text) in SECTIONS.items())
    parser = argparse.ArgumentParser(
        prog="run.py",
        description="Tailgauge benchmarks: ratios from alternating loops in one run, never assertions.",
        formatter_class=argparse.RawDescriptionHelpFormatter,
        epilog=f"sections (default: all, in this order; NAME=SIZE for {', '.join(sorted(SIZED))}):\n{listing}",
    )
    parser.add_argument("sections", nargs="*", metavar="SECTION[=SIZE]", help="sections to run (default: all)")
    parser.add_argument("--tree", type=Path, default=THIS_TREE,
                        help="source tree to measure: tailgauge is imported from TREE/service, and gunicorn runs "
                             "TREE/deploy/gunicorn.conf.py (default: this tree)")
    parser.add_argument("--quick", action="store_true", help="reduced sizes, rounds and durations (a smoke run)")
    parser.add_argument("--json", type=Path, metavar="PATH", help="write the summary's figures to PATH as JSON")
    arguments = parser.parse_args(argv)
    for token in arguments.sections:
        name, _, size = token.partition("=")
        if name not in SECTIONS:
            parser.error(f"unknown section {name!r}; sections: {', '.join(SECTIONS)}")
        if size and name not in SIZED:
            parser.error(f"section {name!r} takes no size")
    if not (arguments.tree / "service" / "tailgauge").is_dir():
        parser.error(f"{arguments.tree} has no service/tailgauge")
    return arguments


def main(argv: list[str]) -> None:
    global TREE, QUICK
    arguments = parse(argv)
    TREE, QUICK = arguments.tree.resolve(), arguments.quick
    # This process, its children (merge, cost) and the servers import tailgauge from the tree.
    sys.path.insert(0, str(TREE / "service"))
    os.environ["PYTHONPATH"] = os.pathsep.join(filter(None, [str(TREE / "service"), os.environ.get("PYTHONPATH")]))
    import tailgauge

    print(f"tree: {TREE} (tailgauge from {Path(tailgauge.__file__).parent}); quick: {QUICK}")
    print(f"OPENBLAS_NUM_THREADS={os.environ['OPENBLAS_NUM_THREADS']} (the service's setting, deploy/gunicorn.conf.py)")
    for token in arguments.sections or list(SECTIONS):
        name, _, size = token.partition("=")
        print(f"\n== {name} ==", flush=True)
        started = time.perf_counter()
        fn = SECTIONS[name][0]
        fn(size) if size else fn()
        print(f"  ({name}: {time.perf_counter() - started:.0f} s)", flush=True)
    print("\n== summary ==")
    print(summary())
    if arguments.json:
        import dataclasses
        import json

        arguments.json.write_text(json.dumps({
            "tree": str(TREE), "quick": QUICK, "sections": arguments.sections or list(SECTIONS),
            "figures": [dataclasses.asdict(f) for f in FIGURES],
        }, indent=2) + "\n")
        print(f"figures written to {arguments.json}")


if __name__ == "__main__":
    main(sys.argv[1:])
