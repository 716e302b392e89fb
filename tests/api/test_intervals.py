"""HTTP contract of options.interval on every descriptor endpoint.

With ``options.interval`` each scalar descriptor and each quantile carries ``interval``
({low, high, level, method}), ``standard_error`` and ``classical_interval``, and the body has a
top-level ``resampling`` member echoing method, level, resamples, seed and scheme; without it
those fields are null. Errors are problem+json naming the offending field.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app
from tailgauge.core import registry
from tailgauge.settings import Settings

SAMPLES = "/v1/descriptors/samples"
TABLE = "/v1/descriptors/table"
BINS = "/v1/descriptors/bins"
PROBLEM = "application/problem+json"
MAX_SEED = 2**53 - 1

# What the engine resamples and what it never does, from the registry (the one source of both).
# The 40 mornings below are fewer than the 50 observations Hill's index needs: it is null here.
RESAMPLED = tuple(name for name in registry.BOOTSTRAP_DESCRIPTORS if name != "upper_tail_index")
NOT_RESAMPLED = tuple(registry.BOOTSTRAP_FAILS)
INTERVAL_KEYS = {"low", "high", "level", "method"}
CLASSICAL_KEYS = {"low", "high", "level", "method", "coverage", "assumption"}
RESAMPLING_KEYS = {"method", "level", "resamples", "seed", "scheme", "block_scheme", "block_length", "block_length_choice"}

# Invented demo data: waiting times (minutes) at a ferry crossing on 40 mornings.
WAITS = [round(float(v), 2) for v in np.random.default_rng(2718).gamma(2.5, 4.0, 40)]


def _no_constants(token: str):
    raise ValueError(f"response contains the non-JSON token {token}")


def post(client: TestClient, path: str, body) -> tuple[int, str, dict, bytes]:
    response = client.post(
        path, content=json.dumps(body, allow_nan=False), headers={"content-type": "application/json"}
    )
    parsed = json.loads(response.content, parse_constant=_no_constants)
    return response.status_code, response.headers["content-type"], parsed, response.content


@pytest.fixture(scope="module")
def api():
    with TestClient(create_app(Settings())) as client:
        yield client


def ok(client, path, body) -> tuple[dict, bytes]:
    status, media, parsed, raw = post(client, path, body)
    assert status == 200, parsed
    assert media.startswith("application/json")
    return parsed, raw


def samples_body(values=WAITS, **interval):
    return {"values": values, "options": {"interval": interval}}


def problem_paths(parsed) -> list[str]:
    return [error["path"] for error in parsed["errors"]]


# ----------------------------------------------------------------------------------------------
# Field names and shapes
# ----------------------------------------------------------------------------------------------


def test_samples_with_interval_carry_every_field(api):
    body, _ = ok(api, SAMPLES, samples_body(method="percentile", level=0.9, resamples=999, seed=12345))
    assert set(body["resampling"]) == RESAMPLING_KEYS
    assert body["resampling"]["method"] == "percentile"
    assert body["resampling"]["level"] == 0.9
    assert body["resampling"]["resamples"] == 999
    assert body["resampling"]["seed"] == 12345
    assert isinstance(body["resampling"]["scheme"], str) and body["resampling"]["scheme"]
    descriptors = body["descriptors"]
    for name in RESAMPLED:
        d = descriptors[name]
        assert set(d["interval"]) == INTERVAL_KEYS, name
        assert d["interval"]["level"] == 0.9
        assert d["interval"]["method"] == "percentile"
        assert d["interval"]["low"] <= d["interval"]["high"], name
        assert isinstance(d["standard_error"], float) and d["standard_error"] > 0.0, name
    for name in NOT_RESAMPLED:
        assert descriptors[name]["interval"] is None, name
        assert descriptors[name]["standard_error"] is None, name
    codes = {w["code"] for w in body["warnings"]}
    assert "interval_not_offered" in codes


def test_classical_intervals_by_descriptor(api):
    body, _ = ok(api, SAMPLES, samples_body(method="bca", level=0.95, resamples=999, seed=7))
    descriptors = body["descriptors"]
    mean = descriptors["mean"]["classical_interval"]
    assert set(mean) == CLASSICAL_KEYS
    assert mean["method"] == "student_t" and mean["coverage"] is None and mean["level"] == 0.95
    assert mean["low"] < descriptors["mean"]["value"] < mean["high"]
    for name in ("variance", "standard_deviation"):
        chi = descriptors[name]["classical_interval"]
        assert set(chi) == CLASSICAL_KEYS
        assert chi["method"] == "chi_square"
        assert chi["low"] < descriptors[name]["value"] < chi["high"]
    ordered = sorted(WAITS)
    median = descriptors["median"]["classical_interval"]
    assert set(median) == CLASSICAL_KEYS
    assert median["method"].startswith("order_statistics")
    assert 0.95 <= median["coverage"] < 1.0
    assert median["low"] in ordered and median["high"] in ordered
    for quantile in body["quantiles"]:
        assert {"probability", "value", "interval", "standard_error", "classical_interval"} <= set(quantile)
        assert set(quantile["interval"]) == INTERVAL_KEYS
        assert quantile["standard_error"] is not None
    middle = [q for q in body["quantiles"] if q["probability"] == 0.5][0]
    assert set(middle["classical_interval"]) == CLASSICAL_KEYS
    same = middle["classical_interval"]
    assert (same["low"], same["high"]) == (median["low"], median["high"])


def test_without_interval_options_the_fields_are_null(api):
    body, _ = ok(api, SAMPLES, {"values": WAITS})
    assert body["resampling"] is None
    for name, d in body["descriptors"].items():
        assert d["interval"] is None and d["standard_error"] is None and d["classical_interval"] is None, name
    for quantile in body["quantiles"]:
        assert quantile["interval"] is None
        assert quantile["standard_error"] is None
        assert quantile["classical_interval"] is None


# ----------------------------------------------------------------------------------------------
# Seeds
# ----------------------------------------------------------------------------------------------


def test_same_seed_gives_identical_bodies(api):
    request = samples_body(method="bca", resamples=2000, seed=424242)
    _, first = ok(api, SAMPLES, request)
    _, second = ok(api, SAMPLES, request)
    assert first == second
    other, _ = ok(api, SAMPLES, samples_body(method="bca", resamples=2000, seed=424243))
    assert other["descriptors"]["mean"]["interval"] != json.loads(first)["descriptors"]["mean"]["interval"]


def test_a_drawn_seed_is_echoed_and_reproduces_the_intervals(api):
    drawn, _ = ok(api, SAMPLES, samples_body(method="percentile", resamples=1500))
    seed = drawn["resampling"]["seed"]
    assert isinstance(seed, int) and 0 <= seed <= MAX_SEED
    again, _ = ok(api, SAMPLES, samples_body(method="percentile", resamples=1500, seed=seed))
    assert again == drawn  # every interval and standard error, bit for bit (JSON floats round-trip)
    null_seed, _ = ok(api, SAMPLES, samples_body(method="percentile", resamples=1500, seed=None))
    assert isinstance(null_seed["resampling"]["seed"], int)


# ----------------------------------------------------------------------------------------------
# Refusals
# ----------------------------------------------------------------------------------------------


def test_probability_table_with_interval_is_422_at_options_interval(api):
    body = {
        "outcomes": [{"value": 0, "weight": 0.2}, {"value": 1, "weight": 0.5}, {"value": 3, "weight": 0.3}],
        "weight_kind": "probabilities",
        "options": {"interval": {"seed": 1}},
    }
    status, media, parsed, _ = post(api, TABLE, body)
    assert status == 422
    assert media.startswith(PROBLEM)
    assert parsed["type"].endswith("uncomputable-input")
    assert problem_paths(parsed) == ["$.options.interval"]
    # The same table without intervals is fine.
    del body["options"]
    ok(api, TABLE, body)


def test_resampling_budget_counts_support_rows():
    # 50 distinct values: work = resamples x 50.
    values = [float(v) for v in range(50)]
    budget = 10_000
    with TestClient(create_app(Settings(max_resample_work=budget))) as client:
        at_budget, _ = ok(client, SAMPLES, samples_body(values, method="percentile", resamples=200, seed=1))
        assert at_budget["resampling"]["resamples"] == 200
        over = samples_body(values, method="percentile", resamples=201, seed=1)
        status, media, parsed, _ = post(client, SAMPLES, over)
        assert status == 422
        assert media.startswith(PROBLEM)
        assert parsed["type"].endswith("limit-exceeded")
        assert problem_paths(parsed) == ["$.options.interval.resamples"]
        assert "200" in parsed["detail"]  # says how far to lower it
        # A count table of 50 outcomes with a million observations costs the same 50 rows.
        table = {
            "outcomes": [{"value": v, "weight": 20_000} for v in values],
            "weight_kind": "counts",
            "options": {"interval": {"method": "percentile", "resamples": 200, "seed": 1}},
        }
        big, _ = ok(client, TABLE, table)
        assert big["size"]["n"] == 1_000_000
        table["options"]["interval"]["resamples"] = 201
        status, _, parsed, _ = post(client, TABLE, table)
        assert status == 422 and problem_paths(parsed) == ["$.options.interval.resamples"]


def test_single_observation_cannot_be_resampled(api):
    status, _, parsed, _ = post(api, SAMPLES, samples_body([4.2], seed=1))
    assert status == 422
    assert problem_paths(parsed) == ["$.options.interval"]


@pytest.mark.parametrize(
    ("interval", "path"),
    [
        ({"level": 1.0}, "$.options.interval.level"),
        ({"level": 0}, "$.options.interval.level"),
        ({"level": -0.5}, "$.options.interval.level"),
        ({"resamples": 10}, "$.options.interval.resamples"),
        ({"resamples": 2_000_000}, "$.options.interval.resamples"),
        ({"method": "studentized"}, "$.options.interval.method"),
        ({"seed": 1.5}, "$.options.interval.seed"),
        ({"seed": -1}, "$.options.interval.seed"),
        ({"seed": MAX_SEED + 1}, "$.options.interval.seed"),
        ({"replicates": 100}, "$.options.interval.replicates"),
    ],
)
def test_invalid_interval_options_are_400_naming_the_field(api, interval, path):
    status, media, parsed, _ = post(api, SAMPLES, samples_body(**interval))
    assert status == 400, parsed
    assert media.startswith(PROBLEM)
    assert parsed["type"].endswith("invalid-body")
    assert problem_paths(parsed) == [path]


def test_largest_seed_is_accepted(api):
    body, _ = ok(api, SAMPLES, samples_body(method="percentile", resamples=200, seed=MAX_SEED))
    assert body["resampling"]["seed"] == MAX_SEED


# ----------------------------------------------------------------------------------------------
# Tables and bins
# ----------------------------------------------------------------------------------------------

# Invented demo data: parcels delivered per household in one week on a made-up street survey.
PARCEL_TABLE = [
    {"value": 0, "weight": 31},
    {"value": 1, "weight": 44},
    {"value": 2, "weight": 27},
    {"value": 3, "weight": 12},
    {"value": 4, "weight": 6},
    {"value": 6, "weight": 3},
    {"value": 9, "weight": 1},
]
# Invented demo data: commute distances (km) of staff at a fictional depot, binned.
DISTANCE_EDGES = [0, 2, 5, 10, 20, 40]
DISTANCE_COUNTS = [14, 37, 52, 29, 8]


@pytest.mark.parametrize("method", ["percentile", "basic", "bca"])
def test_count_table_intervals_contain_their_estimates(api, method):
    body, _ = ok(
        api,
        TABLE,
        {"outcomes": PARCEL_TABLE, "weight_kind": "counts",
         "options": {"interval": {"method": method, "resamples": 2000, "seed": 99}}},
    )
    assert body["resampling"]["method"] == method
    assert isinstance(body["resampling"]["scheme"], str) and body["resampling"]["scheme"]
    for name in ("mean", "median"):
        d = body["descriptors"][name]
        assert d["interval"]["low"] <= d["value"] <= d["interval"]["high"], (name, d)
        assert d["interval"]["method"] in ({method} if method != "bca" else {"bca", "percentile"})
    mean = body["descriptors"]["mean"]
    assert mean["classical_interval"]["method"] == "student_t"
    # Order-statistic interval of the median from the 124 expanded observations.
    assert body["descriptors"]["median"]["classical_interval"]["method"].startswith("order_statistics")


@pytest.mark.parametrize("method", ["percentile", "basic", "bca"])
def test_bins_intervals_contain_their_estimates(api, method):
    body, _ = ok(
        api,
        BINS,
        {"edges": DISTANCE_EDGES, "counts": DISTANCE_COUNTS,
         "options": {"interval": {"method": method, "resamples": 2000, "seed": 5}}},
    )
    assert body["resampling"]["method"] == method
    assert body["resampling"]["seed"] == 5
    for name in ("mean", "median"):
        d = body["descriptors"][name]
        assert d["interval"]["low"] <= d["value"] <= d["interval"]["high"], (name, d)
        assert d["standard_error"] > 0.0
    for quantile in body["quantiles"]:
        assert set(quantile["interval"]) == INTERVAL_KEYS
    assert body["descriptors"]["mean"]["classical_interval"]["method"] == "student_t"


def test_bins_with_the_same_seed_are_identical(api):
    request = {"edges": DISTANCE_EDGES, "counts": DISTANCE_COUNTS,
               "options": {"interval": {"method": "percentile", "resamples": 1000, "seed": 77}}}
    _, first = ok(api, BINS, request)
    _, second = ok(api, BINS, request)
    assert first == second


@pytest.mark.parametrize("level", [0.9999999999999999, 1e-16])
def test_levels_at_the_edge_of_float_precision_fall_back_with_a_warning(level):
    """Found by schema fuzzing: a level within rounding of 1 made BCa's tail z infinite."""
    body = {"values": [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251, 248.9, 250.3, 250.3],
            "options": {"interval": {"level": level, "method": "bca", "resamples": 999, "seed": 3}}}
    with TestClient(create_app(Settings(request_log=False))) as client:
        response = client.post(SAMPLES, json=body)
    assert response.status_code == 200
    parsed = response.json()
    mean = parsed["descriptors"]["mean"]
    assert mean["interval"]["level"] == level
    if level > 0.5:
        assert mean["interval"]["method"] == "percentile"
        assert "bca_fallback" in [w["code"] for w in parsed["warnings"]]


