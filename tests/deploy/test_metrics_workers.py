"""Metrics add up across gunicorn workers: N requests to a 2-worker server count exactly N.

A real gunicorn (deploy/gunicorn.conf.py, 2 workers) on 127.0.0.1; concurrent requests with
intervals keep both workers busy, and each worker's own file is read alone to show that both
served and that /metrics is their sum.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import httpx
import pytest
from prometheus_client import CollectorRegistry
from prometheus_client.multiprocess import MultiProcessCollector
from prometheus_client.parser import text_string_to_metric_families

ROOT = Path(__file__).resolve().parents[2]
ROUTE = "/v1/descriptors/samples"
BODY = b'{"values": [1.2, 2.4, 2.5, 3.9, 4.4, 5.1, 8.8], "options": {"interval": {"resamples": 2000, "seed": 3}}}'
N = 60


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


@pytest.fixture
def server(tmp_path):
    port = _free_port()
    metrics_dir = tmp_path / "metrics"
    env = {
        **{k: v for k, v in os.environ.items() if not k.startswith("TAILGAUGE_")},
        "BIND": f"127.0.0.1:{port}",
        "WEB_CONCURRENCY": "2",
        "PROMETHEUS_MULTIPROC_DIR": str(metrics_dir),
        "WORKER_TMP_DIR": str(tmp_path),
        "TAILGAUGE_REQUEST_LOG": "false",
    }
    log = open(tmp_path / "gunicorn.log", "wb")
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--config", "deploy/gunicorn.conf.py", "tailgauge.asgi:app"],
        cwd=ROOT,
        env=env,
        stdout=log,
        stderr=subprocess.STDOUT,
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                if httpx.get(f"{base}/health/ready", timeout=1).status_code == 200:
                    break
            except httpx.HTTPError:
                pass
            if process.poll() is not None or time.monotonic() > deadline:
                pytest.fail("gunicorn did not become ready: " + (tmp_path / "gunicorn.log").read_text()[-2000:])
            time.sleep(0.2)
        yield base, metrics_dir
    finally:
        process.send_signal(signal.SIGTERM)
        try:
            process.wait(timeout=40)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
        log.close()


def _count(text: str) -> float:
    total = 0.0
    for family in text_string_to_metric_families(text):
        for sample in family.samples:
            if sample.name == "tailgauge_http_requests_total" and sample.labels.get("route") == ROUTE:
                total += sample.value
    return total


def _per_worker_counts(metrics_dir: Path, scratch: Path) -> dict[str, float]:
    counts = {}
    for file in sorted(metrics_dir.glob("counter_*.db")):
        alone = scratch / file.stem
        alone.mkdir(parents=True)
        shutil.copy(file, alone / file.name)
        registry = CollectorRegistry()
        MultiProcessCollector(registry, path=str(alone))
        counts[file.stem] = sum(
            sample.value
            for metric in registry.collect()
            for sample in metric.samples
            if sample.name == "tailgauge_http_requests_total" and sample.labels.get("route") == ROUTE
        )
    return counts


def test_metrics_sum_over_both_workers(server, tmp_path):
    base, metrics_dir = server

    def one(_):
        # A fresh connection per request, so either worker may accept it.
        with httpx.Client(timeout=60) as client:
            return client.post(base + ROUTE, content=BODY, headers={"content-type": "application/json"}).status_code

    with ThreadPoolExecutor(max_workers=8) as pool:
        statuses = list(pool.map(one, range(N)))
    assert statuses == [200] * N
    scraped = httpx.get(base + "/metrics", timeout=10).text
    assert _count(scraped) == N
    per_worker = _per_worker_counts(metrics_dir, tmp_path / "scratch")
    served = {name: count for name, count in per_worker.items() if count > 0}
    assert len(served) == 2, f"expected both workers to serve, got {per_worker}"
    assert sum(served.values()) == N
    # Every scrape sees the same total, whichever worker answers it.
    assert {_count(httpx.get(base + "/metrics", timeout=10).text) for _ in range(6)} == {N}


# Issue 20: one build-info series for the whole server (no pid label), from both workers' files,
# and the exposition's content type carries one charset.
def test_build_info_is_one_series_across_workers_and_the_type_has_one_charset(server):
    import platform

    import numpy

    import tailgauge

    base, metrics_dir = server
    assert len(list(metrics_dir.glob("gauge_livemax_*.db"))) == 2  # one file per worker
    for _ in range(4):
        answer = httpx.get(base + "/metrics", timeout=10)
        assert answer.headers["content-type"] == "text/plain; version=1.0.0; charset=utf-8"
        builds = [
            sample
            for family in text_string_to_metric_families(answer.text)
            for sample in family.samples
            if sample.name == "tailgauge_build_info"
        ]
        assert [(sample.labels, sample.value) for sample in builds] == [
            ({"version": tailgauge.__version__, "python": platform.python_version(), "numpy": numpy.__version__}, 1.0)
        ]
