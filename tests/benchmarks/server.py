"""gunicorn for the HTTP benchmarks, what /proc says about its workers, and a bounded client.

The server is the project's own configuration (deploy/gunicorn.conf.py of the tree under test)
on a free 127.0.0.1 port, importing ``tailgauge`` from that tree (PYTHONPATH), with a metrics
directory of its own so each worker's request counter can be read from its file. It is stopped
by the master's pid (SIGTERM, then SIGKILL after a bound).

The client is a closed loop on asyncio streams: a fixed number of keep-alive connections, each
sending its next request when the previous answer has been read, until a deadline. Requests are
prepared bytes; answers must carry Content-Length (the service's always do).
"""

from __future__ import annotations

import asyncio
import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from dataclasses import dataclass, field
from pathlib import Path

TICKS = os.sysconf("SC_CLK_TCK")


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


class Server:
    """gunicorn serving ``tree`` with ``workers`` workers; use as a context manager."""

    def __init__(self, tree: Path, workers: int, extra_env: dict[str, str] | None = None, *, recycle: bool = True) -> None:
        """``recycle=False`` turns gunicorn's max_requests off (command line over the configuration
        file), so that no worker restarts in the middle of a throughput phase."""
        self.tree = tree
        self.workers_wanted = workers
        self.port = free_port()
        self.metrics_dir = tempfile.mkdtemp(prefix="tailgauge-bench-metrics-")
        self.log = tempfile.NamedTemporaryFile(prefix="tailgauge-bench-server-", suffix=".log", delete=False)
        env = {k: v for k, v in os.environ.items() if not k.startswith("TAILGAUGE_")}
        env.update(
            BIND=f"127.0.0.1:{self.port}",
            WEB_CONCURRENCY=str(workers),
            PROMETHEUS_MULTIPROC_DIR=self.metrics_dir,
            PYTHONPATH=os.pathsep.join(filter(None, [str(tree / "service"), os.environ.get("PYTHONPATH")])),
        )
        env.update(extra_env or {})
        self.process = subprocess.Popen(
            [sys.executable, "-m", "gunicorn", "--config", str(tree / "deploy" / "gunicorn.conf.py")]
            + ([] if recycle else ["--max-requests", "0"]) + ["tailgauge.asgi:app"],
            cwd=tree, env=env, stdout=self.log, stderr=subprocess.STDOUT,
        )
        self.base = f"http://127.0.0.1:{self.port}"

    def __enter__(self) -> Server:
        try:
            self.wait_ready()
        except BaseException:
            self.stop()
            raise
        return self

    def __exit__(self, *exc) -> None:
        self.stop()

    def wait_ready(self, seconds: float = 90.0) -> None:
        """Until /health/ready answers 200 and every worker has started (and answered)."""
        deadline = time.monotonic() + seconds
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                raise RuntimeError(f"gunicorn exited with {self.process.returncode}: {self.log_tail()}")
            try:
                with urllib.request.urlopen(self.base + "/health/ready", timeout=2) as answer:
                    ready = answer.status == 200
            except OSError:
                ready = False
            if ready and len(self.worker_pids()) == self.workers_wanted:
                # Every worker imports the app before accepting; give the last one a moment to listen.
                time.sleep(1.0)
                return
            time.sleep(0.2)
        raise RuntimeError(f"gunicorn not ready within {seconds} s: {self.log_tail()}")

    def log_tail(self, lines: int = 15) -> str:
        return "\n".join(Path(self.log.name).read_text(errors="replace").splitlines()[-lines:])

    def worker_pids(self) -> list[int]:
        """The master's children (its workers), from /proc."""
        pids = []
        for entry in os.listdir("/proc"):
            if entry.isdigit():
                try:
                    stat = Path(f"/proc/{entry}/stat").read_text()
                except OSError:
                    continue
                if int(stat.rsplit(")", 1)[1].split()[1]) == self.process.pid:
                    pids.append(int(entry))
        return sorted(pids)

    def stop(self) -> None:
        """SIGTERM to the master (it drains and stops its workers); past 40 s, SIGKILL to the master
        and to each of the workers it had, by pid."""
        if self.process.poll() is None:
            workers = self.worker_pids()
            self.process.send_signal(signal.SIGTERM)
            try:
                self.process.wait(timeout=40)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)
                for pid in workers:
                    try:
                        os.kill(pid, signal.SIGKILL)
                    except ProcessLookupError:
                        pass
        self.log.close()
        shutil.rmtree(self.metrics_dir, ignore_errors=True)
        os.unlink(self.log.name)

    def requests_by_worker(self) -> dict[int, float] | None:
        """Requests each live worker has counted (its tailgauge_http_requests_total file), or None
        when the files cannot be read (another metrics layout)."""
        try:
            from prometheus_client.mmap_dict import MmapedDict
        except ImportError:
            return None
        counts: dict[int, float] = {}
        try:
            for pid in self.worker_pids():
                path = Path(self.metrics_dir) / f"counter_{pid}.db"
                total = 0.0
                if path.exists():
                    store = MmapedDict(str(path), read_mode=True)
                    try:
                        for key, value, *_ in store.read_all_values():
                            if json.loads(key)[0].startswith("tailgauge_http_requests"):
                                total += value
                    finally:
                        store.close()
                counts[pid] = total
        except Exception:  # noqa: BLE001 - a figure we can do without
            return None
        return counts


