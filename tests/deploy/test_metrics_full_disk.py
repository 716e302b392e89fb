"""A real gunicorn whose metrics directory is a full filesystem keeps answering, with the same workers.

Regression: on a full /tmp prometheus-client's memory-mapped files raised SIGBUS in every worker
(1,316 worker deaths; every request, health included, failed until space was freed). Here the
server's PROMETHEUS_MULTIPROC_DIR is a small tmpfs mounted in a private mount namespace
(``unshare``, which needs root or user namespaces), filled before the server starts or while it
serves. Requests must keep succeeding, the worker pid must not change, /health/ready must carry a
note, and a dead worker's counts must stay in the totals (folded into the archive files).
"""

from __future__ import annotations

import json
import os
import signal
import urllib.request
from pathlib import Path

import httpx
from prometheus_client.parser import text_string_to_metric_families

from tests.system.server import GunicornServer
from tests.tmpfs import fill_until_full, on_tmpfs

BODY = b'{"values": [502.1, 498.7, 505.3, 499.9, 501.4, 497.2, 503.8]}'
SAMPLES = "/v1/descriptors/samples"
NOTE = "cannot write to PROMETHEUS_MULTIPROC_DIR"


class TmpfsMetricsServer(GunicornServer):
    """tests/system's gunicorn with its metrics directory on a tmpfs of ``size``, filled first if asked."""

    def __init__(self, size: str, fill_first: bool) -> None:
        super().__init__(workers=1)
        self.size, self.fill_first = size, fill_first

    @property
    def metrics_dir(self) -> Path:
        return self.root / "metrics"

    def command(self) -> list[str]:
        fill = 'dd if=/dev/zero of="$1/filler" bs=4096 2>/dev/null; ' if self.fill_first else ""
        return on_tmpfs(self.metrics_dir, self.size, super().command(), before=fill)

    def fill(self) -> None:
        """Fill the tmpfs as the server sees it (through the master's root in its mount namespace)."""
        fill_until_full(Path(f"/proc/{self.pid}/root") / self.metrics_dir.relative_to("/") / "late-filler")


def _ready(base: str) -> dict:
    with urllib.request.urlopen(base + "/health/ready", timeout=10) as answer:
        assert answer.status == 200
        return json.loads(answer.read())


def _samples_count(base: str) -> float:
    text = httpx.get(base + "/metrics", timeout=10).text
    return sum(sample.value for family in text_string_to_metric_families(text) for sample in family.samples
               if sample.name == "tailgauge_http_requests_total" and sample.labels.get("route") == SAMPLES)


ROUTES = ["/v1/descriptors/samples", "/v1/descriptors/table", "/v1/descriptors/bins", "/v1/descriptors/merge",
          "/v1/comparisons", "/v1/catalog", "/health/live", "/health/ready", "/metrics", "/openapi.json", "/docs",
          "/docs/assets/favicon-16x16.png", "/nowhere"]
METHODS = ["GET", "HEAD", "POST", "PUT", "DELETE", "PATCH", "OPTIONS", "TRACE"]


def _varied_requests(client: httpx.Client) -> list[int]:
    """One request per route and method: about a hundred new series, enough to outgrow a first file."""
    statuses = []
    for route in ROUTES:
        for method in METHODS:
            body = BODY if method == "POST" else None
            statuses.append(client.request(method, route, content=body, headers={"content-type": "application/json"}).status_code)
    return statuses


def _all_answered(statuses: list[int]) -> bool:
    return len(statuses) == len(ROUTES) * len(METHODS) and all(status < 500 for status in statuses) and 200 in statuses


def test_a_server_started_on_a_full_metrics_filesystem_serves_with_the_same_worker():
    with TmpfsMetricsServer("64k", fill_first=True) as server:
        workers = server.worker_pids()
        with httpx.Client(base_url=server.base_url, timeout=60) as client:
            assert _all_answered(_varied_requests(client))
            assert client.get("/health/live").status_code == 200
            assert client.get("/metrics").status_code == 200
        readiness = _ready(server.base_url)
        assert readiness["status"] == "ok" and any(NOTE in note for note in readiness["notes"])
        assert server.worker_pids() == workers
        assert server.log().count(NOTE) == 1  # once, by the one worker


def test_a_metrics_filesystem_filling_up_while_serving_and_a_dead_worker_lose_no_request():
    with TmpfsMetricsServer("1m", fill_first=False) as server:
        base = server.base_url
        with httpx.Client(base_url=base, timeout=60) as client:
            for _ in range(5):
                assert client.post(SAMPLES, content=BODY, headers={"content-type": "application/json"}).status_code == 200
        assert _samples_count(base) == 5
        assert _ready(base)["notes"] == []
        # The worker dies; its replacement starts from zero, but the server's total must not drop.
        (old,) = server.worker_pids()
        startups = server.startups()
        os.kill(old, signal.SIGKILL)
        server.wait_for_replacement({old}, startups)
        assert _samples_count(base) == 5
        # Now the disk fills while the new worker serves.
        workers = server.worker_pids()
        server.fill()
        with httpx.Client(base_url=base, timeout=60) as client:
            assert _all_answered(_varied_requests(client))
        assert server.worker_pids() == workers
        readiness = _ready(base)
        assert any(NOTE in note for note in readiness["notes"]), readiness
        # Series made before the disk filled still count: the 5 old requests and the new worker's first ones.
        assert _samples_count(base) >= 5
