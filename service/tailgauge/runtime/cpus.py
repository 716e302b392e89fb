"""How many CPUs this process may use: the cgroup CPU quota when there is one, else the CPUs it may run on.

A container limited to 2 CPUs on a 64-core host sees 64 CPUs through ``os.cpu_count()`` and
``sched_getaffinity``; the limit is a CFS quota in its cgroup: ``cpu.max`` ("QUOTA PERIOD", or
"max PERIOD" for none) in cgroup v2, ``cpu.cfs_quota_us`` / ``cpu.cfs_period_us`` (quota -1 for
none) in cgroup v1. A quota applies to a cgroup and everything below it, so the process's own
cgroup and each of its parents are read and the smallest quota counts. Read by
deploy/gunicorn.conf.py in gunicorn's master; standard library only.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

CGROUP_ROOT = "/sys/fs/cgroup"
PROC_CGROUP = "/proc/self/cgroup"
# cgroup v1 mount points of the cpu controller, as systemd and container runtimes name them.
_V1_CPU_MOUNTS = ("cpu,cpuacct", "cpuacct,cpu", "cpu")


def _read(path: Path) -> str | None:
    try:
        return path.read_text().strip()
    except (OSError, UnicodeDecodeError):
        return None


def _v2_quota(directory: Path) -> float | None:
    """CPUs allowed by ``cpu.max`` in ``directory``; None when unlimited, absent or unreadable."""
    text = _read(directory / "cpu.max")
    if text is None:
        return None
    parts = text.split()
    if len(parts) != 2 or parts[0] == "max":
        return None
    try:
        quota, period = int(parts[0]), int(parts[1])
    except ValueError:
        return None
    return quota / period if quota > 0 and period > 0 else None


def _v1_quota(directory: Path) -> float | None:
    """CPUs allowed by ``cpu.cfs_quota_us`` / ``cpu.cfs_period_us``; None when -1, absent or unreadable."""
    quota_text, period_text = _read(directory / "cpu.cfs_quota_us"), _read(directory / "cpu.cfs_period_us")
    if quota_text is None or period_text is None:
        return None
    try:
        quota, period = int(quota_text), int(period_text)
    except ValueError:
        return None
    return quota / period if quota > 0 and period > 0 else None


def _up_from(mount: Path, relative: str) -> list[Path]:
    """``mount/relative`` and each of its parents up to ``mount`` (only those that exist)."""
    inner = mount / relative.strip("/")
    chain = [inner, *inner.parents] if inner != mount else [mount]
    return [directory for directory in chain if directory.is_relative_to(mount) and directory.is_dir()]


def _smallest(values) -> float | None:
    found = [value for value in values if value is not None]
    return min(found) if found else None


def cgroup_cpu_limit(root: str | None = None, proc_cgroup: str | None = None) -> float | None:
    """The CPUs the cgroup quota allows this process (e.g. 1.5), or None when no quota applies.

    ``root`` and ``proc_cgroup`` (default :data:`CGROUP_ROOT`, :data:`PROC_CGROUP`) are the cgroup
    filesystem and the process's cgroup file; tests point them at fake trees.
    """
    mount = Path(root or CGROUP_ROOT)
    lines = (_read(Path(proc_cgroup or PROC_CGROUP)) or "").splitlines()
    v2_paths = [line.split(":", 2)[2] for line in lines if line.startswith("0::")]
    v1_paths = [line.split(":", 2)[2] for line in lines
                if line.count(":") >= 2 and "cpu" in line.split(":", 2)[1].split(",")]
    if (mount / "cgroup.controllers").exists():
        # cgroup v2 (unified; only its mount has cgroup.controllers at the top; a hybrid host
        # with v1 controllers and a "0::" line keeps its cpu controller in v1). Inside a container's cgroup namespace the own path is "/" and the
        # container's limit is at the root of the mount.
        relative = v2_paths[0] if v2_paths else "/"
        return _smallest(_v2_quota(directory) for directory in _up_from(mount, relative) or [mount])
    for name in _V1_CPU_MOUNTS:
        controller = mount / name
        if controller.is_dir():
            relative = v1_paths[0] if v1_paths else "/"
            return _smallest(_v1_quota(directory) for directory in _up_from(controller, relative) or [controller])
    return None


def available_cpus() -> int:
    """The CPUs this process may run on (its affinity mask), ignoring any quota."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


def default_workers(root: str | None = None, proc_cgroup: str | None = None, cpus: int | None = None) -> int:
    """One worker per CPU: the quota rounded up (a quota of 1.5 CPUs gets 2), never more than the
    CPUs the process may run on, at least 1.

    Rounded up, because a worker that waits on I/O or the network leaves its share of the quota
    to the others; a quota below one CPU still needs one worker.
    """
    cpus = available_cpus() if cpus is None else cpus
    limit = cgroup_cpu_limit(root, proc_cgroup)
    if limit is None:
        return max(1, cpus)
    return max(1, min(cpus, math.ceil(limit - 1e-9)))


__all__ = ["available_cpus", "cgroup_cpu_limit", "default_workers"]