def cpu_seconds(pid: int) -> float:
    """User + system CPU seconds of one process so far (/proc/<pid>/stat, fields 14 and 15)."""
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / TICKS


def memory_kb(pid: int) -> dict[str, int]:
    """VmRSS and VmHWM of one process, in KiB (/proc/<pid>/status)."""
    found = {}
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        name, _, rest = line.partition(":")
        if name in ("VmRSS", "VmHWM"):
            found[name] = int(rest.split()[0])
    return found


def connections_by_worker(pids: list[int], port: int) -> dict[int, int]:
    """Established connections to ``port`` each process holds (its socket inodes in /proc/net/tcp)."""
    established = set()
    for table in ("/proc/net/tcp", "/proc/net/tcp6"):
        try:
            lines = Path(table).read_text().splitlines()[1:]
        except OSError:
            continue
        for line in lines:
            parts = line.split()
            local_port = int(parts[1].rsplit(":", 1)[1], 16)
            if local_port == port and parts[3] == "01":  # 01: ESTABLISHED
                established.add(parts[9])
    counts = {}
    for pid in pids:
        inodes = set()
        try:
            for fd in os.listdir(f"/proc/{pid}/fd"):
                try:
                    target = os.readlink(f"/proc/{pid}/fd/{fd}")
                except OSError:
                    continue
                if target.startswith("socket:["):
                    inodes.add(target[8:-1])
        except OSError:
            pass
        counts[pid] = len(inodes & established)
    return counts


# --- the client -----------------------------------------------------------------------------


def raw_request(method: str, path: str, body: bytes | None = None, content_type: str = "application/json") -> bytes:
    lines = [f"{method} {path} HTTP/1.1", "Host: 127.0.0.1", "Accept: application/json"]
    if body is not None:
        lines += [f"Content-Type: {content_type}", f"Content-Length: {len(body)}"]
    return ("\r\n".join(lines) + "\r\n\r\n").encode("latin-1") + (body or b"")


@dataclass
class Answer:
    status: int
    headers: dict[str, str]
    body: bytes


async def exchange(reader: asyncio.StreamReader, writer: asyncio.StreamWriter, request: bytes) -> Answer:
    writer.write(request)
    await writer.drain()
    head = await reader.readuntil(b"\r\n\r\n")
    status_line, *lines = head[:-4].decode("latin-1").split("\r\n")
    headers = {}
    for line in lines:
        name, _, value = line.partition(":")
        headers[name.strip().lower()] = value.strip()
    body = await reader.readexactly(int(headers["content-length"]))
    return Answer(int(status_line.split(" ", 2)[1]), headers, body)


