"""deploy/gunicorn.conf.py loads, names real settings, and its worker class imports.

gunicorn's own --check-config accepts a misspelt setting or a missing worker class, so this
test loads the file through gunicorn's Config the way the server does and checks both.
"""

import pathlib
import runpy

from gunicorn.config import Config

CONFIG = pathlib.Path(__file__).resolve().parents[2] / "deploy" / "gunicorn.conf.py"


def _load(monkeypatch, **env) -> tuple[Config, dict]:
    for key in ("BIND", "WEB_CONCURRENCY"):
        monkeypatch.delenv(key, raising=False)
    for key, value in env.items():
        monkeypatch.setenv(key, value)
    namespace = runpy.run_path(str(CONFIG))
    config = Config()
    settings = {k: v for k, v in namespace.items() if not k.startswith("_") and k != "os"}
    assert {"on_starting", "child_exit", "on_exit"} <= set(settings)
    for key, value in settings.items():
        assert key in config.settings, f"{key} is not a gunicorn setting"
        config.set(key, value)
    return config, settings


def test_every_name_is_a_gunicorn_setting_and_the_worker_class_loads(monkeypatch):
    config, _ = _load(monkeypatch)
    worker = config.worker_class  # imports tailgauge.runtime.worker.Worker
    from uvicorn_worker import UvicornWorker

    assert issubclass(worker, UvicornWorker) and worker is not UvicornWorker
    assert config.control_socket_disable is True
    assert config.bind == ["127.0.0.1:8000"]
    assert config.workers >= 1
    assert config.graceful_timeout > 0 and config.max_requests > 0 and config.max_requests_jitter > 0


def test_environment_overrides_bind_and_worker_count(monkeypatch):
    config, _ = _load(monkeypatch, BIND="127.0.0.1:9123", WEB_CONCURRENCY="3")
    assert config.bind == ["127.0.0.1:9123"]
    assert config.workers == 3


def test_the_app_module_builds_the_app():
    from tailgauge import asgi

    assert asgi.app is not None


# Regression: WEB_CONCURRENCY=0 started a server that never answered.
def test_zero_workers_stops_the_configuration_with_a_clear_message(monkeypatch):
    import pytest

    for value in ("0", " 0 ", "-3", "two", "1.5", ""):
        monkeypatch.setenv("WEB_CONCURRENCY", value)
        with pytest.raises(SystemExit) as stopped:
            runpy.run_path(str(CONFIG))
        assert "WEB_CONCURRENCY must be a whole number of workers, 1 or more" in str(stopped.value.code)
        assert repr(value) in str(stopped.value.code)


def test_gunicorn_refuses_to_start_with_no_workers(tmp_path):
    import os
    import subprocess
    import sys

    from tests.system.server import free_port

    for value in ("0", "-1", "none"):
        environ = {**os.environ, "WEB_CONCURRENCY": value, "BIND": f"127.0.0.1:{free_port()}",
                   "PROMETHEUS_MULTIPROC_DIR": str(tmp_path), "HOME": str(tmp_path)}
        result = subprocess.run([sys.executable, "-m", "gunicorn", "--config", str(CONFIG), "tailgauge.asgi:app"],
                                cwd=CONFIG.parents[1], env=environ, capture_output=True, text=True, timeout=60)
        assert result.returncode != 0, value
        assert "Booting worker" not in result.stderr
        # gunicorn itself refuses a negative or non-integer count before reading this file.
        assert "WEB_CONCURRENCY" in result.stderr or "must be positive" in result.stderr, result.stderr[-500:]
