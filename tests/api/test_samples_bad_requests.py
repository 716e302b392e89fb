"""POST /v1/descriptors/samples through HTTP with every kind of bad request: each is an RFC 9457
problem (status, type, title, detail, the field named by path), never a 500; the limits taken from
Settings; and the service still healthy after all of them.

No outside reference values: the expected statuses, problem types and paths are the service's own
contract.
"""

from __future__ import annotations

import json

import pytest

from tests.api.samples_cases import PROBLEM

SAMPLES = "/v1/descriptors/samples"


# ---------------------------------------------------------------------------------------------
# (e) bad input: problem details, never a 500
# ---------------------------------------------------------------------------------------------

JSON = {"content-type": "application/json"}

# (id, body bytes, headers, expected status, expected problem slug, expected error path or None)
BAD_REQUESTS = [
    ("empty-values", b'{"values":[]}', JSON, 400, "invalid-body", "$.values"),
    ("values-not-a-list", b'{"values":"250.1"}', JSON, 400, "invalid-body", "$.values"),
    ("string-value", b'{"values":[250.1,"251.0"]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("boolean-value", b'{"values":[250.1,true]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("object-value", b'{"values":[250.1,2,{"g":1}]}', JSON, 400, "invalid-body", "$.values[2]"),
    ("missing-values", b'{"options":{}}', JSON, 400, "invalid-body", "$.values"),
    ("unknown-top-level", b'{"values":[1],"valeus":[1]}', JSON, 400, "invalid-body", "$.valeus"),
    ("unknown-option", b'{"values":[1],"options":{"ddof":1}}', JSON, 400, "invalid-body", "$.options.ddof"),
    ("options-not-object", b'{"values":[1],"options":[]}', JSON, 400, "invalid-body", "$.options"),
    ("bad-convention", b'{"values":[1],"options":{"convention":"unbiased"}}', JSON, 400, "invalid-body",
     "$.options.convention"),
    ("bad-skewness-family", b'{"values":[1],"options":{"skewness_estimator":"G2"}}', JSON, 400,
     "invalid-body", "$.options.skewness_estimator"),
    ("bad-missing-policy", b'{"values":[1],"options":{"missing":"zero"}}', JSON, 400, "invalid-body",
     "$.options.missing"),
    ("overflowing-number", b'{"values":[1e400]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("overflowing-negative", b'{"values":[2,-1e400]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("huge-integer", b'{"values":[1' + b"0" * 400 + b"]}", JSON, 400, "invalid-body", "$.values[0]"),
    # NaN and Infinity are not JSON tokens; the syntax error's byte offset is mapped to the
    # path of the value being read.
    ("nan-token", b'{"values":[1,NaN]}', JSON, 400, "invalid-body", "$.values[1]"),
    ("infinity-token", b'{"values":[Infinity]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("minus-infinity-token", b'{"values":[-Infinity]}', JSON, 400, "invalid-body", "$.values[0]"),
    ("truncated-json", b'{"values":[1,2', JSON, 400, "invalid-body", "$"),
    ("empty-body", b"", JSON, 400, "invalid-body", "$"),
    ("not-json", b"values=1,2,3", JSON, 400, "invalid-body", "$"),
    ("top-level-array", b"[1,2,3]", JSON, 400, "invalid-body", "$"),
    ("top-level-number", b"3", JSON, 400, "invalid-body", "$"),
    ("probability-above-one", b'{"values":[1],"options":{"probabilities":[0.5,1.5]}}', JSON, 400,
     "invalid-body", "$.options.probabilities[1]"),
    ("probability-below-zero", b'{"values":[1],"options":{"probabilities":[-0.01]}}', JSON, 400,
     "invalid-body", "$.options.probabilities[0]"),
    ("quantile-type-0", b'{"values":[1],"options":{"quantile_type":0}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("quantile-type-10", b'{"values":[1],"options":{"quantile_type":10}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("quantile-type-float", b'{"values":[1],"options":{"quantile_type":7.5}}', JSON, 400, "invalid-body",
     "$.options.quantile_type"),
    ("moment-order-13", b'{"values":[1],"options":{"moment_order":13}}', JSON, 400, "invalid-body",
     "$.options.moment_order"),
    ("moment-order-0", b'{"values":[1],"options":{"moment_order":0}}', JSON, 400, "invalid-body",
     "$.options.moment_order"),
    ("too-many-probabilities", b'{"values":[1],"options":{"probabilities":[' + b",".join([b"0.5"] * 1001)
     + b"]}}", JSON, 400, "invalid-body", "$.options.probabilities"),
    ("null-in-values", b'{"values":[1,null]}', JSON, 422, "uncomputable-input", "$.values[1]"),
    ("text-plain", b'{"values":[1]}', {"content-type": "text/plain"}, 415, "unsupported-media-type",
     "header.content-type"),
    ("no-content-type", b'{"values":[1]}', {}, 415, "unsupported-media-type", "header.content-type"),
    ("form-content-type", b"values=1", {"content-type": "application/x-www-form-urlencoded"}, 415,
     "unsupported-media-type", "header.content-type"),
    ("accept-html", b'{"values":[1]}', {**JSON, "accept": "text/html"}, 406, "not-acceptable",
     "header.accept"),
]


def assert_problem(response, body, status: int, slug: str, path: str | None) -> None:
    assert response.status_code == status, response.text
    assert response.headers["content-type"].split(";")[0] == PROBLEM
    assert set(body) >= {"type", "title", "status", "detail", "errors"}
    assert body["status"] == status
    assert body["type"].endswith(slug), body["type"]
    assert isinstance(body["title"], str) and body["title"]
    assert isinstance(body["detail"], str) and body["detail"]
    if path is not None:
        assert path in [e["path"] for e in body["errors"]], body["errors"]
        assert all(e["message"] for e in body["errors"])


@pytest.mark.parametrize(
    ("body", "headers", "status", "slug", "path"),
    [case[1:] for case in BAD_REQUESTS],
    ids=[case[0] for case in BAD_REQUESTS],
)
def test_bad_request_is_a_problem(client, strict_json, body, headers, status, slug, path):
    response = client.post(SAMPLES, content=body, headers=headers)
    assert_problem(response, strict_json(response), status, slug, path)


def test_content_type_with_charset_is_accepted(client, strict_json):
    response = client.post(
        SAMPLES, content=b'{"values":[1,2]}', headers={"content-type": "application/json; charset=utf-8"}
    )
    assert response.status_code == 200
    assert strict_json(response)["size"]["n"] == 2


@pytest.mark.parametrize(
    "accept", ["application/json", "*/*", "application/*", "text/html, application/json;q=0.5"]
)
def test_accept_headers_that_allow_json(client, accept):
    response = client.post(SAMPLES, content=b'{"values":[1,2]}', headers={**JSON, "accept": accept})
    assert response.status_code == 200, response.text


def test_moment_order_limit_from_settings(make_client, post_json):
    limited = make_client(max_moment_order=6)
    response, body = post_json(limited, {"values": [1.0, 2.0, 4.0], "options": {"moment_order": 8}})
    assert_problem(response, body, 422, "limit-exceeded", "$.options.moment_order")
    response, body = post_json(limited, {"values": [1.0, 2.0, 4.0], "options": {"moment_order": 6}})
    assert response.status_code == 200 and len(body["moments"]["raw"]) == 6


def test_probability_count_limit_from_settings(make_client, post_json):
    limited = make_client(max_probabilities=3)
    too_many = {"values": [1.0, 2.0], "options": {"probabilities": [0.1, 0.2, 0.3, 0.4]}}
    response, body = post_json(limited, too_many)
    assert_problem(response, body, 422, "limit-exceeded", "$.options.probabilities")
    response, _ = post_json(limited, {"values": [1.0, 2.0], "options": {"probabilities": [0.1, 0.2, 0.3]}})
    assert response.status_code == 200


def test_value_count_limit_from_settings(make_client, post_json):
    limited = make_client(max_values=10)
    response, body = post_json(limited, {"values": [float(i) for i in range(11)]})
    assert_problem(response, body, 413, "body-too-large", "$.values")
    # nulls count as observations for the limit, omitted or not
    response, body = post_json(
        limited, {"values": [float(i) for i in range(10)] + [None], "options": {"missing": "omit"}}
    )
    assert_problem(response, body, 413, "body-too-large", "$.values")
    response, body = post_json(limited, {"values": [float(i) for i in range(10)]})
    assert response.status_code == 200 and body["size"]["n"] == 10


def test_body_size_limit_from_settings(make_client, post_json):
    limited = make_client(max_body_bytes=2048)
    big = json.dumps({"values": [251.3] * 500}).encode()
    assert len(big) > 2048
    response, body = post_json(limited, big)
    assert_problem(response, body, 413, "body-too-large", None)
    small = json.dumps({"values": [251.3] * 250}).encode()
    assert len(small) <= 2048
    response, body = post_json(limited, small)
    assert response.status_code == 200 and body["size"]["n"] == 250


def test_get_on_post_route_is_405(client, strict_json):
    response = client.get(SAMPLES)
    assert_problem(response, strict_json(response), 405, "method-not-allowed", None)


@pytest.mark.parametrize("path", ["/v1/descriptors/sample", "/v2/descriptors/samples", "/nothing"])
def test_unknown_path_is_404(client, strict_json, path):
    response = client.post(path, content=b'{"values":[1]}', headers=JSON)
    assert_problem(response, strict_json(response), 404, "not-found", None)
    response = client.get(path)
    assert_problem(response, strict_json(response), 404, "not-found", None)


def test_service_still_healthy_after_every_bad_request(client, make_client, strict_json):
    for _, body, headers, status, _, _ in BAD_REQUESTS:
        response = client.post(SAMPLES, content=body, headers=headers)
        assert response.status_code == status
    assert client.get(SAMPLES).status_code == 405
    assert client.get("/nothing").status_code == 404
    limited = make_client(max_values=10, max_body_bytes=2048, max_moment_order=6)
    extra = [
        limited.post(SAMPLES, content=b'{"values":[' + b"1," * 10 + b"1]}", headers=JSON),
        limited.post(SAMPLES, content=b'{"values":[' + b"1.5," * 600 + b"1]}", headers=JSON),
        limited.post(SAMPLES, content=b'{"values":[1],"options":{"moment_order":8}}', headers=JSON),
    ]
    assert [r.status_code for r in extra] == [413, 413, 422]
    for app_client in (client, limited):
        live = app_client.get("/health/live")
        assert live.status_code == 200 and strict_json(live) == {"status": "ok"}
        assert app_client.get("/health/ready").status_code == 200
        response = app_client.post(SAMPLES, content=b'{"values":[1,2,3]}', headers=JSON)
        assert response.status_code == 200 and strict_json(response)["descriptors"]["mean"]["value"] == 2.0
