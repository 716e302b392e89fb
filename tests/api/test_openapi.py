"""The published OpenAPI document: committed copy, served copy, routes, references, constraints,
and the offline schema page."""

from __future__ import annotations

import json
from html.parser import HTMLParser
from pathlib import Path

import pytest

from tailgauge.api import openapi
from tailgauge.api.operations import OPERATIONS
from tailgauge.core.registry import SCALAR_DESCRIPTORS
from tailgauge.core.selection import MEMBERS

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


# ---- What generated clients and the schema page rely on ----


def test_committed_examples_are_the_apps_answers_today():
    """The response examples are recorded from the app; a change of any answer needs `make openapi`."""
    from tailgauge.api import examples

    recorded = examples.record()
    if not examples.EXAMPLES_FILE.is_file() or examples.EXAMPLES_FILE.read_bytes() != examples.examples_bytes(recorded):
        pytest.fail(f"{examples.EXAMPLES_FILE.name} is stale; {REGENERATE}")


def test_every_json_answer_and_problem_has_the_apps_example(client, document):
    for op in OPERATIONS:
        responses = document["paths"][op.path][op.method]["responses"]
        for status, response in responses.items():
            content = response["content"]
            if PROBLEM in content:
                example = content[PROBLEM]["example"]
                assert example["status"] == int(status), (op.path, status)
                assert example["type"].startswith("urn:tailgauge:problem:") and example["errors"], (op.path, status)
            elif "application/json" in content:
                assert "example" in content["application/json"], (op.path, status)
        if op.example is not None:
            answer = client.post(op.path, json=op.example)
            assert responses["200"]["content"]["application/json"]["example"] == answer.json(), op.path
        elif op.response is not None:
            assert responses["200"]["content"]["application/json"]["example"] == client.get(op.path).json()


def test_problem_examples_are_answered_by_the_app(client, document):
    for op in OPERATIONS:
        for status, body in op.problem_examples.items():
            answer = client.post(op.path, json=body)
            assert answer.status_code == status, (op.path, answer.text)
            shown = document["paths"][op.path][op.method]["responses"][str(status)]["content"][PROBLEM]["example"]
            assert shown == answer.json()


def _objects_reached(document: dict, roots: list[dict]) -> set[str]:
    schemas = document["components"]["schemas"]
    seen: set[str] = set()
    pending = list(roots)
    while pending:
        for _, ref in _walk(pending.pop()):
            name = ref.rsplit("/", 1)[-1]
            if ref.startswith("#/components/schemas/") and name not in seen:
                seen.add(name)
                pending.append(schemas[name])
    return {name for name in seen if schemas[name].get("type") == "object"}


def test_requests_are_strict_and_answers_open_with_every_member_required(document):
    """Every member of an answer is required except what options.descriptors can leave out: each
    descriptor, and the selectable members of a description (and the comparison's quantile members)."""
    schemas = document["components"]["schemas"]
    requests, answers = [], []
    for item in document["paths"].values():
        for operation in item.values():
            if "requestBody" in operation:
                requests.extend(c["schema"] for c in operation["requestBody"]["content"].values())
            for response in operation["responses"].values():
                answers.extend(c["schema"] for c in response.get("content", {}).values())
    asked, answered = _objects_reached(document, requests), _objects_reached(document, answers)
    assert asked and answered and not asked & answered
    for name in asked:
        assert schemas[name]["additionalProperties"] is False, name
        assert not any("default" in p for p in schemas[name]["properties"].values()), name
    for name in answered:
        assert "additionalProperties" not in schemas[name], name
        optional = set(schemas[name]["properties"]) - set(schemas[name]["required"])
        assert optional <= LEFT_OUT.get(name, set()), name
    assert set(schemas["Descriptors"]["properties"]) == LEFT_OUT["Descriptors"]
    assert set(schemas["DescriptionResponse"]["required"]) == set(schemas["DescriptionResponse"]["properties"]) - set(MEMBERS)


LEFT_OUT = {
    "Descriptors": set(SCALAR_DESCRIPTORS),
    "DescriptionResponse": set(MEMBERS),
    "MergedDescriptionResponse": set(MEMBERS),
    "GroupDescription": set(MEMBERS),
    "ComparisonResponse": {"quantile_shifts", "standardized_quantiles"},
}


