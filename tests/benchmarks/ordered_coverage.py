"""Coverage of the mean's intervals on AR(1) series (phi = 0.6 by default), through describe():
the stationary block bootstrap (options.order as_sent, block length chosen automatically) beside
the independent bootstrap, and the classical intervals (Student's t with the effective n, and
with n). A statistical study, not a timing benchmark, and never part of ``make test`` (the
small seeded run is tests/core/test_resample_blocks.py::test_coverage_of_the_mean_on_ar1_small_run).

Run: ``python tests/benchmarks/ordered_coverage.py [--series 400] [--n 200 1000 5000]
[--resamples 999] [--phi 0.6] [--seed 1]``. For each n it prints each interval's coverage of the
true mean 0, its binomial 99 % interval (Clopper-Pearson, scipy), whether 0.95 lies within it,
and the median width relative to the independent bootstrap's.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np
from scipy import stats

if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "service"))

from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array  # noqa: E402
from tailgauge.core.selection import choose  # noqa: E402


def ar1(phi: float, n: int, rng: np.random.Generator, burn: int = 200) -> np.ndarray:
    e = rng.standard_normal(n + burn)
    x = np.empty(n + burn)
    x[0] = e[0]
    for t in range(1, n + burn):
        x[t] = phi * x[t - 1] + e[t]
    return x[burn:]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--series", type=int, default=400)
    parser.add_argument("--n", type=int, nargs="+", default=[200, 1000, 5000])
    parser.add_argument("--resamples", type=int, default=999)
    parser.add_argument("--phi", type=float, default=0.6)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    selection = choose(["mean"])
    print(f"AR(1) phi = {args.phi}, {args.series} series per n, {args.resamples} resamples, level 0.95")
    for n in args.n:
        started = time.perf_counter()
        hits: dict[str, int] = {}
        widths: dict[str, list[float]] = {}
        lengths = []
        for index in range(args.series):
            data = from_array(ar1(args.phi, n, rng))
            for label, order in (("stationary bootstrap", "as_sent"), ("independent bootstrap", "exchangeable")):
                options = DescribeOptions(
                    interval=IntervalOptions(method="percentile", resamples=args.resamples, seed=index),
                    order=order, descriptors=selection, resample_threads=1,
                )
                description = describe(data, options, kind="samples")
                mean = description.descriptors["mean"]
                classical = "t with effective n" if order == "as_sent" else "t with n"
                if order == "as_sent":
                    lengths.append(description.resampling.block_length)
                for name, interval in ((label, mean.interval), (classical, mean.classical_interval)):
                    if interval is None:
                        continue
                    hits[name] = hits.get(name, 0) + int(interval.low <= 0.0 <= interval.high)
                    widths.setdefault(name, []).append(interval.high - interval.low)
        seconds = time.perf_counter() - started
        base = float(np.median(widths["independent bootstrap"]))
        print(f"\nn = {n}: median block length {np.median(lengths):.3g} ({seconds:.0f} s)")
        for name in ("stationary bootstrap", "independent bootstrap", "t with effective n", "t with n"):
            count = hits.get(name, 0)
            total = len(widths.get(name, []))
            if not total:
                continue
            low, high = stats.binomtest(count, total).proportion_ci(0.99, method="exact")
            within = "yes" if low <= 0.95 <= high else "no"
            print(
                f"  {name:22s} coverage {count / total:.3f} ({count}/{total}), 99 % binomial "
                f"[{low:.3f}, {high:.3f}], 0.95 within: {within}; median width x{np.median(widths[name]) / base:.2f}"
            )


if __name__ == "__main__":
    main()
