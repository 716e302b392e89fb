"""The document's response examples: the app's own answers to real requests.

:func:`record` builds the app in process (``create_app`` with litestar's test client) and sends,
for every operation of the endpoint table, its request example (the 200 example is the answer)
and a real request for each problem status it declares: the bodies of
``Operation.problem_examples`` for 400 and 422, and for the rest the request example sent
without a token to a server with tokens (401), asking for an answer in ``text/csv`` (406), to a
server with lower limits (413), as ``text/csv`` (415), or while the worker's memory is taken (503).

The recording is committed as ``examples.json`` beside this module (``make openapi`` writes it
with the document); the document and the served ``/openapi.json`` read that file, so a server
never sends example requests to itself (they would count in its metrics). A test records them
again and fails when the committed file differs, as it does for the document.

Every answer recorded is deterministic: no request asks for resampling (no seed is drawn), and
problem bodies carry no request id.
"""

from __future__ import annotations

import json
import threading
import time
from functools import cache
from pathlib import Path

import msgspec

from tailgauge.api.media import JSON
from tailgauge.api.operations import OPERATIONS, Operation
from tailgauge.settings import Settings

EXAMPLES_FILE = Path(__file__).with_name("examples.json")
_TOKEN = "example-token-0123456789"
# A memory pool of its own (gates are per configured size), held whole while the 503 is recorded.
_BUSY_MEMORY = 16 * 1024 * 1024 + 503


def _settings(**overrides) -> Settings:
    return Settings(request_log=False, **overrides)


def _send(client, op: Operation, body=None, headers: dict[str, str] | None = None):
    sent = {"accept": JSON}
    if op.method == "post":
        sent["content-type"] = JSON
    sent.update(headers or {})
    if op.method == "post":
        return client.post(op.path, content=json.dumps(op.example if body is None else body).encode(), headers=sent)
    return client.get(op.path, headers=sent)


def _too_large(op: Operation) -> tuple[Settings, dict | None]:
    """A server with lower limits, and a request beyond them."""
    if op.operation_id == "mergeStates":
        # States are bounded by the body size only: twelve of them pass a 1 KiB limit.
        return _settings(max_body_bytes=1024), {"states": op.example["states"] * 6}
    return _settings(max_values=4), None


def _answer(response, status: int) -> dict:
    if response.status_code != status:
        raise RuntimeError(
            f"recording the {status} example of {response.request.method} {response.request.url.path}: "
            f"the app answered {response.status_code}: {response.text[:500]}"
        )
    return msgspec.json.decode(response.content)


def _busy(op: Operation, into: dict) -> None:
    """Record the 503 of ``op`` while another request holds all of the worker's memory."""
    from litestar.testing import TestClient

    from tailgauge.api import create_app

    settings = _settings(max_request_memory_bytes=_BUSY_MEMORY, max_worker_memory_bytes=_BUSY_MEMORY, max_request_seconds=1)
    with TestClient(create_app(settings)) as client:
        into[op.operation_id] = _send(client, op)


def record() -> dict[str, dict[str, dict]]:
    """operation id -> status -> the app's answer (decoded JSON), for every declared JSON answer."""
    from litestar.testing import TestClient

    from tailgauge.api import admission, create_app
    from tailgauge.runtime.lifecycle import draining

    examples: dict[str, dict[str, dict]] = {op.operation_id: {} for op in OPERATIONS}
    busy = [op for op in OPERATIONS if 503 in op.problems]
    busy_answers: dict[str, object] = {}
    with (
        TestClient(create_app(_settings())) as plain,
        TestClient(create_app(_settings(api_tokens=(_TOKEN,), metrics_require_token=True))) as guarded,
        admission.gate_for(
            _settings(max_request_memory_bytes=_BUSY_MEMORY, max_worker_memory_bytes=_BUSY_MEMORY)
        ).hold(_BUSY_MEMORY, time.monotonic() + 60),
    ):
        # The 503s answer at once (the worker's memory is held); in threads, beside the rest.
        threads = [threading.Thread(target=_busy, args=(op, busy_answers)) for op in busy]
        for thread in threads:
            thread.start()
        for op in OPERATIONS:
            answers = examples[op.operation_id]
            if op.response is not None:
                answers["200"] = _answer(_send(plain, op), 200)
            for status in op.problems:
                if status in op.problem_examples:
                    answers[str(status)] = _answer(_send(plain, op, op.problem_examples[status]), status)
                elif status == 400:  # an operation without a body: a request header that is not valid
                    two = [("authorization", f"Bearer {_TOKEN}"), ("authorization", "Bearer another")]
                    headers = {"accept": JSON}
                    response = guarded.get(op.path, headers=[*headers.items(), *two])
                    answers["400"] = _answer(response, 400)
                elif status == 401:
                    answers["401"] = _answer(_send(guarded, op), 401)
                elif status == 406:
                    answers["406"] = _answer(_send(plain, op, headers={"accept": "text/csv"}), 406)
                elif status == 413:
                    settings, body = _too_large(op)
                    with TestClient(create_app(settings)) as limited:
                        answers["413"] = _answer(_send(limited, op, body), 413)
                elif status == 415:
                    answers["415"] = _answer(_send(plain, op, headers={"content-type": "text/csv"}), 415)
            for status in op.other_answers:
                if status == 503 and op.operation_id == "ready":
                    draining.set()
                    try:
                        answers["503"] = _answer(_send(plain, op), 503)
                    finally:
                        draining.clear()
        for thread in threads:
            thread.join(timeout=30)
    for op in busy:
        examples[op.operation_id]["503"] = _answer(busy_answers[op.operation_id], 503)
    for op in OPERATIONS:
        expected = {str(s) for s in (*op.problems, *op.other_answers)} | ({"200"} if op.response else set())
        missing = expected - set(examples[op.operation_id])
        if missing:
            raise RuntimeError(f"no example recorded for {op.operation_id} {sorted(missing)}")
    return examples


def examples_bytes(examples: dict) -> bytes:
    """Canonical, indented JSON (the form committed as examples.json)."""
    return msgspec.json.format(msgspec.json.encode(examples), indent=2) + b"\n"


def write() -> None:
    """Record the examples and write them to :data:`EXAMPLES_FILE` (``make openapi``)."""
    content = examples_bytes(record())
    EXAMPLES_FILE.write_bytes(content)
    load.cache_clear()


@cache
def load() -> dict[str, dict[str, dict]]:
    """The committed recording (empty when the file is missing, as while it is first recorded)."""
    if not EXAMPLES_FILE.is_file():
        return {}
    return msgspec.json.decode(EXAMPLES_FILE.read_bytes())


__all__ = ["EXAMPLES_FILE", "examples_bytes", "load", "record", "write"]
