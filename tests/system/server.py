"""The service as deployed: gunicorn with uvicorn workers on a free 127.0.0.1 port, in its own temp dirs.

Started with the repository's ``deploy/gunicorn.conf.py`` exactly as ``make serve`` does; only
BIND, WEB_CONCURRENCY and the writable directories come from here. Stopped by its pid, and its
workers too if the master did not take them down.
"""

from __future__ import annotations

import ctypes
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
CONFIG = REPO / "deploy" / "gunicorn.conf.py"
HOST = "127.0.0.1"
# uvicorn's message when a worker's application has started, whatever the log format around it.
STARTUP_MESSAGE = "Application startup complete"


class ServerError(RuntimeError):
    """gunicorn did not start, or did not stop as expected; the message ends with its log."""


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind((HOST, 0))
        return probe.getsockname()[1]


def die_with_parent() -> None:
    # If the test process dies without running its finalizers, the server gets SIGTERM too.
    PR_SET_PDEATHSIG = 1
    ctypes.CDLL(None, use_errno=True).prctl(PR_SET_PDEATHSIG, signal.SIGTERM)


def gunicorn_command() -> list[str]:
    script = Path(sys.executable).with_name("gunicorn")
    launcher = [str(script)] if script.exists() else [sys.executable, "-m", "gunicorn"]
    return [*launcher, "--config", str(CONFIG), "tailgauge.asgi:app"]


def children_of(pid: int) -> set[int]:
    """Direct child pids of ``pid`` (Linux /proc; empty once the process is gone)."""
    found: set[int] = set()
    for task in Path(f"/proc/{pid}/task").glob("*"):
        try:
            found.update(int(child) for child in (task / "children").read_text().split())
        except (FileNotFoundError, ProcessLookupError):
            continue
    return found


def _stat(pid: int) -> list[str] | None:
    """Fields of /proc/<pid>/stat after the command name (state, ppid, ...), None once gone."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except (FileNotFoundError, ProcessLookupError):
        return None
    return stat[stat.rindex(")") + 2 :].split()


def _alive_and_ours(pid: int, parent: int) -> bool:
    """True while ``pid`` runs (not a zombie) as a child of ``parent``."""
    fields = _stat(pid)
    return fields is not None and fields[0] != "Z" and int(fields[1]) == parent


def _start_time(pid: int) -> str | None:
    """The kernel's start time of ``pid``: with the pid, it names one process even if pids are reused."""
    fields = _stat(pid)
    return None if fields is None else fields[19]


