"""The catalog and the responses name the same things: every descriptor, test and warning code."""

import pathlib
import re

import numpy as np
import pytest
from litestar.testing import TestClient

from service.api import create_app
from service.core import catalog
from service.settings import Settings

CORE = pathlib.Path(__file__).resolve().parents[2] / "service" / "core"


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings())) as c:
        yield c


def _responses(client) -> list[dict]:
    rng = np.random.default_rng(4)
    x = rng.gamma(3, 2, 60).round(2).tolist()
    bodies = [
        ("/v1/descriptors/samples", {"values": x}),
        ("/v1/descriptors/samples", {"values": x, "options": {"interval": {"resamples": 200, "seed": 1}}}),
        ("/v1/descriptors/table", {"outcomes": [{"value": v, "weight": w} for v, w in [(1, 3), (2, 5), (4, 1)]],
                                   "weight_kind": "counts"}),
        ("/v1/descriptors/table", {"outcomes": [{"value": v, "weight": 0.25} for v in (1, 2, 3, 4)],
                                   "weight_kind": "probabilities"}),
        ("/v1/descriptors/bins", {"edges": [0, 1, 2, 3], "counts": [4, 9, 2]}),
    ]
    answers = []
    for path, body in bodies:
        response = client.post(path, json=body)
        assert response.status_code == 200, response.text
        answers.append(response.json())
    return answers


def test_catalog_descriptors_are_exactly_the_returned_descriptors(client):
    listed = {entry["name"] for entry in client.get("/v1/catalog").json()["descriptors"]}
    returned = set()
    for answer in _responses(client):
        returned |= set(answer["descriptors"])
    assert listed == returned


def test_catalog_lists_every_normality_test_and_member(client):
    members = {entry["name"] for entry in client.get("/v1/catalog").json()["members"]}
    tests = {f"normality.{t['test']}" for answer in _responses(client) for t in answer["normality"]}
    assert {m for m in members if m.startswith("normality.")} == tests
    answer = _responses(client)[1]
    returned_members = {"moments.raw", "moments.central", "moments.standardized", "quantiles", "modes",
                        "shape_estimators", "tail_contributions", "grouping", "interval", "standard_error",
                        "classical_interval"}
    assert returned_members <= members
    assert {"moments", "quantiles", "modes", "shape_estimators", "tail_contributions", "grouping"} <= set(answer)
    assert {"interval", "standard_error", "classical_interval"} <= set(answer["descriptors"]["mean"])


def test_every_warning_code_in_the_source_is_catalogued_and_vice_versa():
    emitted = set()
    for path in CORE.glob("*.py"):
        emitted |= set(re.findall(r'notes\.add\(\s*"([a-z0-9_]+)"', path.read_text()))
        emitted |= set(re.findall(r'\(\s*"([a-z0-9_]+)" if [^)]*\)', path.read_text()))
    assert emitted, "no warning codes found: the scan is broken"
    assert emitted == set(catalog.WARNINGS)


def test_every_entry_says_what_it_is_and_where_it_comes_from(client):
    document = client.get("/v1/catalog").json()
    for entry in document["descriptors"] + document["members"]:
        assert entry["definition"] and entry["reference"], entry["name"]
    assert "not a verdict" in document["note"]
