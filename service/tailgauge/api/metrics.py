"""Prometheus metrics of the HTTP layer, valid in one process or summed across gunicorn workers.

With ``PROMETHEUS_MULTIPROC_DIR`` set before this module is first imported (deploy/gunicorn.conf.py
sets it), every worker writes its values to files there and ``exposition()`` adds them up, so a
scrape of any worker sees the whole server. A full or unwritable directory never crashes a
worker: see service/tailgauge/runtime/metric_files.py for how the metrics degrade instead.
"""

from __future__ import annotations

import platform

import numpy
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
)

import tailgauge
from tailgauge.runtime import metric_files

CONTENT_TYPE = CONTENT_TYPE_LATEST
# The same type without its charset parameter, for litestar, which appends "; charset=utf-8" to
# every text/ type itself (given CONTENT_TYPE, it answered with the charset twice).
MEDIA_TYPE = "; ".join(part.strip() for part in CONTENT_TYPE.split(";") if not part.strip().lower().startswith("charset="))

# Before any metric below exists: their series are created through the guarded value class.
metric_files.install()

REQUESTS = Counter(
    "tailgauge_http_requests_total",
    "HTTP requests answered, by route template, method and status code.",
    ["route", "method", "status"],
)
LATENCY = Histogram(
    "tailgauge_http_request_duration_seconds",
    "Time from receiving a request to the end of its response, by route template, method and status.",
    ["route", "method", "status"],
    buckets=(0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0),
)
VALUES = Histogram(
    "tailgauge_request_values",
    "Observations per compute request: values, outcomes or bins as sent.",
    ["endpoint"],
    buckets=(1, 10, 100, 1_000, 10_000, 100_000, 1_000_000, 10_000_000),
)
RESAMPLES = Counter(
    "tailgauge_resamples_total",
    "Bootstrap resamples computed for intervals.",
    ["endpoint"],
)
BUDGET_REJECTIONS = Counter(
    "tailgauge_budget_rejections_total",
    "Requests refused with a limit-exceeded problem (resampling budget, wall-clock or size limits).",
)

# In flight: summed over the live workers ("livesum"); a dead worker's share goes with its files.
INFLIGHT_BYTES = Gauge(
    "tailgauge_inflight_planned_bytes",
    "Memory planned by the compute requests in progress (decoding and computation estimates), in bytes.",
    multiprocess_mode="livesum",
)
INFLIGHT_REQUESTS = Gauge(
    "tailgauge_inflight_requests",
    "Compute requests in progress (holding planned memory).",
    multiprocess_mode="livesum",
)
ADMISSION_REFUSALS = Counter(
    "tailgauge_admission_refusals_total",
    "Requests answered 503 server-busy because their planned memory did not fit beside the ones in progress.",
)

# The build of the worker answering, as the value 1 with labels (join it to any series by
# instance). "livemax": one series without a pid label, summed over the live workers by max
# (all equal), and a dead worker's file goes with it (metric_files.fold_dead_worker).
BUILD_INFO = Gauge(
    "tailgauge_build_info",
    "The running build: service version, Python version and numpy version (value 1).",
    ["version", "python", "numpy"],
    multiprocess_mode="livemax",
)
BUILD_INFO.labels(version=tailgauge.__version__, python=platform.python_version(), numpy=numpy.__version__).set(1)


def exposition() -> bytes:
    """The text exposition format of every metric, summed over worker processes when multiprocess."""
    directory = metric_files.multiprocess_directory()
    if directory:
        registry = CollectorRegistry()
        registry.register(metric_files.DirectoryCollector(directory))
        return generate_latest(registry)
    return generate_latest(REGISTRY)


__all__ = [
    "ADMISSION_REFUSALS",
    "BUDGET_REJECTIONS",
    "BUILD_INFO",
    "CONTENT_TYPE",
    "INFLIGHT_BYTES",
    "INFLIGHT_REQUESTS",
    "LATENCY",
    "MEDIA_TYPE",
    "REQUESTS",
    "RESAMPLES",
    "VALUES",
    "exposition",
]
