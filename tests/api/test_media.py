"""Content negotiation: JSON and MessagePack in x out, the float64-bytes fast path, 406/415.

Outside reference: the MessagePack encoding itself comes from msgspec, and the descriptors are
compared between formats (the same request must give the same numbers whatever carries it).
"""

from __future__ import annotations

import base64
import json

import msgspec
import numpy as np
import pytest

SAMPLES = "/v1/descriptors/samples"
TABLE = "/v1/descriptors/table"
BINS = "/v1/descriptors/bins"
MSGPACK = "application/msgpack"

rng = np.random.default_rng(20261201)
VALUES = rng.gamma(2.0, 3.0, size=500)
WEIGHTS = rng.integers(1, 5, size=500).astype(float)

BODIES = {
    SAMPLES: {"values": VALUES.tolist(), "options": {"probabilities": [0.1, 0.5, 0.9]}},
    TABLE: {"outcomes": [{"value": 1.5, "weight": 3}, {"value": 2.0, "weight": 5}, {"value": 4.0, "weight": 2}],
            "weight_kind": "counts"},
    BINS: {"edges": [0, 1, 2, 4, 8], "counts": [3, 9, 6, 2]},
}


def _send(client, path, body, content_type, accept=None):
    content = json.dumps(body).encode() if content_type == "application/json" else msgspec.msgpack.encode(body)
    headers = {"content-type": content_type}
    if accept:
        headers["accept"] = accept
    return client.post(path, content=content, headers=headers)


def _decoded(response):
    media = response.headers["content-type"]
    if "msgpack" in media:
        return msgspec.msgpack.decode(response.content)
    return json.loads(response.content)


@pytest.mark.parametrize("path", list(BODIES))
@pytest.mark.parametrize("content_type", ["application/json", MSGPACK, "application/x-msgpack"])
@pytest.mark.parametrize("accept", [None, "application/json", MSGPACK, "application/vnd.msgpack"])
def test_every_format_pair_gives_identical_descriptors(make_client, path, content_type, accept):
    client = make_client(request_log=False)
    reference = _send(client, path, BODIES[path], "application/json")
    assert reference.status_code == 200
    response = _send(client, path, BODIES[path], content_type, accept)
    assert response.status_code == 200, response.content
    expected_type = accept or "application/json"
    assert response.headers["content-type"].startswith(expected_type)
    assert _decoded(response) == reference.json()


def test_accept_with_quality_values_picks_the_preferred_format(make_client):
    client = make_client(request_log=False)
    response = _send(client, SAMPLES, BODIES[SAMPLES], "application/json",
                     accept="application/json;q=0.5, application/msgpack;q=0.9")
    assert response.headers["content-type"].startswith(MSGPACK)
    response = _send(client, SAMPLES, BODIES[SAMPLES], "application/json", accept="*/*")
    assert response.headers["content-type"].startswith("application/json")


def test_float64_bytes_equal_the_list_path(make_client):
    client = make_client(request_log=False)
    listed = _send(client, SAMPLES, {"values": VALUES.tolist(), "weights": WEIGHTS.tolist()}, MSGPACK)
    packed = _send(
        client,
        SAMPLES,
        {"values": VALUES.astype("<f8").tobytes(), "weights": WEIGHTS.astype("<f8").tobytes()},
        MSGPACK,
    )
    assert listed.status_code == packed.status_code == 200
    assert _decoded(packed) == _decoded(listed)


def test_big_endian_input_is_not_silently_accepted_as_the_same_numbers(make_client):
    """The bytes are little-endian by definition: the same numbers packed big-endian differ."""
    client = make_client(request_log=False)
    little = _decoded(_send(client, SAMPLES, {"values": np.array([1.0, 2.0, 4.0]).astype("<f8").tobytes()}, MSGPACK))
    assert little["descriptors"]["mean"]["value"] == pytest.approx(7.0 / 3.0)
    big = _send(client, SAMPLES, {"values": np.array([1.0, 2.0, 4.0]).astype(">f8").tobytes()}, MSGPACK)
    # Read as little-endian, big-endian 1.0, 2.0, 4.0 are tiny subnormal numbers, not 7/3 on average.
    assert big.status_code == 200
    assert _decoded(big)["descriptors"]["mean"]["value"] < 1e-300


