"""The published OpenAPI document: committed copy, served copy, routes, references, constraints,
and the offline schema page."""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path

import pytest

from tailgauge.api import openapi
from tailgauge.api.operations import OPERATIONS

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"
UNDOCUMENTED = {"/docs", "/docs/assets", "/openapi.json"}
IGNORED_METHODS = {"OPTIONS", "HEAD"}
PROBLEM = "application/problem+json"
REGENERATE = "the committed openapi/openapi.json is stale or missing: run `make openapi` and commit it"


@pytest.fixture(scope="module")
def document() -> dict:
    return json.loads(openapi.document_bytes())


def test_committed_document_is_current():
    if not COMMITTED.is_file():
        pytest.fail(f"{COMMITTED} does not exist; {REGENERATE}")
    if COMMITTED.read_bytes() != openapi.document_bytes():
        pytest.fail(REGENERATE)


def test_document_bytes_are_deterministic():
    assert openapi.document_bytes() == openapi.document_bytes()
    assert openapi.document_bytes().endswith(b"\n")


def test_served_document_is_the_generated_one(client):
    response = client.get("/openapi.json")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("application/json")
    assert response.content == openapi.document_bytes()


def test_openapi_version(document):
    assert document["openapi"] == "3.1.0"
    assert document["info"]["title"] and document["info"]["version"]


def _route_base(path: str) -> str:
    """``/docs/assets/{file_path:path}`` -> ``/docs/assets``."""
    return path.split("/{", 1)[0]


def _app_operations(app) -> set[tuple[str, str]]:
    operations = set()
    for route in app.routes:
        if _route_base(route.path) in UNDOCUMENTED or route.path in UNDOCUMENTED:
            continue
        for method in route.methods:
            if method not in IGNORED_METHODS:
                operations.add((route.path, method.lower()))
    return operations


def test_every_route_is_documented_and_every_documented_path_is_a_route(client, document):
    app_operations = _app_operations(client.app)
    assert app_operations, "the app has no routes to compare"
    documented = {
        (path, method)
        for path, item in document["paths"].items()
        for method in item
        if method in {"get", "post", "put", "patch", "delete"}
    }
    missing = app_operations - documented
    phantom = documented - app_operations
    assert not missing, f"routes absent from the OpenAPI document: {sorted(missing)}"
    assert not phantom, f"documented operations with no route: {sorted(phantom)}"
    operation_ids = []
    for path, method in documented:
        operation_id = document["paths"][path][method].get("operationId")
        assert operation_id, f"{method.upper()} {path} has no operationId"
        operation_ids.append(operation_id)
    assert len(operation_ids) == len(set(operation_ids)), "operationIds must be unique"


def _walk(node, where="#"):
    if isinstance(node, dict):
        for key, value in node.items():
            if key == "$ref":
                yield where, value
            else:
                yield from _walk(value, f"{where}/{key}")
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _walk(value, f"{where}/{index}")


def _resolve(document: dict, ref: str):
    assert ref.startswith("#/"), f"non-local $ref {ref}"
    node = document
    for part in ref[2:].split("/"):
        part = part.replace("~1", "/").replace("~0", "~")
        assert isinstance(node, dict) and part in node, f"$ref {ref} does not resolve"
        node = node[part]
    return node


def test_every_ref_resolves(document):
    refs = list(_walk(document))
    assert refs, "the document has no $ref at all"
    for where, ref in refs:
        target = _resolve(document, ref)
        assert isinstance(target, dict), f"{where}: $ref {ref} is not a schema object"


def _bounds(schema: dict) -> tuple:
    """(minimum, maximum) of a property, looking inside anyOf branches (nullable properties)."""
    for candidate in [schema, *schema.get("anyOf", [])]:
        if "minimum" in candidate or "maximum" in candidate:
            return candidate.get("minimum"), candidate.get("maximum")
    raise AssertionError(f"no minimum/maximum in {schema}")


