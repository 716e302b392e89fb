"""POST /v1/descriptors/groups through HTTP: each group's answer is the samples endpoint's answer
for that group alone, bit for bit (its seed included), for a broad set of options; both forms of
the request; baseline contrasts as /v1/comparisons gives them; limits and located errors.

The reference for every group is the samples endpoint itself (whose descriptors are checked
against NIST StRD, scipy, numpy and statsmodels in tests/api/test_samples.py and tests/core):
the claim checked here is equality, so numbers are compared as the JSON text of each float
(``-0.0`` and ``0.0`` differ), not within a tolerance.
"""

from __future__ import annotations

import base64
import copy
import json

import numpy as np
import pytest
from tailgauge.core import group_seed

GROUPS = "/v1/descriptors/groups"
SAMPLES = "/v1/descriptors/samples"
COMPARISONS = "/v1/comparisons"
GROUP_MEMBERS = ("key", "contrasts")


def _exact(response) -> object:
    """The parsed body with every number kept as its JSON text, so equality is bit for bit."""
    return json.loads(response.content, parse_float=str, parse_int=str)


def _post(client, body, path=GROUPS):
    return client.post(path, content=json.dumps(body, allow_nan=False), headers={"content-type": "application/json"})


def _fill_heads(seed: int = 4) -> list[dict]:
    """Fill volumes (ml) of a bottling line's heads (invented), with an awkward group or two."""
    rng = np.random.default_rng(seed)
    groups = [
        {"key": f"head-{i}", "values": np.round(rng.normal(500.0 + 0.4 * i, 0.8, int(rng.integers(12, 40))), 1).tolist()}
        for i in range(1, 5)
    ]
    groups.append({"key": "head-9", "values": [500.2]})  # one value: degenerate descriptors
    groups.append({"key": 17, "values": [499.5] * 5})  # constant, and an integer key
    return groups


def _alone_body(group: dict, options: dict, seed: int | None) -> dict:
    body = {name: group[name] for name in ("values", "weights", "weight_kind") if name in group}
    options = copy.deepcopy(options)
    for name in ("group_order", "baseline"):
        options.pop(name, None)
    if seed is not None:
        options["interval"]["seed"] = seed
    if options:
        body["options"] = options
    return body


def _check_each_group_alone(client, groups: list[dict], options: dict, body: dict | None = None) -> dict:
    response = _post(client, body or {"groups": groups, "options": options})
    assert response.status_code == 200, response.text
    answer = _exact(response)
    assert answer["warnings"] == []
    assert [g["key"] for g in answer["groups"]] == [str(g["key"]) if isinstance(g["key"], int) else g["key"] for g in groups]
    for group, found in zip(groups, answer["groups"]):
        seed = None
        if options.get("interval") is not None:
            seed = int(found["resampling"]["seed"])
            assert seed == group_seed(options["interval"]["seed"], group["key"])
        alone = _post(client, _alone_body(group, options, seed), SAMPLES)
        assert alone.status_code == 200, alone.text
        assert {k: v for k, v in found.items() if k not in GROUP_MEMBERS} == _exact(alone), group["key"]
    return answer


OPTION_SETS = [
    {},
    {"descriptors": ["mean", "standard_deviation", "quantiles"]},
    {"descriptors": ["median", "range", "interquartile_range", "variance", "quantiles"], "quantile_type": 3,
     "probabilities": [0.0, 0.1, 0.5, 1.0]},
    {"descriptors": ["mean", "median", "standard_deviation", "quantiles"], "probabilities": [0.1, 0.9],
     "interval": {"method": "percentile", "level": 0.9, "resamples": 300, "seed": 5}},
    {"interval": {"method": "bca", "level": 0.95, "resamples": 200, "seed": 11}},
    {"convention": "population", "moment_order": 6, "skewness_estimator": "b1", "kurtosis_estimator": "g2"},
    {"score": [499.0, 503.5], "partial_state": True},
    {"descriptors": ["location", "spread"], "quantile_type": 8},
    {"descriptors": ["mean", "standard_deviation", "median", "range"]},  # no quantiles member
    {"descriptors": ["minimum", "maximum"], "missing": "omit"},
    # The samples endpoint's own later options reach every group: a series' block bootstrap and
    # effective n, and the plot data.
    {"order": "as_sent", "interval": {"method": "percentile", "resamples": 300, "seed": 23}},
    {"order": "as_sent", "block_scheme": "circular", "block_length": 2, "plot_data": True},
    {"plot_data": True, "descriptors": ["mean", "quantiles"]},
    {"thresholds": [500.0, 501.5], "tail_levels": [0.9], "trim_proportion": 0.2},
    {"thresholds": [500.5], "tail_levels": [0.75], "interval": {"method": "bca", "resamples": 200, "seed": 29}},
]


