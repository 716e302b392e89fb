"""gunicorn settings for Tailgauge: uvicorn workers, one per CPU unless WEB_CONCURRENCY says otherwise.

Environment: BIND (default 127.0.0.1:8000), WEB_CONCURRENCY (worker count). Service limits are
read by the app itself from TAILGAUGE_* variables (service/settings.py).
"""

import os


def _cpu_count() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


bind = os.environ.get("BIND", "127.0.0.1:8000")
workers = int(os.environ.get("WEB_CONCURRENCY", _cpu_count()))
worker_class = "uvicorn_worker.UvicornWorker"
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
accesslog = "-"
errorlog = "-"