def test_enumerations_are_named_components_with_distinct_varnames(document):
    schemas = document["components"]["schemas"]
    enums = {name: s for name, s in schemas.items() if "enum" in s}
    assert {"SkewnessEstimator", "KurtosisEstimator", "Convention", "IntervalMethod", "InputKind"} <= set(enums)
    for name, schema in enums.items():
        names = schema["x-enum-varnames"]
        assert len(names) == len(schema["enum"]) == len({n.upper() for n in names}), name
    skewness = dict(zip(schemas["SkewnessEstimator"]["enum"], schemas["SkewnessEstimator"]["x-enum-varnames"]))
    assert skewness == {"g1": "G1_PLUG_IN", "G1": "G1_ADJUSTED", "b1": "B1_SAMPLE_SD"}
    # No enumeration is left inline, except tags, which are constants.
    for where, node in _nodes(schemas):
        if "enum" in node:
            assert where.count("/") == 1, f"inline enum at {where}"


def _nodes(node, where="#"):
    if isinstance(node, dict):
        yield where, node
        for key, value in node.items():
            yield from _nodes(value, f"{where}/{key}")
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _nodes(value, f"{where}/{index}")


@pytest.mark.parametrize("op", [op for op in OPERATIONS if op.request is not None], ids=lambda op: op.path)
def test_null_options_mean_the_defaults(client, op):
    body = dict(op.example)
    body["options"] = None
    nulled = client.post(op.path, json=body)
    del body["options"]
    absent = client.post(op.path, json=body)
    assert nulled.status_code == absent.status_code == 200, nulled.text
    assert nulled.json() == absent.json()


def test_comparison_inputs_take_null_options(client):
    body = {
        "first": {"kind": "samples", "values": [1, 2, 3, 5], "options": None},
        "second": {"kind": "table", "outcomes": [{"value": 1, "weight": 2}], "weight_kind": "counts", "options": None},
    }
    assert client.post("/v1/comparisons", json=body).status_code == 200


def test_servers_license_and_tags(document):
    assert document["servers"] == [{"url": "/", "description": "The server that serves this document."}]
    assert document["info"]["license"]["name"]
    tags = {tag["name"]: tag["description"] for tag in document["tags"]}
    used = {tag for item in document["paths"].values() for op in item.values() for tag in op["tags"]}
    assert used == set(tags) and all(tags.values())


@pytest.mark.parametrize("metrics_token", [False, True])
def test_security_follows_the_apps_token_rule(make_client, metrics_token):
    """An operation is under the (optional) bearer scheme exactly when the app asks it for a token."""
    document = json.loads(openapi.document_bytes(metrics_require_token=metrics_token))
    assert document["security"] == [{}, {"bearerToken": []}]
    assert "TAILGAUGE_API_TOKENS" in document["components"]["securitySchemes"]["bearerToken"]["description"]
    guarded = make_client(api_tokens=("a-token-of-sixteen-chars",), metrics_require_token=metrics_token)
    for op in OPERATIONS:
        operation = document["paths"][op.path][op.method]
        if op.method == "post":
            answer = guarded.post(op.path, json=op.example)
        else:
            answer = guarded.get(op.path)
        asks = answer.status_code == 401
        assert ("security" not in operation) == asks, (op.path, answer.status_code)
        if not asks:
            assert operation["security"] == []
        else:
            assert "401" in operation["responses"]
    served = guarded.get("/openapi.json")
    assert served.status_code == 200 and served.json() == document


def test_the_served_document_follows_the_metrics_setting(make_client):
    protected = make_client(metrics_require_token=True).get("/openapi.json").json()
    assert "security" not in protected["paths"]["/metrics"]["get"]
    assert make_client().get("/openapi.json").json()["paths"]["/metrics"]["get"]["security"] == []


def test_every_operation_declares_its_problems_with_the_problem_schema(document):
    problem = "#/components/schemas/Problem"
    for op in OPERATIONS:
        responses = document["paths"][op.path][op.method]["responses"]
        declared = {int(s) for s in responses if 400 <= int(s) < 500}
        assert declared == {s for s in op.problems if s < 500}, op.path
        for status in op.problems:
            content = responses[str(status)]["content"]
            assert set(content) == {PROBLEM, "application/problem+msgpack"}
            assert all(c["schema"] == {"$ref": problem} for c in content.values())