def test_base64_float64_in_json_equals_the_list_path(make_client):
    client = make_client(request_log=False)
    encoded = base64.b64encode(VALUES.astype("<f8").tobytes()).decode()
    packed = _send(client, SAMPLES, {"values": encoded}, "application/json")
    listed = _send(client, SAMPLES, {"values": VALUES.tolist()}, "application/json")
    assert packed.status_code == 200
    assert packed.json() == listed.json()


def test_bin_counts_as_bytes_equal_the_list_path(make_client):
    client = make_client(request_log=False)
    counts = np.array([3.0, 9.0, 6.0, 2.0])
    packed = _send(client, BINS, {"edges": [0, 1, 2, 4, 8], "counts": counts.tobytes()}, MSGPACK)
    listed = _send(client, BINS, {"edges": [0, 1, 2, 4, 8], "counts": counts.tolist()}, MSGPACK)
    assert packed.status_code == 200
    assert _decoded(packed) == _decoded(listed)


def test_nan_in_bytes_is_a_missing_value(make_client):
    client = make_client(request_log=False)
    raw = np.array([1.0, np.nan, 3.0]).tobytes()
    rejected = _send(client, SAMPLES, {"values": raw}, MSGPACK)
    assert rejected.status_code == 422
    assert [e["path"] for e in _decoded(rejected)["errors"]] == ["$.values[1]"]
    omitted = _send(client, SAMPLES, {"values": raw, "options": {"missing": "omit"}}, MSGPACK)
    body = _decoded(omitted)
    assert omitted.status_code == 200
    assert body["descriptors"]["mean"]["value"] == 2.0


@pytest.mark.parametrize(
    ("body", "path"),
    [
        ({"values": b"\x00" * 12}, "$.values"),
        ({"values": np.array([1.0, np.inf]).tobytes()}, "$.values[1]"),
        ({"values": np.array([1.0, 2.0]).tobytes(), "weights": np.array([1.0, -1.0]).tobytes()}, "$.weights[1]"),
        ({"values": np.array([1.0, 2.0]).tobytes(), "weights": np.array([np.nan, 1.0]).tobytes()}, "$.weights[0]"),
        ({"values": b"abc"}, "$.values"),
        ({"values": [1.0, float("nan")]}, "$.values[1]"),
        ({"values": [float("inf")]}, "$.values[0]"),
    ],
)
def test_bad_bytes_and_non_finite_numbers_are_located_400s(make_client, body, path):
    client = make_client(request_log=False)
    response = _send(client, SAMPLES, body, MSGPACK, accept=MSGPACK)
    assert response.status_code == 400
    assert response.headers["content-type"] == "application/problem+msgpack"
    problem = msgspec.msgpack.decode(response.content)
    assert problem["type"] == "urn:tailgauge:problem:invalid-body"
    assert path in [e["path"] for e in problem["errors"]]


def test_malformed_msgpack_is_a_400_in_the_format_asked_for(make_client):
    client = make_client(request_log=False)
    response = client.post(SAMPLES, content=b"\x81\xa6val", headers={"content-type": MSGPACK, "accept": MSGPACK})
    assert response.status_code == 400
    problem = msgspec.msgpack.decode(response.content)
    assert "MessagePack" in problem["detail"]
    as_json = client.post(SAMPLES, content=b"\x81\xa6val", headers={"content-type": MSGPACK})
    assert as_json.headers["content-type"] == "application/problem+json"
    assert as_json.json()["status"] == 400


@pytest.mark.parametrize("media", ["text/plain", "application/xml", "", "application/jsonx"])
def test_unserved_body_types_are_415(make_client, media):
    client = make_client(request_log=False)
    headers = {"content-type": media} if media else {}
    response = client.post(SAMPLES, content=b'{"values": [1, 2]}', headers=headers)
    assert response.status_code == 415
    assert response.json()["errors"][0]["path"] == "header.content-type"


@pytest.mark.parametrize("path", [SAMPLES, "/v1/catalog"])
def test_unacceptable_answer_types_are_406(make_client, path):
    client = make_client(request_log=False)
    headers = {"accept": "text/html", "content-type": "application/json"}
    if path == SAMPLES:
        response = client.post(path, content=b'{"values": [1, 2]}', headers=headers)
    else:
        response = client.get(path, headers=headers)
    assert response.status_code == 406
    assert response.json()["errors"][0]["path"] == "header.accept"


