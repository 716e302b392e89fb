"""The cost model (service/tailgauge/core/cost.py) and the stages it bounds.

* Memory: the model's peak is an upper bound of the peak tracemalloc measures while the
  request computes (tracemalloc counts numpy's buffers; the normalised input, alive before the
  trace starts, is in the model but not in the measurement, so the bound is a little loose).
* Advice: a refused request names a count that fits, and that count is admitted when resent.
* Parts: statistics evaluated a part of the rows at a time equal the whole, bit for bit.
* Deadline: a request admitted past the model still stops inside its stages.
"""

from __future__ import annotations

import dataclasses
import re
import time
import tracemalloc

import numpy as np
import pytest

from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    LimitExceeded,
    WeightMeaning,
    admit,
    compare,
    describe,
    from_bins,
    from_samples,
    from_table,
)
from tailgauge.core import cost, resample
from tailgauge.core.resample import little
from tailgauge.core.resample.rows import LeaveOneOut
from tailgauge.core.resample.statistics import Statistics

RNG_SEED = 20261204


def _inputs():
    rng = np.random.default_rng(RNG_SEED)
    return {
        "samples": (from_samples(rng.normal(size=6000), omit_missing=False), "samples"),
        "ties": (from_samples(rng.integers(0, 60, 50_000).astype(float), omit_missing=False), "samples"),
        "table": (
            from_table(np.arange(800.0), rng.integers(1, 30, 800).astype(float), probabilities=False, normalise=False),
            "table",
        ),
        "bins": (from_bins(list(np.linspace(0.0, 1.0, 601)), list(rng.integers(0, 20, 600).astype(float))), "bins"),
        "reliability": (
            from_samples(
                rng.normal(size=3000), omit_missing=False, weights=rng.uniform(0.2, 3.0, 3000),
                meaning=WeightMeaning.RELIABILITY,
            ),
            "samples",
        ),
    }


INPUTS = _inputs()


def _options(q: int, method: str | None, resamples: int, **extra) -> DescribeOptions:
    interval = None if method is None else IntervalOptions(method=method, resamples=resamples, seed=7)
    return DescribeOptions(
        interval=interval, probabilities=tuple(np.linspace(0.005, 0.995, q)), max_resample_work=1e13, **extra
    )


def _traced_peak(compute) -> int:
    """The tracemalloc peak of ``compute()``."""
    tracemalloc.start()
    try:
        compute()
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


@pytest.mark.parametrize("name", sorted(INPUTS))
@pytest.mark.parametrize(("q", "method", "resamples"), [(9, None, 0), (9, "percentile", 600), (300, "bca", 300)])
def test_model_bounds_the_measured_peak(name, q, method, resamples):
    data, kind = INPUTS[name]
    options = _options(q, method, resamples)
    estimate = admit([data], options)
    peak = _traced_peak(lambda: describe(data, dataclasses.replace(options, admitted=True), kind=kind))
    assert peak <= estimate.peak_bytes, (name, q, method, peak, estimate)


def test_model_bounds_the_little_bootstraps_peak():
    data, kind = INPUTS["samples"]
    options = _options(50, "percentile", 400, subset_rows=1000)
    estimate = admit([data], options)
    assert any(stage.name == "bag of little bootstraps" for stage in estimate.stages)
    peak = _traced_peak(lambda: describe(data, dataclasses.replace(options, admitted=True), kind=kind))
    assert peak <= estimate.peak_bytes


def test_model_bounds_a_comparison_peak():
    (first, _), (second, _) = INPUTS["samples"], INPUTS["table"]
    options = _options(100, "bca", 300)
    estimate = admit([first, second], options)
    admitted = dataclasses.replace(options, admitted=True)
    peak = _traced_peak(lambda: compare(first, second, admitted, kinds=("samples", "table")))
    assert peak <= estimate.peak_bytes


def _advice(error: LimitExceeded) -> tuple[str, int]:
    location = error.locations[0]
    found = re.search(r"at most (\d+)", location.message)
    assert found, error.detail
    return location.path, int(found.group(1))


@pytest.mark.parametrize("name", sorted(INPUTS))
def test_resample_advice_is_admitted_when_resent(name):
    data, _ = INPUTS[name]
    wanted = _options(200, "bca", 50_000)
    needed = admit([data], wanted).peak_bytes
    limited = dataclasses.replace(wanted, max_memory_bytes=needed * 0.6)
    with pytest.raises(LimitExceeded) as refused:
        admit([data], limited)
    path, allowed = _advice(refused.value)
    assert path == "options.interval.resamples"
    assert 100 <= allowed < 50_000
    resent = dataclasses.replace(limited, interval=dataclasses.replace(limited.interval, resamples=allowed))
    assert admit([data], resent).peak_bytes <= limited.max_memory_bytes
    # One more would not fit: the advice is the largest count.
    more = dataclasses.replace(limited, interval=dataclasses.replace(limited.interval, resamples=allowed + 1))
    with pytest.raises(LimitExceeded):
        admit([data], more)


