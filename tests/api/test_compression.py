"""gzip on the wire (service/tailgauge/api/compression.py; issue 20).

Request bodies: a gzip body is inflated and then treated exactly as the same plain body; a gzip
bomb is a 413 after at most the body limit plus one byte of output (counted by wrapping zlib's
decompressor); the admission bound and the memory plan see the inflated size. Answers: gzip when
Accept-Encoding accepts it (RFC 9110, section 12.5.3) and the answer reaches MIN_GZIP_BYTES,
with Vary: Accept-Encoding on every answer that could have been compressed.
"""

from __future__ import annotations

import gzip
import json
import zlib

import pytest

from tailgauge.api import admission, compression
from tailgauge.api.compression import MIN_GZIP_BYTES, accepts_gzip, inflate
from tailgauge.api.problems import ApiProblem

SAMPLES = "/v1/descriptors/samples"
JSON_HEADERS = {"content-type": "application/json"}
# httpx asks for gzip by default; a plain answer has to be asked for.
PLAIN = {"accept-encoding": "identity"}
GZIP_BODY = {**JSON_HEADERS, "content-encoding": "gzip"}
# Invented scenario: minutes a ferry waited at its berth on ten crossings.
WAITS = {"values": [4.5, 6.0, 3.25, 8.75, 5.5, 12.0, 4.0, 7.25, 6.5, 5.0]}


def _bomb(inflated_bytes: int) -> bytes:
    """gzip of ``inflated_bytes`` spaces inside a JSON array, built a megabyte at a time."""
    packer = zlib.compressobj(9, zlib.DEFLATED, 16 + zlib.MAX_WBITS)
    parts = [packer.compress(b'{"values": [1')]
    block = b" " * 2**20
    for _ in range(inflated_bytes // len(block)):
        parts.append(packer.compress(block))
    parts.append(packer.compress(b"]}"))
    parts.append(packer.flush())
    return b"".join(parts)


class _CountingDecompressor:
    """zlib's decompressor, counting every byte it hands out (over all instances)."""

    produced = 0

    def __init__(self, *args, **kwargs):
        self._inner = _REAL_DECOMPRESSOBJ(*args, **kwargs)

    def decompress(self, data, max_length=0):
        chunk = self._inner.decompress(data, max_length)
        _CountingDecompressor.produced += len(chunk)
        return chunk

    def __getattr__(self, name):
        return getattr(self._inner, name)


_REAL_DECOMPRESSOBJ = zlib.decompressobj


@pytest.fixture
def counting(monkeypatch):
    _CountingDecompressor.produced = 0
    monkeypatch.setattr(compression.zlib, "decompressobj", _CountingDecompressor)
    return _CountingDecompressor


# ---- inflating ------------------------------------------------------------------------------


def test_inflate_gives_back_the_bytes_of_one_or_several_members():
    plain = json.dumps(WAITS).encode()
    assert inflate(gzip.compress(plain), 10_000) == plain
    # RFC 1952, section 2.2: a gzip file is a series of members; Python's gzip module reads them all.
    two = gzip.compress(plain[:20]) + gzip.compress(plain[20:])
    assert inflate(two, 10_000) == plain == gzip.decompress(two)
    assert inflate(gzip.compress(b""), 10) == b""
    assert inflate(gzip.compress(b"x" * 100), 100) == b"x" * 100  # exactly at the limit


def test_a_bomb_is_refused_after_at_most_the_limit_plus_one_byte(counting):
    bomb = _bomb(256 * 2**20)  # 256 MiB of spaces in about 250 kB
    assert len(bomb) < 300_000
    with pytest.raises(ApiProblem) as refused:
        inflate(bomb, 65_536)
    assert refused.value.slug == "body-too-large"
    assert counting.produced <= 65_537


@pytest.mark.parametrize(
    ("body", "says"),
    [
        (b'{"values": [1, 2]}', "not valid gzip data"),
        (gzip.compress(b'{"values": [1, 2]}')[:-5], "ends before its last member does"),
        (gzip.compress(b"{}") + b"trailing", "not valid gzip data"),
        (gzip.compress(b"") * (compression.MAX_MEMBERS + 1), f"more than {compression.MAX_MEMBERS} gzip members"),
    ],
    ids=["plain", "truncated", "trailing-garbage", "too-many-members"],
)
def test_what_is_not_gzip_is_a_located_400(body, says):
    with pytest.raises(ApiProblem) as refused:
        inflate(body, 10_000)
    assert refused.value.slug == "invalid-body" and says in refused.value.detail
    assert [error.path for error in refused.value.errors] == ["$"]


# ---- gzip request bodies over HTTP ------------------------------------------------------------


def test_a_gzip_body_answers_as_the_same_plain_body(make_client):
    client = make_client(request_log=False)
    plain = client.post(SAMPLES, content=json.dumps(WAITS), headers=JSON_HEADERS)
    for coding in ("gzip", "x-gzip", "GZIP", "identity, gzip"):
        packed = client.post(SAMPLES, content=gzip.compress(json.dumps(WAITS).encode()),
                             headers={**JSON_HEADERS, "content-encoding": coding})
        assert packed.status_code == 200, (coding, packed.text)
        assert packed.content == plain.content, coding
    # Hand arithmetic: the ten waits sum to 62.75, so the mean is 6.275.
    assert abs(plain.json()["descriptors"]["mean"]["value"] - 6.275) < 1e-12


def test_a_gzip_bomb_over_http_is_413_before_inflating_past_the_limit(make_client, counting):
    client = make_client(request_log=False, max_body_bytes=1 << 20)
    response = client.post(SAMPLES, content=_bomb(128 * 2**20), headers=GZIP_BODY)
    assert response.status_code == 413
    problem = response.json()
    assert problem["type"] == "urn:tailgauge:problem:body-too-large"
    assert problem["errors"][0]["path"] == "$" and "inflates past this server's limit" in problem["detail"]
    assert counting.produced <= (1 << 20) + 1
    assert client.get("/health/live").status_code == 200


def test_the_admission_bound_and_the_plan_see_the_inflated_body(make_client, monkeypatch):
    seen = []
    real = admission._decoding

    def spy(body, codec, settings):
        seen.append(len(body))
        return real(body, codec, settings)

    monkeypatch.setattr(admission, "_decoding", spy)
    client = make_client(request_log=False, max_values=1_000)
    # Beyond the entries any accepted request can hold (2 x max_values + 100,000 of slack): the
    # compressed body holds few commas, the inflated one 150,000.
    many = json.dumps({"values": [0.5] * 150_000}).encode()
    packed = gzip.compress(many)
    assert packed.count(b",") < 1_000
    response = client.post(SAMPLES, content=packed, headers=GZIP_BODY)
    assert response.status_code == 413
    assert "the body holds 150000 entries" in response.json()["detail"]
    assert seen == [len(many)]
    seen.clear()
    small = json.dumps(WAITS).encode()
    assert client.post(SAMPLES, content=gzip.compress(small), headers=GZIP_BODY).status_code == 200
    assert seen == [len(small)]


def test_the_plan_counts_the_compressed_bytes_held_beside_the_inflated_body():
    from tailgauge.api.media import JSON_CODEC
    from tailgauge.settings import Settings

    plain = json.dumps({"values": [float(i) for i in range(20_000)]}).encode()
    packed = gzip.compress(plain)
    inflated = inflate(packed, 1 << 20)
    assert inflated == plain and inflated.compressed_size == len(packed)
    settings = Settings()
    difference = (admission.decoding_bytes(inflated, JSON_CODEC, settings)
                  - admission.decoding_bytes(plain, JSON_CODEC, settings))
    assert difference == len(packed)


# ---- gzip answers -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("header", "accepted"),
    [
        (["gzip"], True),
        (["x-gzip"], True),
        (["GZip;q=0.5"], True),
        (["br, gzip;q=0.1"], True),
        (["deflate", "gzip"], True),
        (["*"], True),
        (["*;q=0.2, br"], True),
        (["gzip;q=0, *"], False),
        (["gzip;q=0"], False),
        (["br"], False),
        (["identity"], False),
        ([""], False),
        ([], False),
        (["*;q=0"], False),
        (["gzip;q=oops"], False),
    ],
)
def test_accept_encoding_follows_rfc_9110(header, accepted):
    assert accepts_gzip(header) is accepted


