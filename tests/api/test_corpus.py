"""The bad-input corpus (tests/corpus): every case gets its 4xx problem naming the field, and the server stays up.

Each case's file is sent byte for byte with the case's Content-Type and Accept headers to an app
with the corpus's limits (tests/corpus/cases.json, written by tests/corpus/make_corpus.py). The
answer must be an RFC 9457 problem of the expected status and type, in the media type the Accept
header asks for, whose errors name every expected path, whose texts hold the case's ``says`` and
no library or internal names (msgspec's backtick type syntax, Python type names, our
underscore-prefixed identifiers). After the whole corpus the same app, and
in one test a real gunicorn server, still answer /health/live and a valid request.
"""

from __future__ import annotations

import collections
import http.client
import json
import re
from pathlib import Path

import msgspec
import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app
from tailgauge.settings import Settings
from tests.system.server import GunicornServer

CORPUS = Path(__file__).resolve().parents[1] / "corpus"
INDEX = json.loads((CORPUS / "cases.json").read_text())
CASES = INDEX["cases"]
SETTINGS = {"request_log": False, **INDEX["settings"]}
PROBLEM = "urn:tailgauge:problem:"
MSGPACK_ANSWERS = ("application/msgpack", "application/x-msgpack")
# Categories of the issue that every compute endpoint has cases of, in JSON and in MessagePack.
EVERY_ENDPOINT = ("malformed-msgpack", "wrong-types", "over-limits", "unknown-fields", "wrong-media-types")
# Texts that belong to the implementation, never to a problem a caller reads.
JARGON = ("`", "Expected `", "msgspec", "Struct", "NoneType", "float |", "int |", "| None", "typing.", "<class",
          "Traceback", "tailgauge.")
PRIVATE_NAME = re.compile(r"(?<![\w$.\[])_[A-Za-z]\w*")
VALID_BODY = {"values": [502.1, 498.7, 505.3, 499.9, 501.4, 497.2, 503.8]}  # a fictional bakery's loaves


def _reject_constant(token: str):
    raise ValueError(f"non-JSON token {token}")


def headers_of(case: dict) -> list[tuple[str, str]]:
    """The header lines of ``case``, in order; a name may repeat."""
    sent = []
    if case["content_type"] is not None:
        sent.append(("Content-Type", case["content_type"]))
    if case["accept"] is not None:
        sent.append(("Accept", case["accept"]))
    sent.extend((name, value) for name, value in case.get("headers", []))
    return sent


def body_of(case: dict) -> bytes:
    return (CORPUS / case["file"]).read_bytes()


def problems_with(case: dict, status: int, content_type: str, content: bytes) -> list[str]:
    """Everything wrong with the answer to ``case`` (empty when it is the expected problem)."""
    wrong = []
    if status != case["status"]:
        wrong.append(f"status {status}, expected {case['status']}")
    wants_msgpack = (case["accept"] or "").startswith(MSGPACK_ANSWERS)
    media = content_type.split(";")[0].strip()
    expected_media = "application/problem+msgpack" if wants_msgpack else "application/problem+json"
    if media != expected_media:
        return [*wrong, f"answered as {media!r}, expected {expected_media}: {content[:200]!r}"]
    try:
        if wants_msgpack:
            problem = msgspec.msgpack.decode(content)
        else:
            problem = json.loads(content, parse_constant=_reject_constant)
    except ValueError as error:
        return [*wrong, f"undecodable problem: {error}"]
    if problem.get("type") != PROBLEM + case["slug"]:
        wrong.append(f"type {problem.get('type')!r}, expected {PROBLEM + case['slug']}")
    if problem.get("status") != status:
        wrong.append(f"problem status {problem.get('status')!r} differs from the HTTP status {status}")
    for member in ("title", "detail"):
        if not isinstance(problem.get(member), str) or not problem[member]:
            wrong.append(f"no {member}")
    errors = problem.get("errors")
    if not isinstance(errors, list) or not errors:
        return [*wrong, f"the problem names no field: {problem!r}"]
    paths = [error.get("path") for error in errors]
    for error in errors:
        if not str(error.get("path", "")).startswith(("$", "header.", "path")) or not error.get("message"):
            wrong.append(f"error without a field path and message: {error!r}")
    missing = [path for path in case["paths"] if path not in paths]
    if missing:
        wrong.append(f"paths {missing} not named; named {paths} ({problem.get('detail')})")
    texts = [str(problem.get("detail", "")), *(str(error.get("message", "")) for error in errors)]
    for text in texts:
        found = [word for word in JARGON if word in text] + PRIVATE_NAME.findall(text)
        if found:
            wrong.append(f"{found} in {text!r}")
    for fragment in case.get("says", []):
        if not any(fragment in text for text in texts):
            wrong.append(f"{fragment!r} said nowhere in {texts}")
    return wrong


