"""The short form of the load run: every request class answers in full under concurrency, with no error.

No timing is asserted (shared machines); the figures come from ``make load``.
"""

from __future__ import annotations

import asyncio
import json
import subprocess
import sys

from .load import measure, request_classes
from .server import REPO


def test_mixed_load_has_no_errors_and_every_class_answers(shared_server):
    figures = asyncio.run(
        measure(shared_server.base_url, seconds=2.0, concurrency=4, max_requests=2_000, timeout=60.0)
    )
    first_errors = figures["trivial"].get("first_errors", []) + figures["mixed"].get("first_errors", [])
    assert figures["errors"] == 0, first_errors
    assert figures["trivial"]["requests"] > 0
    for request_class in request_classes():
        entry = figures["classes"][request_class.name]
        assert entry["requests"] > 0, f"{request_class.name} was never sent"
        assert entry["errors"] == 0
    assert sum(entry["requests"] for entry in figures["classes"].values()) == figures["mixed"]["requests"]


def test_the_command_line_measures_a_server_and_writes_the_figures(shared_server, tmp_path):
    """``make load`` runs this module; here against the shared server (starting one is the fixtures' code)."""
    output = tmp_path / "load.json"
    run = subprocess.run(
        [sys.executable, "-m", "tests.system.load", "--seconds", "0.2", "--concurrency", "2",
         "--max-requests", "100", "--base-url", shared_server.base_url, "--output", str(output)],
        cwd=REPO, capture_output=True, text=True, timeout=120,
    )
    assert run.returncode == 0, run.stdout + run.stderr
    figures = json.loads(output.read_text())
    assert figures["errors"] == 0
    assert set(figures["classes"]) == {c.name for c in request_classes()}
    assert set(figures["ratio_to_trivial"]) == {
        "throughput_mixed_over_trivial", "p50_mixed_over_trivial", "p99_mixed_over_trivial"
    }
    assert "health_live (trivial)" in run.stdout