class GunicornServer:
    """One gunicorn master and its workers; use as a context manager so it is always stopped."""

    def __init__(self, workers: int = 2, graceful_timeout: float = 30.0) -> None:
        self.workers = workers
        # deploy/gunicorn.conf.py's graceful_timeout: how long a drain may take before gunicorn kills.
        self.graceful_timeout = graceful_timeout
        self._dir = tempfile.TemporaryDirectory(prefix="tailgauge-system-")
        self.root = Path(self._dir.name)
        self.log_path = self.root / "gunicorn.log"
        self.process: subprocess.Popen | None = None
        self.port = 0
        self.returncode: int | None = None
        self._workers_seen: dict[int, str | None] = {}  # pid -> start time

    @property
    def pid(self) -> int:
        assert self.process is not None, "server not started"
        return self.process.pid

    @property
    def base_url(self) -> str:
        return f"http://{HOST}:{self.port}"

    def command(self) -> list[str]:
        """The command that becomes the gunicorn master (a subclass may wrap it; it must exec gunicorn)."""
        return gunicorn_command()

    def environment(self) -> dict[str, str]:
        """The server's environment (a subclass may add settings of its own)."""
        tmp = self.root / "tmp"
        metrics = self.root / "metrics"
        tmp.mkdir(exist_ok=True)
        metrics.mkdir(exist_ok=True)
        # The caller's TAILGAUGE_* limits would change what the service accepts: defaults only.
        environ = {k: v for k, v in os.environ.items() if not k.startswith("TAILGAUGE_")}
        environ.update(
            BIND=f"{HOST}:{self.port}",
            WEB_CONCURRENCY=str(self.workers),
            TMPDIR=str(tmp),
            WORKER_TMP_DIR=str(tmp),
            PROMETHEUS_MULTIPROC_DIR=str(metrics),
            HOME=str(self.root),
            PYTHONUNBUFFERED="1",
        )
        return environ

    def start(self, timeout: float = 60.0) -> GunicornServer:
        """Start and wait until every worker has started its application and /health/ready answers."""
        for _attempt in range(3):  # another process may take the free port before gunicorn binds it
            self.port = free_port()
            with self.log_path.open("ab") as log:
                self.process = subprocess.Popen(
                    self.command(),
                    cwd=REPO,
                    env=self.environment(),
                    stdin=subprocess.DEVNULL,
                    stdout=log,
                    stderr=subprocess.STDOUT,
                    preexec_fn=die_with_parent if sys.platform == "linux" else None,
                )
            if self._wait_ready(timeout):
                return self
            if "Address already in use" not in self.log():
                break
        self.stop()
        raise ServerError(f"gunicorn did not become ready within {timeout} s\n{self.log_tail()}")

    def _wait_ready(self, timeout: float) -> bool:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                return False
            if self.ready() and len(self.worker_pids()) == self.workers and self.startups() >= self.workers:
                return True
            time.sleep(0.1)
        return False

    def ready(self) -> bool:
        try:
            with urllib.request.urlopen(f"{self.base_url}/health/ready", timeout=2) as answer:
                return answer.status == 200
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            return False

    def startups(self) -> int:
        """How many times a worker has completed its application startup (from the log)."""
        return self.log().count(STARTUP_MESSAGE)

    def worker_pids(self) -> set[int]:
        pids = {pid for pid in children_of(self.pid) if _alive_and_ours(pid, self.pid)}
        for pid in pids:
            self._workers_seen.setdefault(pid, _start_time(pid))
        return pids

    def owners_of(self, client_ports: list[int]) -> dict[int, int]:
        """Which worker holds the server end of each client connection: {client port: worker pid}.

        From /proc/net/tcp (the server-side socket of 127.0.0.1:port <- 127.0.0.1:client port and
        its inode) and the socket inodes among each worker's open files.
        """
        wanted = {f"0100007F:{self.port:04X}"}
        inode_of_port = {}
        for line in Path("/proc/net/tcp").read_text().splitlines()[1:]:
            fields = line.split()
            local, remote, inode = fields[1], fields[2], fields[9]
            if local in wanted and remote.startswith("0100007F:"):
                inode_of_port[int(remote.split(":")[1], 16)] = inode
        owner_of_inode = {}
        for pid in self.worker_pids():
            for fd in Path(f"/proc/{pid}/fd").glob("*"):
                try:
                    target = os.readlink(fd)
                except OSError:
                    continue
                if target.startswith("socket:["):
                    owner_of_inode[target[8:-1]] = pid
        return {port: owner_of_inode[inode_of_port[port]] for port in client_ports
                if port in inode_of_port and inode_of_port[port] in owner_of_inode}

    def wait_for_replacement(self, excluding: set[int], startups: int, timeout: float = 30.0) -> set[int]:
        """Wait until ``self.workers`` workers run, none in ``excluding``, and more than ``startups``
        application startups are logged (the replacement is serving, not only forked)."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            pids = self.worker_pids()
            if len(pids) == self.workers and not pids & excluding and self.startups() > startups:
                return pids
            time.sleep(0.05)
        raise ServerError(f"no {self.workers} workers outside {excluding} within {timeout} s\n{self.log_tail()}")

    def signal(self, signum: int) -> None:
        os.kill(self.pid, signum)

    def wait(self, timeout: float) -> int:
        """Wait for the master to exit; its return code (ServerError if it is still running)."""
        try:
            self.returncode = self.process.wait(timeout)
        except subprocess.TimeoutExpired:
            raise ServerError(f"gunicorn still running after {timeout} s\n{self.log_tail()}") from None
        return self.returncode

    def stop(self) -> None:
        """SIGTERM the master, SIGKILL it after the graceful timeout, then any worker left behind."""
        if self.process is None:
            return
        if self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(self.graceful_timeout + 5)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait()
        self.returncode = self.process.returncode
        for pid, started in self._workers_seen.items():
            fields = _stat(pid)
            # Still running with the start time we saw: an orphaned worker of ours, not a reused pid.
            if fields is not None and fields[0] != "Z" and started is not None and fields[19] == started:
                os.kill(pid, signal.SIGKILL)

    def log(self) -> str:
        return self.log_path.read_text(errors="replace") if self.log_path.exists() else ""

    def log_tail(self, lines: int = 40) -> str:
        return "\n".join(self.log().splitlines()[-lines:])

    def __enter__(self) -> GunicornServer:
        return self.start()

    def cleanup(self) -> None:
        """Remove the server's directory (its log, metric files and temporary files)."""
        self._dir.cleanup()

    def __exit__(self, *exc_info) -> None:
        try:
            self.stop()
        finally:
            self.cleanup()