def test_a_large_answer_is_gzip_when_accepted_with_vary(make_client):
    client = make_client(request_log=False)
    plain = client.post(SAMPLES, content=json.dumps(WAITS), headers={**JSON_HEADERS, **PLAIN})
    assert len(plain.content) >= MIN_GZIP_BYTES
    assert "content-encoding" not in plain.headers and plain.headers["vary"] == "Accept-Encoding"
    packed = client.post(SAMPLES, content=json.dumps(WAITS), headers={**JSON_HEADERS, "accept-encoding": "gzip"})
    assert packed.headers["content-encoding"] == "gzip" and packed.headers["vary"] == "Accept-Encoding"
    # httpx inflates for us; the bytes on the wire were fewer, and Content-Length counts them.
    assert packed.content == plain.content
    assert int(packed.headers["content-length"]) < len(plain.content) // 2
    refused = client.post(SAMPLES, content=json.dumps(WAITS),
                          headers={**JSON_HEADERS, "accept-encoding": "gzip;q=0, *"})
    assert "content-encoding" not in refused.headers and refused.content == plain.content


def test_a_small_answer_is_sent_as_it_is(make_client):
    client = make_client(request_log=False)
    body = {"values": [1, 2, 3], "options": {"descriptors": ["mean"]}}
    response = client.post(SAMPLES, content=json.dumps(body), headers={**JSON_HEADERS, "accept-encoding": "gzip"})
    assert response.status_code == 200 and len(response.content) < MIN_GZIP_BYTES
    assert "content-encoding" not in response.headers and response.headers["vary"] == "Accept-Encoding"


@pytest.mark.parametrize("path", ["/v1/catalog", "/openapi.json", "/metrics"])
def test_built_answers_are_gzip_when_accepted(make_client, path):
    client = make_client(request_log=False)
    plain = client.get(path, headers=PLAIN)
    assert "content-encoding" not in plain.headers
    packed = client.get(path, headers={"accept-encoding": "gzip"})
    assert plain.status_code == packed.status_code == 200
    assert packed.headers["content-encoding"] == "gzip" and packed.headers["vary"] == "Accept-Encoding"
    assert int(packed.headers["content-length"]) < len(packed.content)
    if path != "/metrics":  # the metrics change between two scrapes
        assert packed.content == plain.content


def test_the_compressed_answer_is_gzip_of_the_plain_one():
    body = json.dumps({"values": list(range(1000))}).encode()
    sent, headers = compression.answer(body, True)
    assert headers == {"Content-Encoding": "gzip", "Vary": "Accept-Encoding"}
    assert gzip.decompress(sent) == body
    assert compression.answer(body, False) == (body, {"Vary": "Accept-Encoding"})
    assert compression.answer(body[:MIN_GZIP_BYTES - 1], True)[1] == {"Vary": "Accept-Encoding"}