@pytest.fixture(scope="module")
def corpus_client():
    with TestClient(create_app(Settings(**SETTINGS))) as client:
        yield client


def post(client: TestClient, case: dict):
    # httpx joins a repeated header into one comma-separated line; the server refuses both forms.
    return client.request(case["method"], case["endpoint"], content=body_of(case) or None, headers=headers_of(case))


@pytest.mark.parametrize("case", CASES, ids=[case["id"] for case in CASES])
def test_each_case_gets_its_problem_naming_the_field(corpus_client, case):
    response = post(corpus_client, case)
    assert problems_with(case, response.status_code, response.headers.get("content-type", ""), response.content) == []


def test_the_corpus_covers_every_kind_of_bad_input():
    assert len(CASES) >= 80
    assert len({case["id"] for case in CASES}) == len(CASES)
    assert all((CORPUS / case["file"]).is_file() for case in CASES)
    assert {case["category"] for case in CASES} == {
        "malformed-json", "malformed-msgpack", "wrong-types", "nested-garbage", "out-of-range", "nan-infinity",
        "over-limits", "mismatched-lengths", "negative-zero-weights", "non-increasing-edges", "unknown-fields",
        "wrong-media-types", "msgpack-problems", "request-edges", "figures", "series-options",
    }
    endpoints = {case["endpoint"] for case in CASES if case["endpoint"].startswith("/v1/descriptors/")
                 or case["endpoint"] == "/v1/comparisons"}
    assert len(endpoints) == 6  # samples, table, bins, histogram, merge, comparisons
    formats = collections.defaultdict(set)
    for case in CASES:
        formats[(case["category"], case["endpoint"])].add(case["content_type"])
    for category in EVERY_ENDPOINT:
        for endpoint in endpoints:
            assert formats[(category, endpoint)], (category, endpoint)
    for category in ("wrong-types", "unknown-fields", "over-limits"):
        for endpoint in endpoints - {"/v1/descriptors/merge"} if category == "over-limits" else endpoints:
            assert {"application/json", "application/msgpack"} <= formats[(category, endpoint)], (category, endpoint)


def test_the_app_stays_up_after_the_whole_corpus(make_client):
    client = make_client(**SETTINGS)
    failures = {}
    for case in CASES:
        response = post(client, case)
        wrong = problems_with(case, response.status_code, response.headers.get("content-type", ""), response.content)
        if wrong:
            failures[case["id"]] = wrong
    assert failures == {}
    assert client.get("/health/live").status_code == 200
    answer = client.post("/v1/descriptors/samples", json=VALID_BODY)
    assert answer.status_code == 200 and answer.json()["size"]["n"] == len(VALID_BODY["values"])


class _LimitedServer(GunicornServer):
    """tests/system's gunicorn (2 workers, free 127.0.0.1 port) with the corpus's limits."""

    def environment(self) -> dict[str, str]:
        environ = super().environment()
        environ.update({f"TAILGAUGE_{name.upper()}": str(value) for name, value in INDEX["settings"].items()})
        return environ


def test_the_real_server_answers_the_whole_corpus_and_stays_up():
    with _LimitedServer(workers=2) as server:
        workers = server.worker_pids()
        connection = http.client.HTTPConnection("127.0.0.1", server.port, timeout=60)
        failures = {}
        try:
            for case in CASES:
                body = body_of(case)
                # Header by header: a name may repeat, and is sent as separate lines.
                connection.putrequest(case["method"], case["endpoint"], skip_accept_encoding=True)
                for name, value in [*headers_of(case), ("Content-Length", str(len(body)))]:
                    connection.putheader(name, value)
                connection.endheaders(body)
                response = connection.getresponse()
                content = response.read()
                wrong = problems_with(case, response.status, response.getheader("content-type", ""), content)
                if wrong:
                    failures[case["id"]] = wrong
                if response.getheader("connection", "").lower() == "close":
                    connection.close()
            connection.request("GET", "/health/live")
            live = connection.getresponse()
            live.read()
            connection.request("POST", "/v1/descriptors/samples", body=json.dumps(VALID_BODY),
                               headers={"Content-Type": "application/json"})
            valid = connection.getresponse()
            answer = json.loads(valid.read())
        finally:
            connection.close()
        assert failures == {}
        assert live.status == 200
        assert valid.status == 200 and answer["size"]["n"] == len(VALID_BODY["values"])
        # No worker crashed or was replaced while answering the corpus.
        assert server.worker_pids() == workers