@pytest.mark.parametrize("options", OPTION_SETS, ids=range(len(OPTION_SETS)))
def test_each_group_equals_the_samples_answer_alone(client, options):
    groups = _fill_heads()
    if "interval" in options or "block_length" in options:
        # One value cannot be resampled, nor cut into blocks of 2: the samples endpoint refuses it (below).
        groups = [g for g in groups if len(g["values"]) > 1]
    answer = _check_each_group_alone(client, groups, options)
    if "interval" not in options and "block_length" not in options and options.get("convention") != "population":
        # (a population of one: sd 0)
        degenerate = {g["key"]: g for g in answer["groups"]}["head-9"]
        if "standard_deviation" in degenerate["descriptors"]:
            assert degenerate["descriptors"]["standard_deviation"]["value"] is None
            assert "single_observation" in {w["code"] for w in degenerate["warnings"]}


def test_a_group_the_samples_endpoint_refuses_is_named(client):
    # The samples endpoint refuses intervals for one value (nothing to resample); so does a group.
    options = {"interval": {"method": "percentile", "resamples": 200, "seed": 1}}
    alone = _post(client, {"values": [500.2], "options": options}, SAMPLES)
    assert alone.status_code == 422
    response = _post(client, {"groups": _fill_heads(), "options": options})
    assert response.status_code == 422
    assert "'head-9'" in response.json()["detail"]
    assert [e["path"] for e in response.json()["errors"]] == ["$.options.interval", "$.groups[4].values"]


def test_weights_missing_values_and_weighted_quantiles(client):
    rng = np.random.default_rng(8)
    groups = [
        {"key": "counted", "values": [499.8, 500.1, 500.4, 500.9], "weights": [3, 1, 4, 2]},
        {"key": "reliability", "values": rng.normal(500, 1, 15).round(2).tolist(),
         "weights": rng.uniform(0.5, 2.0, 15).round(3).tolist(), "weight_kind": "reliability"},
        {"key": "gaps", "values": [500.3, None, 499.7, 500.0, None, 501.2]},
    ]
    for options in ({"missing": "omit"}, {"missing": "omit", "quantile_type": 2,
                                          "interval": {"method": "percentile", "resamples": 200, "seed": 3}}):
        _check_each_group_alone(client, groups, options)


def test_list_and_columnar_forms_give_the_same_answer(client):
    groups = [g for g in _fill_heads(9) if len(g["values"]) > 1]
    options = {"descriptors": ["mean", "standard_deviation", "quantiles"], "interval": {"method": "percentile",
               "resamples": 200, "seed": 21}}
    listed = _post(client, {"groups": groups, "options": options})
    # Columnar, keys interleaved at random: each key's values stay in the order sent.
    rng = np.random.default_rng(1)
    tokens = [g["key"] for g in groups for _ in g["values"]]
    rng.shuffle(tokens)
    pending = {g["key"]: iter(g["values"]) for g in groups}
    keys = [k.item() if isinstance(k, np.generic) else k for k in tokens]
    values = [next(pending[k]) for k in keys]
    first_seen = list(dict.fromkeys(keys))
    columnar = _post(client, {"values": values, "keys": keys, "options": {**options, "group_order": "by_key"}})
    listed_by_key = _post(client, {"groups": groups, "options": {**options, "group_order": "by_key"}})
    assert columnar.status_code == 200, columnar.text
    assert _exact(columnar) == _exact(listed_by_key)
    as_sent = _exact(_post(client, {"values": values, "keys": keys, "options": options}))
    assert [g["key"] for g in as_sent["groups"]] == [str(k) if isinstance(k, int) else k for k in first_seen]
    # float64 bytes for the values, as the samples endpoint allows.
    packed = base64.b64encode(np.array(values, dtype="<f8").tobytes()).decode()
    assert _exact(_post(client, {"values": packed, "keys": keys, "options": options})) == as_sent
    assert listed.status_code == 200


