"""GET /v1/catalog keeps step with what the service returns.

* every descriptor name any response carries is catalogued, and every catalogued descriptor is
  returned (names collected from /samples, /table with counts and with probabilities, and /bins,
  with and without intervals);
* every normality test is catalogued as "normality.<test>" and vice versa;
* the catalogued warnings are the registry's closed vocabulary, in its order, with its meanings
  (that every code is produced by some input is tests/core/test_registry.py's), and every code a
  response carries is catalogued;
* the response's descriptors member has exactly the registry's descriptors, in its order;
* every entry has a definition and a reference.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app, schemas
from tailgauge.core import registry
from tailgauge.core.registry import WarningCode
from tailgauge.settings import Settings

SAMPLES, TABLE, BINS = "/v1/descriptors/samples", "/v1/descriptors/table", "/v1/descriptors/bins"
INTERVAL = {"interval": {"method": "percentile", "resamples": 200, "seed": 20260101}}


def _reject_constant(token: str):
    raise ValueError(f"non-JSON token {token}")


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings())) as test_client:
        yield test_client


@pytest.fixture(scope="module")
def catalog(client) -> dict:
    response = client.get("/v1/catalog")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("application/json")
    return json.loads(response.content, parse_constant=_reject_constant)


def _requests() -> list[tuple[str, str, dict]]:
    rng = np.random.default_rng(314)
    values = np.round(rng.gamma(2.0, 3.0, size=60), 2).tolist()
    counts = rng.integers(1, 30, size=8)
    outcomes = [{"value": float(v), "weight": float(w)} for v, w in zip(range(1, 9), counts)]
    probabilities = rng.dirichlet(np.ones(8))
    probabilities[-1] = 1.0 - probabilities[:-1].sum()
    prob_outcomes = [{"value": float(v) * 1.5, "weight": float(p)} for v, p in zip(range(8), probabilities)]
    bins = {"edges": [0.0, 1.0, 2.5, 4.0, 7.0, 10.0], "counts": [12.0, 30.0, 25.0, 9.0, 4.0]}
    open_bins = {"edges": [None, 0.0, 1.0, 2.0, None], "counts": [3.0, 10.0, 14.0, 2.0]}
    weights = [1.0, 2.0, 0.5, 1.0, 3.0, 1.0, 1.0, 2.0, 1.0, 1.5]
    requests = []
    for label, options in (("", {}), (" with intervals", INTERVAL)):
        requests += [
            (f"samples{label}", SAMPLES, {"values": values, "options": options}),
            (f"weighted samples{label}", SAMPLES,
             {"values": values[:10], "weights": weights, "options": options}),
            (f"count table{label}", TABLE,
             {"outcomes": outcomes, "weight_kind": "counts", "options": options}),
            (f"bins{label}", BINS, {**bins, "options": options}),
            (f"open bins{label}", BINS, {**open_bins, "options": options}),
        ]
    # A probability table is a population and one value has no spread to resample: both answer
    # 422 to an interval request (by design), so they are asked without.
    requests.append(("single value", SAMPLES, {"values": [4.0]}))
    requests.append(("probability table", TABLE, {"outcomes": prob_outcomes, "weight_kind": "probabilities"}))
    return requests


@pytest.fixture(scope="module")
def responses(client) -> dict[str, dict]:
    found = {}
    for label, path, body in _requests():
        headers = {"content-type": "application/json"}
        response = client.post(path, content=json.dumps(body, allow_nan=False), headers=headers)
        assert response.status_code == 200, (label, response.text)
        found[label] = json.loads(response.content, parse_constant=_reject_constant)
    return found


def test_catalog_has_its_four_members(catalog):
    assert set(catalog) == {"descriptors", "members", "warnings", "note"}
    assert isinstance(catalog["note"], str) and catalog["note"].strip()


def test_descriptor_names_equal_those_responses_return(catalog, responses):
    returned = set()
    for label, body in responses.items():
        names = set(body["descriptors"])
        returned |= names
        assert names, label
    catalogued = [entry["name"] for entry in catalog["descriptors"]]
    assert len(catalogued) == len(set(catalogued)), "duplicate catalog entries"
    assert set(catalogued) == returned, (
        f"returned but not catalogued: {sorted(returned - set(catalogued))}; "
        f"catalogued but never returned: {sorted(set(catalogued) - returned)}"
    )
    # The requests above include intervals, so those paths really were exercised.
    assert any(d.get("interval") for d in responses["samples with intervals"]["descriptors"].values())


def test_every_response_carries_every_descriptor(catalog, responses):
    catalogued = {entry["name"] for entry in catalog["descriptors"]}
    for label, body in responses.items():
        assert set(body["descriptors"]) == catalogued, label


def test_normality_tests_equal_the_catalogued_normality_members(catalog, responses):
    returned = {test["test"] for body in responses.values() for test in body["normality"]}
    members = {entry["name"] for entry in catalog["members"]}
    catalogued = {name.removeprefix("normality.") for name in members if name.startswith("normality.")}
    assert returned == catalogued, (sorted(returned), sorted(catalogued))
    assert returned == {"skewness_test", "kurtosis_test", "omnibus_k2", "jarque_bera"}


def test_catalogued_warnings_are_the_vocabulary(catalog):
    catalogued = [w["code"] for w in catalog["warnings"]]
    assert len(catalogued) == len(set(catalogued)), "duplicate warning codes"
    assert catalogued == [code.value for code in WarningCode]
    assert {w["code"]: w["meaning"] for w in catalog["warnings"]} == {code.value: code.meaning for code in WarningCode}


def test_the_descriptors_member_has_the_registry_descriptors():
    assert schemas.Descriptors.__struct_fields__ == registry.SCALAR_DESCRIPTORS


def test_answers_carry_the_registry_descriptors_intervals_and_contrasts(client):
    """One answer of each shape against the registry: the descriptors (in its order, each
    described in the published schema by its definition there), which get a bootstrap interval,
    and which a comparison contrasts by difference and by ratio."""
    rng = np.random.default_rng(5)
    first, second = rng.gamma(2.0, 3.0, 80).tolist(), rng.gamma(2.5, 3.0, 70).tolist()
    body = client.post(SAMPLES, json={"values": first, "options": INTERVAL}).json()
    assert tuple(body["descriptors"]) == registry.SCALAR_DESCRIPTORS
    with_interval = {name for name, d in body["descriptors"].items() if d["interval"] is not None}
    assert with_interval == set(registry.BOOTSTRAP_DESCRIPTORS)
    comparison = client.post(
        "/v1/comparisons",
        json={"first": {"kind": "samples", "values": first}, "second": {"kind": "samples", "values": second}},
    ).json()
    assert tuple(comparison["differences"]) == registry.SCALAR_DESCRIPTORS
    assert tuple(comparison["ratios"]) == registry.SCALE_DESCRIPTORS
    document = client.get("/openapi.json").json()
    members = document["components"]["schemas"]["Descriptors"]["properties"]
    assert {name: member["description"] for name, member in members.items()} == {
        facts.name: facts.definition for facts in registry.DESCRIPTORS
    }


def test_warnings_in_responses_are_catalogued(catalog, responses):
    catalogued = {w["code"] for w in catalog["warnings"]}
    seen = {w["code"] for body in responses.values() for w in body["warnings"]}
    assert seen and seen <= catalogued, sorted(seen - catalogued)


def test_every_entry_has_a_definition_and_a_reference(catalog):
    for entry in catalog["descriptors"] + catalog["members"]:
        assert entry["definition"].strip(), entry["name"]
        assert entry["reference"].strip(), entry["name"]
        assert entry["member"].strip(), entry["name"]
    for warning in catalog["warnings"]:
        assert warning["meaning"].strip(), warning["code"]


def test_catalog_descriptor_entries_are_in_the_descriptors_member(catalog):
    assert all(entry["member"] == "descriptors" for entry in catalog["descriptors"])
