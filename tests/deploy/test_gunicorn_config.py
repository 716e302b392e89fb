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
    worker = config.worker_class  # imports service.worker.Worker
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
    from service import asgi

    assert asgi.app is not None
