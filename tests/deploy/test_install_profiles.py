"""The install profiles: each lock matches pyproject.toml, serving holds no test tool, and the base
install gives the client, partial states and sketches without the server's libraries.

The locks are requirements/*.txt, written by `make lock` (uv, pinned in the Makefile); the
profiles are listed in tests/deploy/locks.py. The last test builds throwaway environments under a
temporary directory the way the Makefile does, with pip from the package index (as `make
install` itself does): first the base profile with a non-editable install of the project, then
`make install-serve` into the same environment.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.deploy.locks import (
    PROFILES,
    REPO,
    WITH_BUILD_BACKEND,
    build_requirements,
    environment_differences,
    lock_of,
    project,
    read_freeze,
    requirements,
)

# Modules of the server's libraries: none may be imported by the client or the core.
SERVER_MODULES = ("litestar", "gunicorn", "uvicorn", "uvicorn_worker", "prometheus_client", "swagger_ui_bundle")


@pytest.mark.parametrize("profile", sorted(PROFILES))
def test_every_pin_of_a_profile_is_in_its_lock_at_the_same_version(profile):
    _, extras = PROFILES[profile]
    wanted = requirements(extras)
    if profile in WITH_BUILD_BACKEND:
        wanted |= build_requirements()
    lock = lock_of(profile)
    assert wanted, profile
    for name, version in wanted.items():
        assert version, f"{name} is not pinned exactly in pyproject.toml"
        assert name in lock, f"{name} is missing from {PROFILES[profile][0]}: run `make lock`"
        assert lock[name].version == version, f"{PROFILES[profile][0]} pins {name}=={lock[name].version}, pyproject {version}"


@pytest.mark.parametrize("profile", sorted(PROFILES))
def test_every_locked_version_carries_its_hashes(profile):
    lock = lock_of(profile)
    assert len(lock) >= 10, profile
    assert [name for name, pin in lock.items() if pin.hashes == 0] == []


def test_every_extra_belongs_to_a_profile():
    profiles = [set(requirements(extras)) for _, extras in PROFILES.values()]
    for extra in project()["project"]["optional-dependencies"]:
        names = set(requirements((extra,), base=False))
        assert names, extra
        assert any(names <= profile for profile in profiles), (
            f"the {extra} extra is in no profile of tests/deploy/locks.py: add it there and to `make lock`"
        )


def test_the_locks_agree_on_every_version():
    versions: dict[str, dict[str, str]] = {}
    for profile in PROFILES:
        for name, pin in lock_of(profile).items():
            versions.setdefault(name, {})[profile] = pin.version
    assert {name: seen for name, seen in versions.items() if len(set(seen.values())) > 1} == {}


def test_serving_holds_no_test_tool_and_the_base_no_server():
    serve = set(lock_of("serve"))
    test_only = set(requirements(("test",), base=False)) - set(requirements(("server",)))
    # The test tools themselves and what only they need (e.g. pytest's pluggy, dask's toolz).
    assert test_only >= {"pytest", "hypothesis", "schemathesis", "playwright", "statsmodels", "dask"}
    assert serve & test_only == set()
    base = set(lock_of("base"))
    # anyio: the server uses it directly, and httpx needs it too.
    assert base & set(requirements(("server",), base=False)) == {"anyio"}


_IMPORT_CHECK = """
import json, sys
import numpy as np
from tailgauge.client import AsyncClient, Client, ProblemError
from tailgauge.client.wire import build_call, operation_of
from tailgauge.core import combine_sketches, kll_sketch_bytes, merge_states, partial_state

parts = [np.arange(1.0, 6.0), np.arange(6.0, 11.0)]
merged = merge_states([partial_state(part) for part in parts])
sketch = combine_sketches([kll_sketch_bytes(part) for part in parts])
call = build_call(operation_of("mergeStates"), None, {"states": [partial_state(p) for p in parts]}, "auto")
print(json.dumps({"mean": merged.mean, "n": sketch.n, "content_type": call.headers["Content-Type"],
                  "modules": sorted(sys.modules)}))
"""


def _import_check(python: str, env: dict[str, str], cwd: Path) -> dict:
    result = subprocess.run([python, "-c", _IMPORT_CHECK], cwd=cwd, env=env, capture_output=True, text=True,
                            timeout=120, stdin=subprocess.DEVNULL)
    assert result.returncode == 0, result.stderr[-3000:]
    found = json.loads(result.stdout)
    # 1..10: mean 5.5 (closed form); ten values in the pooled sketches.
    assert found["mean"] == 5.5 and found["n"] == 10
    assert found["content_type"] == "application/json"
    loaded = {module.split(".")[0] for module in found["modules"]}
    assert loaded & set(SERVER_MODULES) == set(), sorted(loaded & set(SERVER_MODULES))
    assert "tailgauge.api.app" not in found["modules"]
    return found


def test_the_client_and_the_partial_state_helpers_import_without_the_server():
    """In this environment the server's libraries are installed; importing the client must still not load them."""
    env = {**os.environ, "PYTHONPATH": str(REPO / "service")}
    _import_check(sys.executable, env, REPO)


def _run(command: list[str], env: dict[str, str], cwd: Path, timeout: float = 600) -> str:
    result = subprocess.run(command, cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout,
                            stdin=subprocess.DEVNULL)
    assert result.returncode == 0, f"{command}\n{result.stdout[-2000:]}\n{result.stderr[-3000:]}"
    return result.stdout


@pytest.mark.slow
def test_a_clean_base_install_then_make_install_serve(tmp_path):
    env = {key: value for key, value in os.environ.items()
           if key not in ("PYTHONPATH", "VIRTUAL_ENV", "PYTHONHOME") and not key.startswith("TAILGAUGE_")}
    # A copy of what a build reads, so the build leaves nothing in the work tree.
    source = tmp_path / "source"
    source.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy2(REPO / name, source / name)
    shutil.copytree(REPO / "service", source / "service", ignore=shutil.ignore_patterns("__pycache__", "*.egg-info"))
    venv = tmp_path / "venv"
    python = str(venv / "bin" / "python")
    _run([sys.executable, "-m", "venv", str(venv)], env, tmp_path)

    # `pip install .` without extras, from the base lock (hash-checked), as a Dask worker would.
    pip = [python, "-m", "pip", "--disable-pip-version-check"]
    _run([*pip, "install", "--quiet", "--require-hashes", "-r", str(REPO / "requirements/base.txt")], env, tmp_path)
    _run([*pip, "install", "--quiet", "--no-index", "--no-build-isolation", str(source)], env, tmp_path)
    installed = read_freeze(_run([*pip, "list", "--format=freeze"], env, tmp_path))
    assert environment_differences(lock_of("base"), installed) == []
    assert {"litestar", "gunicorn", "uvicorn", "uvicorn-worker"} & set(installed) == set()
    found = _import_check(python, env, tmp_path)
    assert any(module.startswith("tailgauge.client") for module in found["modules"])

    # `make serve`'s install step into the same environment: exactly the serving lock, no test tool.
    _run(["make", "--no-print-directory", "install-serve", f"VENV={venv}"], env, REPO)
    installed = read_freeze(_run([*pip, "list", "--format=freeze"], env, tmp_path))
    assert environment_differences(lock_of("serve"), installed) == []
    test_tools = set(requirements(("test",), base=False)) - set(requirements(("server",)))
    assert test_tools & set(installed) == set()
    _run([python, "-c", "import gunicorn, uvicorn_worker, tailgauge.api.app, tailgauge.runtime.worker"], env, tmp_path)
