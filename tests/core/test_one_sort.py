"""One sort serves all order statistics.

``describe`` without intervals must sort the data at most once: quantiles, median, IQR, MAD,
quartile skewness, octile kurtosis, medcouple, half-sample mode and L-moments all read the one
sorted copy (``WeightedData.sorted_values`` for a raw sample, ``WeightedData.support`` for a
table). ``np.sort``, ``np.argsort``, ``np.lexsort`` and ``np.unique`` are replaced by counting
wrappers that record who called them. The in-place method ``ndarray.sort`` cannot be patched, so
the source is also scanned for it, and the results computed under the wrappers are checked
against numpy's own order statistics (numpy 2.4) computed before patching.

Selection (``np.partition``, linear time) is recorded for the report but not counted as a sort.
"""

from __future__ import annotations

import functools
import re
import traceback
from pathlib import Path

import numpy as np
import pytest

import tailgauge
from tailgauge.core import DescribeOptions, describe, from_array, from_table

SORTS = ("sort", "argsort", "lexsort", "unique")
SELECTIONS = ("partition", "argpartition")
CORE = Path(tailgauge.__file__).resolve().parent / "core"


class Recorder:
    def __init__(self) -> None:
        self.sorts: list[str] = []
        self.selections: list[str] = []

    def wrap(self, name: str, function, log: list[str]):
        @functools.wraps(function)
        def counting(*args, **kwargs):
            stack = traceback.extract_stack()[:-1]
            service = [f for f in stack if "/service/" in f.filename.replace("\\", "/")]
            where = " <- ".join(
                f"{Path(f.filename).parent.name}/{Path(f.filename).name}:{f.lineno} {f.name}"
                for f in reversed(service[-3:])
            ) or f"{stack[-1].filename}:{stack[-1].lineno}"
            size = np.shape(args[0]) if args else None
            log.append(f"np.{name} (input shape {size}) called from {where}")
            return function(*args, **kwargs)

        return counting


@pytest.fixture
def recorder(monkeypatch) -> Recorder:
    record = Recorder()
    for name in SORTS:
        monkeypatch.setattr(np, name, record.wrap(name, getattr(np, name), record.sorts))
    for name in SELECTIONS:
        monkeypatch.setattr(np, name, record.wrap(name, getattr(np, name), record.selections))
    return record


def _report(record: Recorder) -> str:
    lines = [f"{len(record.sorts)} sort-type calls:"] + [f"  {c}" for c in record.sorts]
    lines += [f"(selections, not counted: {len(record.selections)})"] + [f"  {c}" for c in record.selections]
    return "\n".join(lines)


def _sample() -> np.ndarray:
    return np.random.default_rng(2718).normal(50.0, 10.0, size=2001)


def _table() -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(3141)
    values = rng.permutation(np.unique(np.round(rng.normal(size=300), 1)))  # unsorted rows
    counts = rng.integers(1, 500, size=values.size).astype(np.float64)
    return values, counts


def _expected_order_statistics(x: np.ndarray) -> dict[str, float]:
    """numpy 2.4's own values (computed before the wrappers are installed)."""
    q1, q3 = np.quantile(x, [0.25, 0.75], method="linear")
    median = float(np.median(x))
    return {
        "median": median,
        "minimum": float(np.min(x)),
        "maximum": float(np.max(x)),
        "interquartile_range": float(q3 - q1),
        "median_absolute_deviation": float(np.median(np.abs(x - median))),
    }


# numpy's reference values, computed at import, before any wrapper is installed.
SAMPLE = _sample()
TABLE_VALUES, TABLE_COUNTS = _table()
EXPECTED_SAMPLE = _expected_order_statistics(SAMPLE)
EXPECTED_TABLE = _expected_order_statistics(np.repeat(TABLE_VALUES, TABLE_COUNTS.astype(np.int64)))


def _check_results(result, expected: dict[str, float]) -> None:
    for name, value in expected.items():
        assert result.descriptors[name].value == pytest.approx(value, rel=1e-12, abs=1e-12), name
    robust = (
        "quartile_skewness", "octile_kurtosis", "medcouple", "half_sample_mode", "l_skewness", "l_kurtosis",
    )
    for name in robust:
        assert result.descriptors[name].value is not None, name


def test_a_raw_sample_is_sorted_at_most_once(recorder):
    result = describe(from_array(SAMPLE), DescribeOptions(), kind="samples")
    sorts = list(recorder.sorts)
    _check_results(result, EXPECTED_SAMPLE)
    assert len(sorts) <= 1, _report(recorder)


def test_a_count_table_is_sorted_at_most_once(recorder):
    data = from_table(TABLE_VALUES, TABLE_COUNTS, probabilities=False, normalise=False)
    result = describe(data, DescribeOptions(), kind="table")
    sorts = list(recorder.sorts)
    _check_results(result, EXPECTED_TABLE)
    assert len(sorts) <= 1, _report(recorder)


def test_the_wrappers_see_a_sort(recorder):
    """The counting is live: the one data sort itself is recorded (the test above cannot pass vacuously)."""
    data = from_array(SAMPLE)
    _ = data.sorted_values
    assert len(recorder.sorts) == 1 and "sorted_values" in recorder.sorts[0], _report(recorder)


def test_no_in_place_ndarray_sort_in_the_core():
    """``ndarray.sort`` (and its relatives) cannot be wrapped: make sure the core never calls them."""
    offenders = []
    for path in sorted(CORE.glob("*.py")):
        for number, line in enumerate(path.read_text().splitlines(), start=1):
            code = line.split("#", 1)[0]
            # A method call on an array (x.sort(), x.argsort(), ...), not the wrapped np.sort(x).
            if re.search(r"(?<!np)\.(?:sort|argsort|partition|argpartition)\(", code):
                offenders.append(f"{path.name}:{number}: {line.strip()}")
    assert not offenders, offenders


def test_the_tail_members_read_the_one_sort(recorder):
    """Exceedances and tail means read the sorted support (core/describe/tails.py, READS_SORTED):
    with them the order statistics come from that one sort too, not from a selection beside it."""
    from tailgauge.core import choose

    options = DescribeOptions(descriptors=choose(["quantiles", "exceedances", "tail_means"]), thresholds=(50.0,),
                              tail_levels=(0.9,))
    result = describe(from_array(SAMPLE), options, kind="samples")
    assert len(recorder.sorts) == 1 and not recorder.selections, _report(recorder)
    assert result.exceedances[0].count_above == int(np.sum(SAMPLE > 50.0))
