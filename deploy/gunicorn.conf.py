"""gunicorn settings for Tailgauge: uvicorn workers, one per CPU unless WEB_CONCURRENCY says otherwise.

CPUs: the cgroup CPU quota when there is one (cgroup v2 cpu.max, v1 cpu.cfs_quota_us over
cpu.cfs_period_us; the smallest along the process's cgroup and its parents), rounded up, never
more than the CPUs the process may run on; without a quota, those CPUs (service/tailgauge/runtime/cpus.py).

Environment: BIND (default 127.0.0.1:8000), WEB_CONCURRENCY (worker count), WORKER_TMP_DIR
(default /tmp: must be writable, also under a read-only root filesystem), and
PROMETHEUS_MULTIPROC_DIR (default: a fresh directory per server under the temporary directory).
Service limits are read by the app itself from TAILGAUGE_* variables (service/tailgauge/settings.py).
"""

import os
import shutil as _shutil
import tempfile as _tempfile

from tailgauge.runtime import cpus as _cpus


# One worker per core already uses the cores; BLAS threads inside each worker (next to the
# resampling's own two threads) would only contend for them. Read by numpy's OpenBLAS when a
# worker imports it, after this file has run in the master.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

def _worker_count() -> int:
    """WEB_CONCURRENCY as a whole number >= 1, else one per CPU of the quota; anything else stops the start.

    gunicorn itself starts with 0 or a negative count and then serves nothing, forever.
    """
    raw = os.environ.get("WEB_CONCURRENCY")
    if raw is None:
        return _cpus.default_workers()
    try:
        count = int(raw.strip())
    except ValueError:
        count = 0
    if count < 1:
        # SystemExit, not an exception: gunicorn prints its message and exits 1, with no traceback.
        raise SystemExit(f"WEB_CONCURRENCY must be a whole number of workers, 1 or more (got {raw!r})")
    return count


bind = os.environ.get("BIND", "127.0.0.1:8000")
workers = _worker_count()
# Each worker binds its own SO_REUSEPORT socket (gunicorn 27 opens them after the fork when this
# is set), so the kernel spreads new connections over the workers by a hash of their addresses.
# With one shared socket, the first worker to wake accepted every connection that was waiting:
# 8 connections opened at once all landed on one worker while the other idled.
reuse_port = True
# uvicorn_worker.UvicornWorker, plus readiness that answers 503 while the worker drains.
worker_class = "tailgauge.runtime.worker.Worker"
# A request may compute for a while; the per-request budget lives in the app.
timeout = 60
graceful_timeout = 30
keepalive = 5
# Recycle workers now and then so slow leaks cannot accumulate; jitter avoids a herd.
max_requests = 20000
max_requests_jitter = 2000
# gunicorn 27 opens a control socket under $HOME by default; containers have no such home.
control_socket_disable = True
worker_tmp_dir = os.environ.get("WORKER_TMP_DIR", "/tmp")
# The app writes one JSON line per request (with its request id); gunicorn's access log would
# repeat it in another format, so it is off, and gunicorn's own messages are JSON lines too.
accesslog = None
errorlog = "-"
logconfig_dict = {
    "version": 1,
    "disable_existing_loggers": False,
    "formatters": {"json": {"()": "tailgauge.runtime.logs.JsonFormatter"}},
    "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "json", "stream": "ext://sys.stderr"}},
    "root": {"level": "INFO", "handlers": ["stderr"]},
    "loggers": {
        "gunicorn.error": {"handlers": ["stderr"], "level": "INFO", "propagate": False},
        "gunicorn.access": {"handlers": [], "level": "WARNING", "propagate": False},
    },
}

_created_metrics_dir = []


def on_starting(server):
    """Give the workers one metrics directory of this server's own, empty at start.

    prometheus-client's multiprocess mode keeps each worker's values in files there and sums
    them at scrape time; stale files from an earlier run would be summed too, so they go.
    """
    path = os.environ.get("PROMETHEUS_MULTIPROC_DIR")
    if not path:
        base = os.environ.get("WORKER_TMP_DIR") or _tempfile.gettempdir()
        path = os.path.join(base, f"tailgauge-metrics-{os.getpid()}")
        _created_metrics_dir.append(path)
    os.makedirs(path, exist_ok=True)
    # Only prometheus-client's files and our unfinished archives: a directory given by the
    # operator may hold others.
    for name in os.listdir(path):
        if name.endswith((".db", ".db.partial")):
            os.remove(os.path.join(path, name))
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = path


def child_exit(server, worker):
    """Fold the dead worker's counters into the archive files (totals never drop), then drop its files.

    Why fold rather than delete: see service/tailgauge/runtime/metric_files.py. Nothing here may stop the master:
    on a full disk the dead worker's files stay, still counted, and the failure is logged.
    """
    from prometheus_client import multiprocess

    from tailgauge.runtime import metric_files

    directory = os.environ["PROMETHEUS_MULTIPROC_DIR"]
    try:
        multiprocess.mark_process_dead(worker.pid, directory)
        metric_files.fold_dead_worker(directory, worker.pid)
    except Exception as error:  # noqa: BLE001 - the master must outlive any metrics trouble
        server.log.warning("metrics of dead worker %s not folded into the archive: %s", worker.pid, error)


def on_exit(server):
    for path in _created_metrics_dir:
        _shutil.rmtree(path, ignore_errors=True)
