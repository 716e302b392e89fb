"""Data and helpers shared by the comparison tests (tests/core/test_compare*.py); no tests here.

The mouse data: B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman &
Hall, 1993, ch. 2, Table 2.1 (days of survival after surgery; treatment 16 23 38 94 99 141 197;
control 10 27 31 40 46 50 52 104 146). The filling line is invented and seeded.
"""

from __future__ import annotations

import numpy as np
import pytest

from tailgauge.core import DescribeOptions, IntervalOptions, compare, from_array, from_table

# Efron & Tibshirani (1993), Table 2.1: days of survival after surgery.
MOUSE_TREATMENT = np.array([94, 197, 16, 38, 99, 141, 23], dtype=np.float64)
MOUSE_CONTROL = np.array([52, 104, 146, 10, 50, 31, 40, 27, 46], dtype=np.float64)

SAMPLES = ("samples", "samples")


def interval(method="percentile", resamples=2000, seed=11, level=0.95) -> DescribeOptions:
    return DescribeOptions(interval=IntervalOptions(method, level, resamples, seed))


def of_arrays(first, second, options=None):
    """compare() of two raw samples given as arrays."""
    return compare(
        from_array(np.asarray(first)),
        from_array(np.asarray(second)),
        options or DescribeOptions(),
        kinds=SAMPLES,
    )


def table(values, weights, *, probabilities=False):
    return from_table(np.asarray(values, dtype=np.float64), np.asarray(weights, dtype=np.float64),
                      probabilities=probabilities, normalise=False)


def codes(comparison, side="comparison") -> set[str]:
    """The codes of the comparison's own warnings, or of one input's (in its description)."""
    if side in ("first", "second"):
        return {note.code for note in getattr(comparison, side).warnings}
    return {note.code for note in comparison.warnings if note.side == side}


def warned(comparison, code: str) -> list:
    return [note for note in comparison.warnings if note.side == "comparison" and note.code == code]


def named(comparison, code: str) -> set[str]:
    return {name for note in warned(comparison, code) for name in note.descriptors}


@pytest.fixture(scope="module")
def two_samples():
    """A filling line's bag weights before and after a (fictional) nozzle change, in grams.

    A fixture: a test module imports it by name to use it."""
    rng = np.random.default_rng(20260301)
    before = np.round(rng.normal(250.0, 3.0, 80) + rng.exponential(1.0, 80), 3)
    after = np.round(rng.normal(251.0, 2.2, 65), 3)
    return before, after