# ----------------------------------------------------------------------------------------------
# Every scalar descriptor: an interval, or a warning naming it with the reason
# ----------------------------------------------------------------------------------------------

EVERY_INPUT = {
    "samples": (SAMPLES, {"values": WAITS}),
    "table": (TABLE, {"outcomes": PARCEL_TABLE, "weight_kind": "counts"}),
    "bins": (BINS, {"edges": DISTANCE_EDGES, "counts": DISTANCE_COUNTS}),
}


def _without_interval(body) -> dict[str, list[tuple[str, str]]]:
    named: dict[str, list[tuple[str, str]]] = {}
    for warning in body["warnings"]:
        if warning["code"] in ("interval_not_offered", "interval_undefined"):
            for name in warning["descriptors"]:
                named.setdefault(name, []).append((warning["code"], warning["message"]))
    return named


@pytest.mark.parametrize("method", ["percentile", "bca"])
@pytest.mark.parametrize("kind", list(EVERY_INPUT))
def test_every_scalar_descriptor_with_a_value_gets_an_interval_or_a_warning_naming_it(api, kind, method):
    """The registry enumerates the descriptors; each one with a value has an interval, or is
    named by interval_not_offered (with the registry's reason) or interval_undefined."""
    path, data = EVERY_INPUT[kind]
    body, _ = ok(api, path, {**data, "options": {"interval": {"method": method, "resamples": 999, "seed": 8}}})
    named = _without_interval(body)
    given = 0
    for name in registry.SCALAR_DESCRIPTORS:
        d = body["descriptors"][name]
        if d["value"] is None:
            assert d["interval"] is None, name
            continue
        if d["interval"] is not None:
            assert name not in named, (name, named.get(name))
            given += 1
            continue
        assert name in named, (kind, name)
        for code, message in named[name]:
            if code == "interval_not_offered":
                assert message == f"no bootstrap interval: {registry.bootstrap_reason(name)}", (name, message)
    # Everything the registry resamples and this input defines gets its interval here.
    assert given == sum(body["descriptors"][n]["value"] is not None for n in registry.BOOTSTRAP_DESCRIPTORS)


def test_the_medcouple_beyond_the_budget_is_named_with_its_reason():
    """A server with a small resampling budget still resamples everything else, and says why the
    medcouple has no interval."""
    with TestClient(create_app(Settings(max_resample_work=1_000_000))) as client:
        body, _ = ok(client, SAMPLES, samples_body(method="percentile", resamples=999, seed=2))
    assert body["descriptors"]["medcouple"]["value"] is not None
    assert body["descriptors"]["medcouple"]["interval"] is None
    named = _without_interval(body)
    assert named["medcouple"] == [("interval_not_offered", f"no bootstrap interval: {registry.TOO_COSTLY}")]
    for name in RESAMPLED:
        if name != "medcouple":
            assert body["descriptors"][name]["interval"] is not None, name