def test_the_drawn_seed_is_echoed_and_reproduces_every_group(client):
    groups = [g for g in _fill_heads(3) if len(g["values"]) > 1]
    options = {"descriptors": ["mean"], "interval": {"method": "percentile", "resamples": 200}}
    first = _exact(_post(client, {"groups": groups, "options": options}))
    seed = int(first["seed"])
    assert [int(g["resampling"]["seed"]) for g in first["groups"]] == [group_seed(seed, g["key"]) for g in groups]
    again = _post(client, {"groups": groups, "options": {**options, "interval": {**options["interval"], "seed": seed}}})
    assert _exact(again) == first
    assert _exact(_post(client, {"groups": groups}))["seed"] is None


def test_a_group_keeps_its_intervals_when_others_are_added_or_reordered(client):
    groups = _fill_heads(2)[:4]
    options = {"descriptors": ["mean", "median"], "interval": {"method": "percentile", "resamples": 300, "seed": 77}}
    first = {g["key"]: g for g in _exact(_post(client, {"groups": groups, "options": options}))["groups"]}
    more = [groups[3], {"key": "head-new", "values": [500.0, 501.0, 499.0, 502.5]}, groups[1]]
    second = {g["key"]: g for g in _exact(_post(client, {"groups": more, "options": options}))["groups"]}
    for key in ("head-4", "head-2"):
        assert second[key] == first[key]


def test_baseline_contrasts_are_the_comparisons(client):
    groups = _fill_heads(5)[:4]
    options = {"descriptors": ["mean", "standard_deviation", "median", "quantiles"], "probabilities": [0.5, 0.9]}
    answer = _exact(_post(client, {"groups": groups, "options": {**options, "baseline": "head-2"}}))
    base = groups[1]
    for group, found in zip(groups, answer["groups"]):
        compared = _exact(_post(client, {
            "first": {"kind": "samples", "values": base["values"]},
            "second": {"kind": "samples", "values": group["values"]},
            "options": options,
        }, COMPARISONS))
        contrasts = found["contrasts"]
        for member in ("differences", "ratios", "standardized_mean_difference", "quantile_shifts"):
            assert contrasts[member] == compared[member], (group["key"], member)
    own = answer["groups"][1]["contrasts"]
    assert own["differences"]["mean"]["value"] == "0.0" and own["ratios"]["standard_deviation"]["value"] == "1.0"


def test_ten_thousand_groups(client):
    rng = np.random.default_rng(12)
    values = np.round(rng.normal(500.0, 1.0, 30_000), 2)
    keys = np.repeat(np.arange(10_000), 3)
    order = rng.permutation(values.size)
    body = {"values": values[order].tolist(), "keys": keys[order].tolist(),
            "options": {"descriptors": ["mean", "standard_deviation", "quantiles"], "group_order": "by_key"}}
    response = _post(client, body)
    assert response.status_code == 200, response.text
    answer = _exact(response)
    assert [int(g["key"]) for g in answer["groups"]] == list(range(10_000))
    for k in (0, 4_321, 9_999):
        own = values[order][keys[order] == k].tolist()
        alone = _post(client, {"values": own, "options": {"descriptors": ["mean", "standard_deviation", "quantiles"]}}, SAMPLES)
        assert {n: v for n, v in answer["groups"][k].items() if n not in GROUP_MEMBERS} == _exact(alone)


@pytest.mark.parametrize(
    "body, status, path",
    [
        ({"groups": [{"key": "a", "values": [1.0, 2.0]}, {"key": "b", "values": []}]}, 400, "$.groups[1].values"),
        ({"groups": []}, 400, "$.groups"),
        ({"groups": [{"key": "", "values": [1.0]}]}, 400, "$.groups[0].key"),
        ({"groups": [{"key": "a", "values": [1.0]}, {"key": "a", "values": [2.0]}]}, 422, "$.groups[1].key"),
        ({"groups": [{"key": "a", "values": [1.0, None]}]}, 422, "$.groups[0].values[1]"),
        ({"groups": [{"key": "a", "values": [1.0, 2.0]}], "options": {"baseline": "b"}}, 422, "$.options.baseline"),
        ({"groups": [{"key": 1, "values": [1.0, 2.0]}], "options": {"baseline": "1"}}, 422, "$.options.baseline"),
        ({"groups": [{"key": "a", "values": [1.0]}], "values": [1.0], "keys": ["a"]}, 400, "$.values"),
        ({"values": [1.0, 2.0, 3.0], "keys": ["a", "b"]}, 422, "$.keys"),
        ({"values": [1.0, 2.0]}, 400, "$.keys"),
        ({"values": [], "keys": []}, 400, "$.values"),
        ({"values": [1.0, None, 2.0], "keys": ["a", "b", "a"]}, 422, "$.values[1]"),
        ({"values": [1.0, 2.0], "keys": ["a", "b"], "weights": [1.0]}, 422, "$.weights"),
        ({"groups": [{"key": "a", "values": [1.0]}], "weights": [1.0]}, 400, "$.weights"),
        ({"groups": [{"key": "a", "values": [1.0]}], "weight_kind": "reliability"}, 400, "$.weight_kind"),
        ({"values": [1.0, 2.0], "keys": [True, "b"]}, 400, "$.keys[0]"),
        ({}, 400, "$.groups"),
    ],
)
def test_bad_requests_are_located(client, body, status, path):
    response = _post(client, body)
    assert response.status_code == status, response.text
    assert path in [e["path"] for e in response.json()["errors"]], response.json()