async def open_connections(port: int, count: int) -> list[tuple[asyncio.StreamReader, asyncio.StreamWriter]]:
    """``count`` connections opened at once (all connects in flight together)."""
    return list(await asyncio.gather(*(asyncio.open_connection("127.0.0.1", port, limit=2**20) for _ in range(count))))


@dataclass
class Load:
    """What a closed loop saw: answers by status, latencies of the 200s, and its wall time."""

    seconds: float = 0.0
    latencies: list[float] = field(default_factory=list)
    statuses: dict[int, int] = field(default_factory=dict)
    errors: list[str] = field(default_factory=list)
    reconnects: int = 0  # connections the server closed and the client opened again

    @property
    def rate(self) -> float:
        return len(self.latencies) / self.seconds if self.seconds else 0.0

    def percentile(self, p: float) -> float | None:
        if not self.latencies:
            return None
        ordered = sorted(self.latencies)
        return ordered[min(len(ordered) - 1, int(p / 100 * len(ordered)))]


async def run_loop(pairs: list, port: int, request: bytes, seconds: float, timeout: float = 60.0) -> Load:
    """A closed loop on the open connections ``pairs`` (kept open after; one the server closed is
    replaced in the list) for ``seconds``; the last answers are awaited."""
    load = Load()
    start = time.perf_counter()
    deadline = start + seconds

    async def one(index: int) -> None:
        reader, writer = pairs[index]
        while time.perf_counter() < deadline:
            sent = time.perf_counter()
            try:
                answer = await asyncio.wait_for(exchange(reader, writer, request), timeout)
            except (OSError, asyncio.IncompleteReadError) as error:
                # The server closed the kept-alive connection (gunicorn recycles a worker after
                # max_requests): counted, and the loop goes on over a new connection.
                load.reconnects += 1
                if load.reconnects > 100:
                    load.errors.append(f"{type(error).__name__}: {error}")
                    return
                writer.close()
                reader, writer = pairs[index] = await asyncio.open_connection("127.0.0.1", port, limit=2**20)
                continue
            except (TimeoutError, ValueError) as error:
                load.errors.append(f"{type(error).__name__}: {error}")
                return
            load.statuses[answer.status] = load.statuses.get(answer.status, 0) + 1
            if answer.status == 200:
                load.latencies.append(time.perf_counter() - sent)
            if answer.headers.get("connection", "").lower() == "close":
                writer.close()
                reader, writer = pairs[index] = await asyncio.open_connection("127.0.0.1", port, limit=2**20)
                load.reconnects += 1

    try:
        await asyncio.gather(*(one(i) for i in range(len(pairs))))
    finally:
        load.seconds = time.perf_counter() - start
    return load


async def _closed_loop(port: int, request: bytes, connections: int, seconds: float, timeout: float) -> Load:
    pairs = await open_connections(port, connections)
    try:
        return await run_loop(pairs, port, request, seconds, timeout)
    finally:
        for _, writer in pairs:
            writer.close()


def closed_loop(port: int, request: bytes, connections: int, seconds: float, timeout: float = 60.0) -> Load:
    """``connections`` keep-alive connections, opened at once, each sending ``request`` again as
    soon as its previous answer is read, for ``seconds`` (the last answers are awaited)."""
    return asyncio.run(_closed_loop(port, request, connections, seconds, timeout))


def send_once(port: int, request: bytes, timeout: float = 60.0) -> Answer:
    async def go() -> Answer:
        reader, writer = await asyncio.open_connection("127.0.0.1", port, limit=2**20)
        try:
            return await asyncio.wait_for(exchange(reader, writer, request), timeout)
        finally:
            writer.close()

    return asyncio.run(go())
