"""The endpoint bodies' own logic: a request's option set becomes the core's options in one place."""

from __future__ import annotations

import time

import pytest

from tailgauge.api import schemas
from tailgauge.api.endpoints import describe_options
from tailgauge.api.problems import json_path
from tailgauge.core import IntervalOptions, LimitExceeded
from tailgauge.settings import Settings

SETTINGS = Settings()


@pytest.mark.parametrize(
    ("options", "quantile_type", "sheppard"),
    [
        (schemas.SampleOptions(quantile_type=3), 3, False),
        (schemas.TableOptions(quantile_type=1), 1, False),
        (schemas.BinOptions(sheppard_correction=True), None, True),
        (schemas.ComparisonOptions(quantile_type=5, sheppard_correction=True), 5, True),
        (schemas.MergeOptions(), None, False),
    ],
)
def test_each_option_set_reaches_the_core_typed(options, quantile_type, sheppard):
    core = describe_options(options, SETTINGS)
    assert core.quantile_type == quantile_type
    assert core.sheppard_correction is sheppard
    assert core.interval is None
    assert core.probabilities == tuple(options.probabilities)
    assert core.moment_order == options.moment_order
    assert (core.modes_limit, core.contributions_limit) == (SETTINGS.max_modes_listed, SETTINGS.max_contributions_listed)


def test_shared_choices_and_the_interval_are_passed_through():
    options = schemas.TableOptions(
        convention="population",
        skewness_estimator="b1",
        kurtosis_estimator="G2",
        probabilities=[0.2, 0.8],
        moment_order=6,
        interval=schemas.IntervalRequest(method="basic", level=0.9, resamples=500, seed=11),
    )
    core = describe_options(options, SETTINGS)
    assert (core.convention, core.skewness_estimator, core.kurtosis_estimator) == ("population", "b1", "G2")
    assert core.probabilities == (0.2, 0.8) and core.moment_order == 6
    assert core.interval == IntervalOptions(method="basic", level=0.9, resamples=500, seed=11)


def test_an_interval_without_a_seed_draws_one_that_is_echoed():
    seeds = {
        describe_options(schemas.SampleOptions(interval=schemas.IntervalRequest()), SETTINGS).interval.seed
        for _ in range(5)
    }
    assert all(0 <= seed < 2**53 for seed in seeds)
    assert len(seeds) > 1


def test_server_limits_bound_the_deadline_and_the_memory_left_after_decoding():
    settings = Settings(max_request_seconds=7, max_request_memory_bytes=64 * 2**20, resample_threads=1)
    before = time.monotonic()
    core = describe_options(schemas.SampleOptions(), settings, decoding=2**20)
    assert before + 7 <= core.deadline <= time.monotonic() + 7
    assert core.max_memory_bytes == 63 * 2**20
    assert core.resample_threads == 1 and core.max_resample_work == float(settings.max_resample_work)


@pytest.mark.parametrize(
    ("options", "path"),
    [
        (schemas.SampleOptions(moment_order=9), "$.options.moment_order"),
        (schemas.MergeOptions(probabilities=[0.5] * 4), "$.options.probabilities"),
    ],
)
def test_options_beyond_this_servers_limits_are_located(options, path):
    settings = Settings(max_moment_order=8, max_probabilities=3)
    with pytest.raises(LimitExceeded) as raised:
        describe_options(options, settings)
    assert [json_path(location.path) for location in raised.value.locations] == [path]
