"""Fixtures: the real gunicorn server (2 workers, free 127.0.0.1 port, own temp dirs), always stopped by pid."""

from __future__ import annotations

from collections.abc import Iterator

import pytest

from .hostile_harness import hostile  # noqa: F401 (the hostile-input suite's server, one per test module)
from .server import GunicornServer


@pytest.fixture(scope="session")
def shared_server() -> Iterator[GunicornServer]:
    """One server for the tests that leave it running as they found it (load, slow client, browser)."""
    with GunicornServer(workers=2) as server:
        yield server


@pytest.fixture
def fresh_server() -> Iterator[GunicornServer]:
    """A server of the test's own, for tests that kill or stop it."""
    with GunicornServer(workers=2) as server:
        yield server