def test_catalog_in_msgpack_equals_json(make_client):
    client = make_client(request_log=False)
    as_json = client.get("/v1/catalog").json()
    packed = client.get("/v1/catalog", headers={"accept": MSGPACK})
    assert packed.headers["content-type"].startswith(MSGPACK)
    assert msgspec.msgpack.decode(packed.content) == as_json


def test_openapi_documents_both_media_types(client):
    document = client.get("/openapi.json").json()
    for path in (SAMPLES, TABLE, BINS):
        operation = document["paths"][path]["post"]
        assert set(operation["requestBody"]["content"]) == {"application/json", MSGPACK}
        # Figures of the answer too (tests/api/test_figures_api.py checks what they hold).
        assert set(operation["responses"]["200"]["content"]) == {"application/json", MSGPACK, "image/svg+xml", "image/png"}
        assert set(operation["responses"]["400"]["content"]) == {
            "application/problem+json",
            "application/problem+msgpack",
        }


# Regression: litestar's best_match ignores q=0, so "application/json;q=0" was answered in JSON.
@pytest.mark.parametrize(
    "accept",
    ["application/json;q=0", "*/*;q=0", "application/json;q=0, application/*;q=0", "application/*;q=0",
     "application/json;q=0, */*;q=0", "application/json; q=0.0, text/html"],
)
def test_a_quality_of_zero_refuses_a_type_406(make_client, accept):
    client = make_client(request_log=False)
    for response in (_send(client, SAMPLES, BODIES[SAMPLES], "application/json", accept=accept),
                     client.get("/v1/catalog", headers={"accept": accept})):
        assert response.status_code == 406, (accept, response.headers["content-type"])
        assert response.headers["content-type"] == "application/problem+json"
        assert response.json()["errors"][0]["path"] == "header.accept"


@pytest.mark.parametrize(
    ("accept", "answered"),
    [
        ("application/json;q=0, */*", MSGPACK),  # the specific q=0 wins over the wildcard
        ("*/*;q=0, application/msgpack", MSGPACK),
        ("application/msgpack;q=0, application/*;q=0.3", "application/json"),
        ("application/json;q=0.2, application/x-msgpack;q=0.7", "application/x-msgpack"),
        ("application/msgpack, */*", MSGPACK),  # equal quality: the more specific range
        ("text/html, */*;q=0.1", "application/json"),
        ("application/json;q=0.5, application/json;q=bad", "application/json"),
    ],
)
def test_quality_values_choose_the_answer(make_client, accept, answered):
    from tailgauge.api.media import negotiate

    client = make_client(request_log=False)
    response = client.get("/v1/catalog", headers={"accept": accept})
    assert response.status_code == 200 and response.headers["content-type"].startswith(answered), accept
    assert negotiate(accept, ["application/json", MSGPACK, "application/x-msgpack"]) == answered


# Regression: a gzip body was read as if it were plain JSON. Since issue 20 gzip (one layer) is
# inflated (tests/api/test_compression.py); every other coding is still refused.
@pytest.mark.parametrize("coding", ["deflate", "br", "x-custom", "gzip, gzip", "gzip, br", "identity, deflate"])
@pytest.mark.parametrize("path", list(BODIES))
def test_a_content_coding_other_than_gzip_or_identity_is_415(make_client, coding, path):
    import gzip

    client = make_client(request_log=False)
    content = gzip.compress(json.dumps(BODIES[path]).encode())
    response = client.post(path, content=content,
                           headers={"content-type": "application/json", "content-encoding": coding})
    assert response.status_code == 415
    problem = response.json()
    assert problem["type"] == "urn:tailgauge:problem:unsupported-media-type"
    assert problem["errors"][0]["path"] == "header.content-encoding"
    assert response.headers["accept-encoding"] == "gzip"


def test_identity_content_coding_is_accepted(make_client):
    client = make_client(request_log=False)
    response = client.post(SAMPLES, content=json.dumps(BODIES[SAMPLES]),
                           headers={"content-type": "application/json", "content-encoding": "identity"})
    assert response.status_code == 200
