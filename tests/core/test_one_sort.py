"""One sort serves every order statistic: median, quantiles, IQR, MAD, robust shape, L-moments, medcouple."""

import traceback

import numpy as np
import pytest

from service.core import DescribeOptions, describe, from_array, from_table

SORTING = ("sort", "argsort", "lexsort", "unique", "msort")


@pytest.fixture
def sort_calls(monkeypatch):
    calls = []
    for name in SORTING:
        original = getattr(np, name, None)
        if original is None:
            continue

        def counting(*args, _original=original, _name=name, **kwargs):
            caller = traceback.extract_stack(limit=3)[0]
            calls.append((_name, f"{caller.filename.rsplit('/', 1)[-1]}:{caller.lineno}"))
            return _original(*args, **kwargs)

        monkeypatch.setattr(np, name, counting)
    return calls


def test_a_raw_sample_is_sorted_once(sort_calls):
    x = np.random.default_rng(1).lognormal(0, 1, 5_000)
    describe(from_array(x), DescribeOptions(), kind="samples")
    assert len(sort_calls) == 1, sort_calls


def test_a_count_table_is_sorted_once(sort_calls):
    rng = np.random.default_rng(2)
    values = rng.normal(0, 1, 300)
    counts = rng.integers(1, 9, 300).astype(float)
    describe(from_table(values, counts, probabilities=False, normalise=False), DescribeOptions(), kind="table")
    assert len(sort_calls) == 1, sort_calls


def test_the_counter_sees_sorts(sort_calls):
    np.sort(np.arange(3))
    assert sort_calls and sort_calls[0][0] == "sort"
