"""Metrics files on a full filesystem (service/tailgauge/runtime/metric_files.py): errors, never SIGBUS; dead workers folded.

Regression: prometheus-client maps its files and grows them with truncate; on a full /tmp the
first write to an unbacked page raised SIGBUS and killed the worker (1,316 worker deaths, every
request failing). The full filesystem here is a real one: a 64 KiB tmpfs mounted in a private
mount namespace (``unshare``: as root, or as any user where user namespaces are allowed), filled
before or while the code under test runs. Each scenario runs in its own interpreter, because the
control case does die of SIGBUS.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from prometheus_client import CollectorRegistry, generate_latest
from prometheus_client.parser import text_string_to_metric_families

from tailgauge.runtime import metric_files
from tests.tmpfs import on_tmpfs

ROOT = Path(__file__).resolve().parents[1]

FILL = """
import os
from tests.tmpfs import fill_until_full
def fill(directory):
    fill_until_full(os.path.join(directory, "filler"))
"""


def on_tiny_tmpfs(tmp_path: Path, script: str) -> subprocess.CompletedProcess:
    """Run ``script`` (python, with ``DIRECTORY`` set to a fresh 256 KiB tmpfs: room for the files a
    worker opens at import, a counter's, a histogram's and a live gauge's) in a private mount namespace."""
    directory = tmp_path / "metrics"
    directory.mkdir()
    program = FILL + "DIRECTORY = " + repr(str(directory)) + "\n" + textwrap.dedent(script)
    command = on_tmpfs(directory, "256k", [sys.executable, "-c", program])
    environ = {**os.environ, "PYTHONPATH": str(ROOT), "PROMETHEUS_MULTIPROC_DIR": str(directory)}
    return subprocess.run(command, env=environ, capture_output=True, text=True, timeout=120)


def test_the_hazard_is_real_plain_prometheus_client_dies_of_sigbus_on_a_full_tmpfs(tmp_path):
    result = on_tiny_tmpfs(tmp_path, """
        fill(DIRECTORY)
        from prometheus_client import Counter
        Counter("loaves", "loaves baked", ["oven"]).labels("east").inc()
        print("survived")
    """)
    assert result.returncode == -signal.SIGBUS, (result.returncode, result.stderr[-2000:])
    assert "survived" not in result.stdout


def test_a_worker_starting_on_a_full_tmpfs_keeps_counting_in_process_and_says_so(tmp_path):
    result = on_tiny_tmpfs(tmp_path, """
        import logging, os
        logging.basicConfig(level=logging.WARNING, format="%(name)s %(message)s")
        fill(DIRECTORY)
        from tailgauge.runtime import metric_files
        from tailgauge.api import metrics
        for status in range(200, 260):
            metrics.REQUESTS.labels(route="/r", method="GET", status=str(status)).inc()
            metrics.LATENCY.labels(route="/r", method="GET", status=str(status)).observe(0.01)
        print("counted", metrics.REQUESTS.labels(route="/r", method="GET", status="201")._value.get())
        print("note", metric_files.degradation())
        print("files", sorted(name for name in os.listdir(DIRECTORY) if name.endswith(".db")))
        print("exposition", len(metrics.exposition()))
    """)
    assert result.returncode == 0, result.stderr[-3000:]
    lines = dict(line.split(" ", 1) for line in result.stdout.splitlines())
    assert lines["counted"] == "1.0"
    assert "No space left on device" in lines["note"] and "not exported" in lines["note"]
    assert lines["files"] == "[]"  # no empty file left behind for a scrape to choke on
    assert int(lines["exposition"]) >= 0
    assert result.stderr.count("cannot write to PROMETHEUS_MULTIPROC_DIR") == 1  # logged once


def test_a_tmpfs_filling_up_while_serving_degrades_new_series_and_keeps_the_old_ones_exported(tmp_path):
    result = on_tiny_tmpfs(tmp_path, """
        from tailgauge.runtime import metric_files
        from tailgauge.api import metrics
        from prometheus_client.parser import text_string_to_metric_families
        early = metrics.REQUESTS.labels(route="/early", method="GET", status="200")
        early.inc()
        print("note_before", metric_files.degradation())
        fill(DIRECTORY)
        # Enough new series that the histogram file must grow past its first 64 KiB.
        for status in range(100, 400):
            metrics.LATENCY.labels(route="/late", method="GET", status=str(status)).observe(0.2)
            metrics.REQUESTS.labels(route="/late", method="GET", status=str(status)).inc()
        early.inc(2)
        text = metrics.exposition().decode()
        total = {s.labels["route"]: s.value for f in text_string_to_metric_families(text) for s in f.samples
                 if s.name == "tailgauge_http_requests_total" and s.labels.get("status") in ("200", "399")}
        print("early", total.get("/early"))
        print("note_after", metric_files.degradation())
    """)
    assert result.returncode == 0, result.stderr[-3000:]
    lines = dict(line.split(" ", 1) for line in result.stdout.splitlines())
    assert lines["note_before"] == "None"
    assert "No space left on device" in lines["note_after"]
    assert lines["early"] == "3.0"  # a series created before the disk filled is still exported, and counts on


def _run_worker(directory: Path, script: str) -> None:
    environ = {**os.environ, "PYTHONPATH": str(ROOT), "PROMETHEUS_MULTIPROC_DIR": str(directory)}
    subprocess.run([sys.executable, "-c", textwrap.dedent(script)], env=environ, check=True, timeout=60)


def _exposition(directory: Path) -> dict[tuple, float]:
    """Every exported sample, by name and labels (files are summed in no fixed order)."""
    registry = CollectorRegistry()
    registry.register(metric_files.DirectoryCollector(str(directory)))
    text = generate_latest(registry).decode()
    return {(sample.name, tuple(sorted(sample.labels.items()))): sample.value
            for family in text_string_to_metric_families(text) for sample in family.samples}


def _totals(directory: Path) -> dict[tuple, float]:
    """The exported counters and histograms (what folding must keep), without the live gauges (work in
    flight, and the build info: each worker's own, gone with it)."""
    live = ("tailgauge_inflight", "tailgauge_build_info")
    return {key: value for key, value in _exposition(directory).items() if not key[0].startswith(live)}


CATALOG_200 = ("tailgauge_http_requests_total", (("method", "GET"), ("route", "/v1/catalog"), ("status", "200")))


WORKER = """
    import os
    from tailgauge.api import metrics
    for i in range({count}):
        metrics.REQUESTS.labels(route="/v1/catalog", method="GET", status="200").inc()
        metrics.LATENCY.labels(route="/v1/catalog", method="GET", status="200").observe(0.003 * i)
    metrics.REQUESTS.labels(route="/metrics", method="GET", status="{status}").inc({count})
    metrics.RESAMPLES.labels("samples").inc(1000)
    print(os.getpid())
"""


def test_folding_dead_workers_keeps_every_total_and_removes_their_files(tmp_path):
    directory = tmp_path / "metrics"
    directory.mkdir()
    for count, status in ((3, "200"), (5, "404"), (7, "200")):
        _run_worker(directory, WORKER.format(count=count, status=status))
    before = _totals(directory)
    assert before[CATALOG_200] == 15.0 and len(before) > 20  # 15 buckets, sum, count and counters
    assert any(name.startswith("tailgauge_inflight") for name, _ in _exposition(directory))  # live gauges too
    pids = sorted({int(p.stem.split("_")[1]) for p in directory.glob("counter_*.db")})
    assert len(pids) == 3
    for pid in pids:
        metric_files.fold_dead_worker(str(directory), pid)
        assert _totals(directory) == pytest.approx(before, rel=1e-12)
    # A dead worker's live gauges (work in flight) are dropped, not archived.
    assert not any(name.startswith("tailgauge_inflight") for name, _ in _exposition(directory))
    assert sorted(p.name for p in directory.iterdir()) == ["counter_archive.db", "histogram_archive.db"]
    # A fourth worker's counts add to the archive's.
    _run_worker(directory, WORKER.format(count=1, status="200"))
    assert _exposition(directory)[CATALOG_200] == 16.0


def test_files_are_allocated_not_sparse(tmp_path):
    path = tmp_path / "counter_1.db"
    file = metric_files.BackedMmapedDict(str(path))
    for i in range(2000):  # 2000 entries of 80 bytes: grown twice past the first 64 KiB
        file.write_value(f'["m", "m_total", {{"n": "{i:040d}"}}, "h"]', float(i), 0.0)
    file.close()
    stat = path.stat()
    assert stat.st_size == 1 << 18
    assert stat.st_blocks * 512 >= stat.st_size  # every page has its block: no write can fault
    values = {key: value for key, value, _, _ in metric_files.MmapedDict.read_all_values_from_file(str(path))}
    assert len(values) == 2000 and values['["m", "m_total", {"n": "' + f"{1999:040d}" + '"}, "h"]'] == 1999.0


@pytest.mark.parametrize("unwritable", ["missing", "a-file"])
def test_an_unusable_directory_is_an_error_not_a_crash(tmp_path, unwritable):
    target = tmp_path / "nowhere"
    if unwritable == "a-file":
        target.write_text("not a directory")
    with pytest.raises(OSError):
        metric_files.BackedMmapedDict(str(target / "counter_1.db"))