def test_request_schema_keeps_the_decoder_constraints(document):
    schemas = document["components"]["schemas"]
    request = schemas["SamplesRequest"]
    options = schemas["SampleOptions"]
    assert request["additionalProperties"] is False
    assert options["additionalProperties"] is False
    assert "values" in request["required"]
    values = request["properties"]["values"]["anyOf"]
    assert [v["minItems"] for v in values if v.get("type") == "array"] == [1]
    assert [v["contentEncoding"] for v in values if v.get("type") == "string"] == ["base64"]
    probability = options["properties"]["probabilities"]["items"]
    assert probability["minimum"] == 0.0 and probability["maximum"] == 1.0
    assert _bounds(options["properties"]["quantile_type"]) == (1, 9)
    assert _bounds(options["properties"]["moment_order"])[1] >= 4
    request_ref = document["paths"]["/v1/descriptors/samples"]["post"]["requestBody"]["content"][
        "application/json"
    ]["schema"]["$ref"]
    assert _resolve(document, request_ref) is request


def test_schema_bounds_match_what_the_server_enforces(client, document):
    """The published maximum moment order is accepted; one above it is a 400 at that field."""
    maximum = _bounds(document["components"]["schemas"]["SampleOptions"]["properties"]["moment_order"])[1]
    headers = {"content-type": "application/json"}
    ok = client.post(
        "/v1/descriptors/samples",
        content=json.dumps({"values": [1.0, 2.0, 4.0], "options": {"moment_order": maximum}}),
        headers=headers,
    )
    assert ok.status_code == 200, ok.text
    too_high = client.post(
        "/v1/descriptors/samples",
        content=json.dumps({"values": [1.0, 2.0, 4.0], "options": {"moment_order": maximum + 1}}),
        headers=headers,
    )
    assert too_high.status_code == 400
    assert [e["path"] for e in too_high.json()["errors"]] == ["$.options.moment_order"]


def test_compute_operations_declare_problem_responses(document):
    compute_paths = [path for path in document["paths"] if path.startswith("/v1/")]
    assert compute_paths
    for path in compute_paths:
        for method, operation in document["paths"][path].items():
            if method != "post":
                continue  # GET /v1/catalog computes nothing and takes no body
            assert "requestBody" in operation, f"{method} {path}"
            for status in ("400", "413", "415", "422"):
                assert status in operation["responses"], f"{method} {path} lacks {status}"
                content = operation["responses"][status]["content"]
                assert PROBLEM in content, f"{method} {path} {status}"
                target = _resolve(document, content[PROBLEM]["schema"]["$ref"])
                assert {"type", "title", "status", "detail"} <= set(target["properties"])


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.urls: list[str] = []

    def handle_starttag(self, tag, attrs):
        for name, value in attrs:
            if name in ("src", "href") and value is not None:
                self.urls.append(value)


def test_docs_page_is_offline(client):
    response = client.get("/docs")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/html")
    page = response.text
    assert "http://" not in page and "https://" not in page
    parser = _Links()
    parser.feed(page)
    assert parser.urls, "the page references no assets"
    scripts = [u for u in parser.urls if u.endswith(".js")]
    assert scripts, "the page loads no script"
    for url in parser.urls:
        assert url.startswith("/") and not url.startswith("//"), f"non-local reference {url}"
        asset = client.get(url)
        assert asset.status_code == 200, f"{url} -> {asset.status_code}"
        assert asset.content, f"{url} is empty"
    assert '"/openapi.json"' in page


def test_every_compute_operation_has_an_example_that_the_server_accepts(client, document):
    examples = {op.path: op.example for op in OPERATIONS if op.example is not None}
    posts = [path for path, item in document["paths"].items() if "post" in item]
    assert sorted(posts) == sorted(examples)
    for path in posts:
        example = document["paths"][path]["post"]["requestBody"]["content"]["application/json"]["example"]
        assert example == examples[path]
        response = client.post(path, content=json.dumps(example), headers={"content-type": "application/json"})
        assert response.status_code == 200, (path, response.text)
