"""describe() with an interval request, recording what it passed to the bootstrap engine: the
helpers shared by the tests of tailgauge.core.resample (tests/core/test_resample*.py)."""

from __future__ import annotations

import contextlib

from tailgauge.core import DescribeOptions, IntervalOptions, describe
from tailgauge.core import resample


@contextlib.contextmanager
def captured_bootstrap():
    """Record the arguments ``describe`` passes to ``resample.bootstrap`` and what it returned.

    ``describe`` looks the engine up on the module at call time, so a wrapper installed here sees
    exactly the plan sums, families, quantile type and factor rule that ``describe`` chose.
    """
    calls: list[tuple[tuple, dict, resample.BootstrapOutcome]] = []
    original = resample.bootstrap

    def spy(*args, **kwargs):
        outcome = original(*args, **kwargs)
        calls.append((args, kwargs, outcome))
        return outcome

    resample.bootstrap = spy
    try:
        yield calls
    finally:
        resample.bootstrap = original


def run(data, *, kind="samples", method="bca", level=0.95, resamples=999, seed=1, **options):
    """``describe`` with an interval request; returns (description, args, kwargs, outcome)."""
    interval = IntervalOptions(method=method, level=level, resamples=resamples, seed=seed)
    with captured_bootstrap() as calls:
        description = describe(data, DescribeOptions(interval=interval, **options), kind=kind)
    assert len(calls) == 1
    args, kwargs, outcome = calls[0]
    return description, args, kwargs, outcome