def test_little_bootstrap_advice_is_a_whole_number_of_subsets():
    data, _ = INPUTS["samples"]
    wanted = _options(9, "percentile", 38_830, subset_rows=1000)
    seconds = admit([data], wanted).seconds
    limited = dataclasses.replace(wanted, deadline=time.monotonic() + seconds * 0.5)
    with pytest.raises(LimitExceeded) as refused:
        admit([data], limited)
    _, allowed = _advice(refused.value)
    assert allowed % resample.SUBSETS == 0
    resent = dataclasses.replace(limited, interval=dataclasses.replace(limited.interval, resamples=allowed))
    admit([data], resent)


def test_budget_advice_of_little_bootstraps_is_accepted():
    """Regression: the budget's advice (work // m) was refused when resent, since little
    bootstraps round resamples up to a multiple of 20."""
    data, kind = INPUTS["samples"]
    options = _options(9, "percentile", 2000, subset_rows=1000)
    m = cost.shape_of(data, 1000).subset_rows
    budget = dataclasses.replace(options, max_resample_work=float(m * 1949 + 5))
    with pytest.raises(LimitExceeded) as refused:
        describe(data, budget, kind=kind)
    _, allowed = _advice(refused.value)
    assert allowed % resample.SUBSETS == 0
    resent = dataclasses.replace(budget, interval=dataclasses.replace(budget.interval, resamples=allowed))
    assert describe(data, resent, kind=kind).resampling.resamples == allowed


def test_probability_and_method_advice():
    data, _ = INPUTS["samples"]
    # BCa's jackknife keeps every quantile of every leave-one-out row: with too little memory
    # for it even at 100 resamples, fewer probabilities are advised, and they fit.
    wanted = _options(1000, "bca", 100)
    jackknife = next(s for s in admit([data], wanted).stages if s.name == "jackknife")
    limited = dataclasses.replace(wanted, max_memory_bytes=jackknife.bytes * 0.5)
    with pytest.raises(LimitExceeded) as refused:
        admit([data], limited)
    path, allowed = _advice(refused.value)
    assert path == "options.probabilities" and 0 < allowed < 1000
    admit([data], dataclasses.replace(limited, probabilities=limited.probabilities[:allowed]))


def test_values_beyond_any_plan_are_refused_naming_the_input():
    data, _ = INPUTS["samples"]
    with pytest.raises(LimitExceeded) as refused:
        admit([data], dataclasses.replace(_options(9, None, 0), max_memory_bytes=1e5))
    assert refused.value.locations[0].path == ""  # the input as a whole (logical name)
    assert "fewer values" in refused.value.detail


@pytest.mark.parametrize("name", sorted(INPUTS))
def test_statistics_in_parts_equal_the_whole(name, monkeypatch):
    data, kind = INPUTS[name]
    options = dataclasses.replace(_options(40, "bca", 400), admitted=True)
    whole = describe(data, options, kind=kind)
    monkeypatch.setattr(resample, "EVALUATION_PART_BYTES", 4096)
    parts = describe(data, options, kind=kind)
    assert parts.descriptors == whole.descriptors
    assert parts.quantiles == whole.quantiles


def test_little_bootstraps_in_batches_draw_the_same_resamples(monkeypatch):
    data, kind = INPUTS["samples"]
    options = dataclasses.replace(_options(20, "percentile", 400, subset_rows=1000), admitted=True)
    whole = describe(data, options, kind=kind)
    monkeypatch.setattr(little, "BATCH_ELEMENTS", 500)  # the batch bound the little bootstraps read
    batched = describe(data, options, kind=kind)
    for name, descriptor in whole.descriptors.items():
        other = batched.descriptors[name]
        if descriptor.interval is None:
            assert other.interval is None
            continue
        # Same draws; only the matrix products of smaller batches may round differently.
        assert other.interval.low == pytest.approx(descriptor.interval.low, rel=1e-12, abs=1e-300)
        assert other.interval.high == pytest.approx(descriptor.interval.high, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("stage", ["bootstrap", "jackknife"])
def test_deadline_stops_a_stage_the_model_let_through(stage, monkeypatch):
    """The model is the first line; the clock inside each stage is the second."""
    data, kind = INPUTS["samples"]
    options = dataclasses.replace(_options(200, "bca", 3000), admitted=True, deadline=time.monotonic() + 3600)
    if stage == "bootstrap":
        options = dataclasses.replace(options, deadline=time.monotonic() - 1.0)
        with pytest.raises(LimitExceeded, match="time limit"):
            resample.bootstrap(
                data, __import__("tailgauge.core.moments", fromlist=["central_sums"]).central_sums(data.values, None, 4),
                {}, [], np.array([0.5]), families=("G1", "G2"), quantile_type=7, factor_rule="sample",
                options=options.interval, max_work=1e13, deadline=options.deadline, threads=1,
            )
        return
    # The jackknife: the clock passes between the bootstrap and the jackknife's first part.
    real = Statistics.evaluate
    calls = []

    def evaluate(self, view, probabilities, names, deadline=None):
        calls.append(type(view).__name__)
        if isinstance(view, LeaveOneOut):
            deadline = time.monotonic() - 1.0
        return real(self, view, probabilities, names, deadline)

    monkeypatch.setattr(Statistics, "evaluate", evaluate)
    with pytest.raises(LimitExceeded, match="time limit"):
        describe(data, options, kind=kind)
    assert calls[-1] == "LeaveOneOut"