def test_limits_name_the_field(make_client):
    client = make_client(max_groups=3, max_values=10)
    four = [{"key": k, "values": [1.0, 2.0]} for k in "abcd"]
    response = _post(client, {"groups": four})
    assert response.status_code == 422 and response.json()["type"].endswith("limit-exceeded")
    assert [e["path"] for e in response.json()["errors"]] == ["$.groups"]
    response = _post(client, {"values": [1.0, 2.0, 3.0, 4.0], "keys": ["a", "b", "c", "d"]})
    assert response.status_code == 422 and [e["path"] for e in response.json()["errors"]] == ["$.keys"]
    many = [{"key": k, "values": [1.0] * 4} for k in "abc"]
    response = _post(client, {"groups": many})
    assert response.status_code == 413 and [e["path"] for e in response.json()["errors"]] == ["$.groups"]
    response = _post(client, {"values": [1.0] * 11, "keys": ["a"] * 11})
    assert response.status_code == 413 and [e["path"] for e in response.json()["errors"]] == ["$.values"]


def test_budget_covers_every_groups_resamples(make_client):
    client = make_client(max_resample_work=10_000)
    groups = [{"key": k, "values": [float(i) for i in range(20)]} for k in "abc"]
    response = _post(client, {"groups": groups, "options": {"interval": {"method": "percentile", "resamples": 200}}})
    assert response.status_code == 422, response.text
    assert [e["path"] for e in response.json()["errors"]] == ["$.options.interval.resamples"]
    advice = int(response.json()["detail"].rsplit(" ", 1)[1])
    resent = _post(client, {"groups": groups, "options": {"interval": {"method": "percentile", "resamples": advice}}})
    assert resent.status_code == 200, resent.text


def test_columnar_weights_are_split_with_their_values(client):
    listed = [
        {"key": "a", "values": [500.1, 500.4, 499.8, 500.9], "weights": [0.5, 1.5, 1.0, 2.0], "weight_kind": "reliability"},
        {"key": "b", "values": [501.0, 501.6, 500.7], "weights": [1.0, 0.25, 2.0], "weight_kind": "reliability"},
    ]
    keys = ["a", "b", "a", "b", "a", "b", "a"]
    values = [500.1, 501.0, 500.4, 501.6, 499.8, 500.7, 500.9]
    weights = [0.5, 1.0, 1.5, 0.25, 1.0, 2.0, 2.0]
    options = {"quantile_type": 2}
    columnar = _post(client, {"values": values, "keys": keys, "weights": weights, "weight_kind": "reliability",
                              "options": options})
    assert columnar.status_code == 200, columnar.text
    assert _exact(columnar) == _check_each_group_alone(client, listed, options)


def test_a_listed_group_may_send_float64_bytes(client):
    groups = [g for g in _fill_heads(6) if len(g["values"]) > 1]
    packed = [dict(g, values=base64.b64encode(np.array(g["values"], dtype="<f8").tobytes()).decode()) for g in groups]
    options = {"descriptors": ["mean", "median", "quantiles"]}
    assert _exact(_post(client, {"groups": packed, "options": options})) == _exact(
        _post(client, {"groups": groups, "options": options}))
    bad = dict(packed[0], values=base64.b64encode(np.array([1.0, np.inf]).tobytes()).decode())
    response = _post(client, {"groups": [bad]})
    assert response.status_code == 400 and [e["path"] for e in response.json()["errors"]] == ["$.groups[0].values[1]"]
