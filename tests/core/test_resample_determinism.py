"""The bootstrap engine (tailgauge.core.resample) is exactly reproducible: the same seed gives the
same intervals bit for bit whatever the number of threads or the process, and data scaled by a
power of two give intervals and standard errors scaled exactly.

No outside numbers: the references are the engine itself (another run, other thread counts, a
separate Python process running the same text) and exact float64 scaling. Every random generator
is seeded; nothing here depends on timing.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pytest

from tailgauge.core import IntervalOptions, from_array
from tailgauge.core import resample
from tailgauge.core.resample.draws import POISSON_DRAWS, TOPPED_UP_BATCH_ELEMENTS, BATCH_ELEMENTS
from tests.core.resample_cases import run

REPO = Path(__file__).resolve().parents[2]


# ----------------------------------------------------------------------------------------------
# Reproducibility: same seed, bit for bit, whatever the threads or the process
# ----------------------------------------------------------------------------------------------

FINGERPRINT_SCRIPT = """
import numpy as np
from tailgauge.core import DescribeOptions, IntervalOptions, describe, from_array

def fingerprint(method):
    x = np.random.default_rng(31337).gamma(3.0, 2.0, 600)
    d = describe(
        from_array(x),
        DescribeOptions(interval=IntervalOptions(method, 0.9, 4000, 271828)),
        kind="samples",
    )
    out = []
    for name, item in sorted(d.descriptors.items()):
        iv = item.interval
        out.append([name, None if iv is None else [iv.low.hex(), iv.high.hex(), iv.method],
                    None if item.standard_error is None else item.standard_error.hex()])
    for q in d.quantiles:
        out.append([q.probability, q.interval.low.hex(), q.interval.high.hex(), q.standard_error.hex()])
    return out
"""


def _fingerprint_here(method: str):
    namespace: dict = {}
    exec(FINGERPRINT_SCRIPT, namespace)  # the very text the subprocess runs
    return namespace["fingerprint"](method)


def _outcome_bits(outcome: resample.BootstrapOutcome):
    bits = []
    for name, result in sorted(outcome.results.items()):
        iv = result.interval
        bits.append((name, iv.low.hex(), iv.high.hex(), iv.method, result.standard_error.hex()))
    for result in outcome.quantiles:
        bits.append((result.interval.low.hex(), result.interval.high.hex(), result.standard_error.hex()))
    return bits


@pytest.mark.parametrize(("method", "n", "resamples"), [("bca", 600, 4000), ("percentile", 600, 4000), ("bca", 3000, 2400)])
def test_same_seed_same_intervals_bit_for_bit_across_runs_and_threads(method, n, resamples):
    # n = 3000 draws its counts as Poisson counts topped up to n; 600, directly.
    x = np.random.default_rng(31337).gamma(3.0, 2.0, n)
    _, args, kwargs, first = run(from_array(x), method=method, resamples=resamples, seed=271828, level=0.9)
    # The weights exceed one batch, so threads really split the work.
    topped_up = n >= POISSON_DRAWS
    assert resamples * n > (TOPPED_UP_BATCH_ELEMENTS if topped_up else BATCH_ELEMENTS)
    outcomes = []
    for threads in (1, 2, 3):
        outcomes.append(resample.bootstrap(*args, **{**kwargs, "threads": threads}))
    reference = _outcome_bits(first)
    assert len(reference) == len(first.results) + len(first.quantiles) > 10
    for outcome in outcomes:
        assert _outcome_bits(outcome) == reference
    # A different seed gives different intervals (the seed is really used).
    other = resample.bootstrap(*args, **{**kwargs, "options": IntervalOptions(method, 0.9, 4000, 271829)})
    assert _outcome_bits(other) != reference


def test_same_seed_same_intervals_bit_for_bit_in_a_separate_process():
    here = _fingerprint_here("bca")
    assert here == _fingerprint_here("bca")
    script = FINGERPRINT_SCRIPT + "\nimport json\nprint(json.dumps(fingerprint('bca')))\n"
    completed = subprocess.run(
        [sys.executable, "-c", script], cwd=REPO, capture_output=True, text=True, check=True, timeout=300
    )
    there = json.loads(completed.stdout)
    assert there == json.loads(json.dumps(here))


# Powers of two scale every float exactly, so the same seed must give the same resamples and
# intervals scaled by 2**k (power 0 for the scale-free descriptors, 2 for the variance).
SCALE_POWER = {
    "variance": 2,
    **dict.fromkeys(
        ("skewness", "kurtosis", "excess_kurtosis", "coefficient_of_variation", "quartile_skewness", "octile_kurtosis",
         "octile_excess_kurtosis", "mean_median_gap", "medcouple", "l_skewness", "l_kurtosis", "upper_tail_index"),
        0,
    ),
}


@pytest.mark.parametrize("k", [10, -10, 400, -400, 1000, -1000])
def test_intervals_are_equivariant_under_power_of_two_scaling(k):
    """The core computes moments in exactly scaled units so that any finite input works
    (service/tailgauge/core/moments.py); intervals, standard errors and the BCa choice must follow.
    Data of magnitude 2**400 (about 1e120) are ordinary float64 numbers."""
    x = np.random.default_rng(1).normal(1.0, 0.1, 30)
    options = {"method": "bca", "resamples": 500, "seed": 3}
    base, *_ = run(from_array(x), **options)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the results are what is checked here
        scaled, *_ = run(from_array(np.ldexp(x, k)), **options)
    mismatched = {}
    for name in resample.INTERVAL_DESCRIPTORS:
        power = SCALE_POWER.get(name, 1)
        if base.descriptors[name].value is None:  # Hill's index needs 50 observations, not 30
            assert name == "upper_tail_index", name
            continue
        if scaled.descriptors[name].value is None:  # 2**(2k) not representable: no variance
            assert name == "variance" and abs(k) == 1000, name
            continue
        want, got = base.descriptors[name], scaled.descriptors[name]
        expected = (
            math.ldexp(want.interval.low, k * power),
            math.ldexp(want.interval.high, k * power),
            want.interval.method,
            math.ldexp(want.standard_error, k * power),
        )
        actual = None if got.interval is None else (got.interval.low, got.interval.high, got.interval.method,
                                                    got.standard_error)
        if actual is None or actual[2] != expected[2] or actual[3] is None or not (
            np.allclose(actual[:2], expected[:2], rtol=1e-12, atol=0.0)
            and math.isclose(actual[3], expected[3], rel_tol=1e-12)
        ):
            mismatched[name] = {"expected": expected, "got": actual}
    assert mismatched == {}, k
