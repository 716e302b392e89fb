"""Fixtures for the HTTP-layer tests: clients built from explicit Settings, and strict JSON reading.

Settings are always passed to ``create_app`` directly; nothing here reads or writes os.environ.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterator
from contextlib import ExitStack

import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app
from tailgauge.settings import Settings

SAMPLES = "/v1/descriptors/samples"


def _reject_constant(token: str) -> None:
    raise ValueError(f"response body contains the non-JSON token {token}")


def _strict_loads(text: str | bytes):
    """json.loads that fails on NaN, Infinity and -Infinity instead of accepting them."""
    return json.loads(text, parse_constant=_reject_constant)


@pytest.fixture
def strict_json() -> Callable:
    """Parse a response body (or a Response) with a JSON parser that rejects NaN and Infinity."""

    def parse(response_or_text):
        text = getattr(response_or_text, "content", response_or_text)
        return _strict_loads(text)

    return parse


@pytest.fixture
def make_client() -> Iterator[Callable[..., TestClient]]:
    """Factory: ``make_client(max_values=10)`` gives a started client for ``Settings(max_values=10)``."""
    with ExitStack() as stack:

        def factory(**overrides) -> TestClient:
            app = create_app(Settings(**overrides))
            return stack.enter_context(TestClient(app))

        yield factory


@pytest.fixture
def client(make_client) -> TestClient:
    """A client for the app with default Settings."""
    return make_client()


@pytest.fixture
def post_json(strict_json) -> Callable:
    """``post_json(client, body_bytes_or_obj, headers=None)`` -> (response, strictly parsed body).

    A dict body is serialised with ``json.dumps(allow_nan=False)``, so a test can never send
    NaN by accident; bytes are sent unchanged with Content-Type application/json.
    """

    def send(client: TestClient, body, headers: dict[str, str] | None = None, path: str = SAMPLES):
        if not isinstance(body, (bytes, str)):
            body = json.dumps(body, allow_nan=False)
        sent_headers = {"content-type": "application/json"}
        sent_headers.update(headers or {})
        response = client.post(path, content=body, headers=sent_headers)
        return response, strict_json(response)

    return send


@pytest.fixture
def describe(client, post_json) -> Callable:
    """``describe(values, **options)`` -> the parsed 200 body from the default-settings client."""

    def run(values, _client: TestClient | None = None, **options):
        body = {"values": list(values)}
        if options:
            body["options"] = options
        response, parsed = post_json(_client or client, body)
        assert response.status_code == 200, response.text
        assert response.headers["content-type"].startswith("application/json")
        return parsed

    return run
