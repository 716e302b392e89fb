"""The default worker count from the cgroup CPU quota (service/tailgauge/runtime/cpus.py; issue 20).

Fake cgroup trees in tmp_path, laid out as the kernel does (Documentation/admin-guide/cgroup-v2.rst:
``cpu.max`` holds "$MAX $PERIOD", "max" for no limit; cgroup v1's CFS bandwidth files
``cpu.cfs_quota_us`` (-1 for none) and ``cpu.cfs_period_us``), with a fake /proc/self/cgroup.
"""

from __future__ import annotations

import runpy
from pathlib import Path

import pytest

from tailgauge.runtime.cpus import cgroup_cpu_limit, default_workers

CONFIG = Path(__file__).resolve().parents[1] / "deploy" / "gunicorn.conf.py"


def _v2(tmp_path: Path, own: str, limits: dict[str, str]) -> tuple[str, str]:
    """A unified tree: cgroup.controllers at its top, cpu.max at the given relative paths."""
    root = tmp_path / "cgroup"
    root.mkdir()
    (root / "cgroup.controllers").write_text("cpuset cpu io memory pids\n")
    (root / own.strip("/")).mkdir(parents=True, exist_ok=True)
    for relative, content in limits.items():
        directory = root / relative.strip("/")
        directory.mkdir(parents=True, exist_ok=True)
        (directory / "cpu.max").write_text(content + "\n")
    proc = tmp_path / "proc-self-cgroup"
    proc.write_text(f"0::{own}\n")
    return str(root), str(proc)


def _v1(tmp_path: Path, own: str, quotas: dict[str, tuple[int, int]], mount: str = "cpu,cpuacct") -> tuple[str, str]:
    root = tmp_path / "cgroup"
    controller = root / mount
    (controller / own.strip("/")).mkdir(parents=True, exist_ok=True)
    (root / "memory").mkdir()
    for relative, (quota, period) in quotas.items():
        directory = controller / relative.strip("/")
        directory.mkdir(parents=True, exist_ok=True)
        (directory / "cpu.cfs_quota_us").write_text(f"{quota}\n")
        (directory / "cpu.cfs_period_us").write_text(f"{period}\n")
    proc = tmp_path / "proc-self-cgroup"
    proc.write_text(f"12:memory:{own}\n4:cpu,cpuacct:{own}\n1:name=systemd:{own}\n0::/\n")
    return str(root), str(proc)


@pytest.mark.parametrize(
    ("content", "limit", "workers"),
    [
        ("200000 100000", 2.0, 2),  # the container: 2 CPUs on a 64-core host
        ("150000 100000", 1.5, 2),  # rounded up
        ("50000 100000", 0.5, 1),  # below one CPU: still one worker
        ("max 100000", None, 64),  # no limit: the CPUs it may run on
        ("6400000 100000", 64.0, 64),
        ("12800000 100000", 128.0, 64),  # a quota above the CPUs at hand cannot add any
        ("garbage", None, 64),
        ("", None, 64),
    ],
)
def test_cgroup_v2_cpu_max_in_a_container_namespace(tmp_path, content, limit, workers):
    root, proc = _v2(tmp_path, "/", {"/": content})
    assert cgroup_cpu_limit(root, proc) == limit
    assert default_workers(root, proc, cpus=64) == workers


def test_cgroup_v2_the_smallest_quota_on_the_way_up_counts(tmp_path):
    # A pod's limit on the pod's cgroup, none on the container's own, a larger one on the parent.
    own = "/kubepods.slice/pod-a/container-b"
    root, proc = _v2(tmp_path, own, {
        own: "max 100000",
        "/kubepods.slice/pod-a": "300000 100000",
        "/kubepods.slice": "800000 100000",
    })
    assert cgroup_cpu_limit(root, proc) == 3.0
    assert default_workers(root, proc, cpus=64) == 3


def test_cgroup_v2_a_path_the_namespace_hides_falls_back_to_the_top(tmp_path):
    root, proc = _v2(tmp_path, "/", {"/": "100000 100000"})
    Path(proc).write_text("0::/host/only/path\n")
    assert cgroup_cpu_limit(root, proc) == 1.0


@pytest.mark.parametrize("mount", ["cpu,cpuacct", "cpu"])
def test_cgroup_v1_cfs_quota_over_period(tmp_path, mount):
    own = "/docker/abc"
    root, proc = _v1(tmp_path, own, {own: (250000, 100000), "/docker": (-1, 100000)}, mount=mount)
    assert cgroup_cpu_limit(root, proc) == 2.5
    assert default_workers(root, proc, cpus=64) == 3


def test_cgroup_v1_minus_one_is_no_limit(tmp_path):
    root, proc = _v1(tmp_path, "/", {"/": (-1, 100000)})
    assert cgroup_cpu_limit(root, proc) is None
    assert default_workers(root, proc, cpus=8) == 8


def test_no_cgroup_files_at_all(tmp_path):
    assert cgroup_cpu_limit(str(tmp_path / "missing"), str(tmp_path / "missing-too")) is None
    assert default_workers(str(tmp_path / "missing"), str(tmp_path / "missing-too"), cpus=3) == 3


def test_this_machine_gives_a_sane_answer():
    # Whatever this machine's cgroups say: at least one worker, never more than its CPUs.
    import os

    workers = default_workers()
    assert 1 <= workers <= len(os.sched_getaffinity(0))


def test_the_gunicorn_configuration_uses_the_quota(monkeypatch, tmp_path):
    root, proc = _v2(tmp_path, "/", {"/": "100000 100000"})
    monkeypatch.delenv("WEB_CONCURRENCY", raising=False)
    monkeypatch.setattr("tailgauge.runtime.cpus.CGROUP_ROOT", root)
    monkeypatch.setattr("tailgauge.runtime.cpus.PROC_CGROUP", proc)
    assert runpy.run_path(str(CONFIG))["workers"] == 1
    monkeypatch.setenv("WEB_CONCURRENCY", "3")
    assert runpy.run_path(str(CONFIG))["workers"] == 3  # the variable still wins
