"""The cost model beside what it models: measured peak memory (tracemalloc) and time of describe
and compare on a grid of sizes, with the model's figures and their ratios.

Run: ``python tests/benchmarks/cost.py`` (``make bench`` runs it). A memory ratio (measured /
model) above 1 is a model that under-counts: fix the model. Time ratios show how well the
per-element costs in service/tailgauge/core/cost.py fit this machine (the wall-clock deadline inside
the stages covers a slower one). Timed without tracemalloc (it slows allocations); memory
in a second, traced run.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

# This tree's package, unless the caller chose one through PYTHONPATH (run.py --tree does).
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "service"))

from tailgauge.core import DescribeOptions, IntervalOptions, admit, describe, from_bins, from_samples, from_table  # noqa: E402


def _inputs(rng: np.random.Generator):
    yield "samples n=2e5", lambda: from_samples(rng.normal(size=200_000), omit_missing=False), "samples"
    yield "samples n=2e4", lambda: from_samples(rng.normal(size=20_000), omit_missing=False), "samples"
    yield "samples ties n=1e6 k=1000", lambda: from_samples(
        rng.integers(0, 1000, 1_000_000).astype(float), omit_missing=False
    ), "samples"
    yield "table k=5000", lambda: from_table(
        np.arange(5000.0), rng.integers(1, 40, 5000).astype(float), probabilities=False, normalise=False
    ), "table"
    yield "bins k=2000", lambda: from_bins(list(np.linspace(0, 1, 2001)), list(rng.integers(0, 30, 2000).astype(float))), "bins"
    yield "samples reliability n=2e4", lambda: from_samples(
        rng.normal(size=20_000), omit_missing=False, weights=rng.uniform(0.1, 2, 20_000), meaning=__import__(
            "tailgauge.core", fromlist=["WeightMeaning"]).WeightMeaning.RELIABILITY
    ), "samples"
    # Small supports, where the medcouple is resampled (resample.budget.medcouple_fits): a table
    # of 100 outcomes (few medians among the resamples) and 150 distinct values (hundreds).
    yield "table k=100 (medcouple)", lambda: from_table(
        np.arange(100.0), rng.integers(1, 400, 100).astype(float), probabilities=False, normalise=False
    ), "table"
    yield "samples n=150 (medcouple)", lambda: from_samples(rng.gamma(2.0, 1.0, 150), omit_missing=False), "samples"


def _series_inputs(rng: np.random.Generator):
    """Series sent with options.order as_sent: autocovariances, block draws (no jackknife)."""
    def walkish(n: int) -> np.ndarray:
        x = np.empty(n)
        x[0] = 0.0
        noise = rng.standard_normal(n)
        for t in range(1, n):
            x[t] = 0.6 * x[t - 1] + noise[t]
        return x

    yield "series n=2e4 (as_sent)", lambda: from_samples(walkish(20_000), omit_missing=False), "samples", {"order": "as_sent"}
    yield "series ties n=2e5 k~60", lambda: from_samples(
        np.round(walkish(200_000) * 6.0), omit_missing=False
    ), "samples", {"order": "as_sent"}


def _run(data, kind, options, traced: bool):
    if traced:
        tracemalloc.start()
    started = time.perf_counter()
    describe(data, options, kind=kind)
    seconds = time.perf_counter() - started
    peak = 0
    if traced:
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    return seconds, peak


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="fewer cases")
    arguments = parser.parse_args()
    rng = np.random.default_rng(5)
    plans = [(9, None, 0), (9, "percentile", 2000), (9, "bca", 2000), (200, "bca", 500), (1000, "bca", 200)]
    if arguments.quick:
        plans = plans[:3]
    print(f"{'input':28} {'q':>5} {'method':>10} {'B':>6} {'model MiB':>10} {'meas MiB':>9} {'ratio':>6} "
          f"{'model s':>8} {'meas s':>8} {'ratio':>6}")
    worst = 0.0
    cases = [(*case, {}) for case in _inputs(rng)] + list(_series_inputs(rng))
    for label, make, kind, extra in cases:
        data = make()
        for q, method, resamples in plans:
            interval = None if method is None else IntervalOptions(method=method, resamples=resamples, seed=1)
            options = DescribeOptions(
                interval=interval, probabilities=tuple(np.linspace(0.001, 0.999, q)), max_resample_work=1e13,
                admitted=True, **extra,
            )
            estimate = admit([data], DescribeOptions(**{**options.__dict__, "admitted": False}))
            seconds, _ = _run(data, kind, options, traced=False)
            _, peak = _run(data, kind, options, traced=True)
            # The model counts the normalised input (alive before the traced run started) too.
            modelled = estimate.peak_bytes
            ratio = peak / modelled
            worst = max(worst, ratio)
            print(f"{label:28} {q:5d} {str(method):>10} {resamples:6d} {modelled / 2**20:10.1f} {peak / 2**20:9.1f} "
                  f"{ratio:6.2f} {estimate.seconds:8.3f} {seconds:8.3f} {seconds / estimate.seconds:6.2f}")
    print(f"largest measured/model memory ratio: {worst:.2f} (must stay below 1)")


if __name__ == "__main__":
    main()
