"""The hostile-input suite's harness (tests/system/test_hostile*.py): the server, its requests
and the checks around every case. No single request may take the service down.

One gunicorn (deploy/gunicorn.conf.py, 2 workers) per test module (the module-scoped ``hostile``
fixture below, which tests/system/conftest.py offers to the test modules) serves every case of
that module, with a per-request memory
limit of 256 MiB (``TAILGAUGE_MAX_REQUEST_MEMORY_BYTES``) and one API token (sent on every
request, so the duplicate-Authorization case needs no second server). Each case runs inside
``hostile_case``, which checks, whatever the case itself asserts:

- the worker pids did not change (no crash, no restart);
- ``GET /health/live`` answered within 1 s throughout (probed from another thread every 0.2 s);
- no 5xx was answered, neither to the case's own requests nor in the request log;
- each worker's peak RSS (``VmHWM``, reset before the case) stayed under the memory setting plus
  the idle baseline (the larger worker's ``VmRSS`` after a warm-up of every endpoint) plus 64 MiB
  of slack: glibc keeps a malloc arena per thread (the anyio pool and the two resampling threads)
  and does not hand every freed page back at once, thread stacks are touched, and the request
  body is held next to what is estimated from it. A worker that begins a case above the bound
  (memory an earlier, failed case made it take and kept) fails that case only if it grows further.

A worker whose RSS passes 2 GiB is killed by the test (a safety cap for the shared machine, far
above the bound above): the case then fails on both its pids and its peak.

Bounds in seconds here are liveness bounds with wide margins, not benchmarks: "at once" means
within 10 s for a refusal the target answers in well under one; every loop is bounded in count
and time, and every wait is bounded by ``HANG_GUARD``.

Run the hostile-input suite alone with ``python -m pytest tests/system/test_hostile*.py -rA``
(or ``make hostile``; ``-s`` shows one line per case: statuses, times and each worker's peak RSS).
"""

from __future__ import annotations

import contextlib
import http.client
import itertools
import json
import os
import re
import signal
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import msgspec
import numpy as np
import pytest

from tailgauge.core.sketches import kll_sketch_bytes

from .server import HOST, GunicornServer, ServerError

MiB = 1024 * 1024
MEMORY_SETTING = 256 * MiB
MEMORY_VARIABLE = "TAILGAUGE_MAX_REQUEST_MEMORY_BYTES"
RSS_SLACK = 64 * MiB
SAFETY_CAP = 2048 * MiB
CARRY_MARGIN = 16 * MiB  # growth in a case below this is read as the RSS it began with
LIVE_BOUND = 1.0  # seconds for GET /health/live, during every case
PROMPT = 10.0  # seconds: "at once", for a refusal the cost model decides before computing
HANG_GUARD = 90.0  # seconds: only reached when something hangs or computes far too long
TOKEN = "hostile-suite-token-0123456789"
SAMPLES = "/v1/descriptors/samples"
MSGPACK_HEADERS = {"Content-Type": "application/msgpack", "Accept": "application/json"}
JSON_HEADERS = {"Content-Type": "application/json", "Accept": "application/json"}
SMALL_SAMPLES = b'{"values": [3.5, 1.25, 8.0, 2.75, 5.5]}'


class HostileServer(GunicornServer):
    """The deployed server with a few TAILGAUGE_* settings of this suite's own."""

    def __init__(self, settings: dict[str, str], workers: int = 2) -> None:
        super().__init__(workers=workers)
        self.settings = settings

    def environment(self) -> dict[str, str]:
        environ = super().environment()
        environ.update(self.settings)
        return environ


# ---- /proc readings ------------------------------------------------------------------------


def _status_kib(pid: int, key: str) -> int | None:
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith(key + ":"):
                return int(line.split()[1])
    except (FileNotFoundError, ProcessLookupError):
        return None
    return None


def rss(pid: int) -> int | None:
    kib = _status_kib(pid, "VmRSS")
    return None if kib is None else kib * 1024


def peak_rss(pid: int) -> int | None:
    kib = _status_kib(pid, "VmHWM")
    return None if kib is None else kib * 1024


def reset_peak(pid: int) -> bool:
    """Set VmHWM back to the current RSS (Linux >= 4.0: write 5 to clear_refs); False if refused."""
    try:
        Path(f"/proc/{pid}/clear_refs").write_text("5")
    except OSError:
        return False
    return True


# ---- the server, once per module ---------------------------------------------------------


@dataclass
class Hostile:
    server: HostileServer
    memory_setting_applied: bool
    refusal: str  # why the memory setting was left out ("" when applied)
    baseline: int = 0  # bytes: the larger worker's VmRSS after warm-up
    requests: itertools.count = field(default_factory=itertools.count)

    @property
    def rss_bound(self) -> int:
        return MEMORY_SETTING + self.baseline + RSS_SLACK

    def request_id(self) -> str:
        return f"hostile-{os.getpid()}-{next(self.requests)}"


def _start(settings: dict[str, str], stack: contextlib.ExitStack) -> HostileServer:
    server = HostileServer(settings)
    stack.callback(server.__exit__, None, None, None)
    return server.start()


@pytest.fixture(scope="module")
def hostile() -> Iterator[Hostile]:
    """The server; started without the memory setting only when this branch does not know it
    yet (the settings reject unknown TAILGAUGE_ names), so the other cases can still run."""
    with contextlib.ExitStack() as stack:
        settings = {"TAILGAUGE_API_TOKENS": TOKEN, MEMORY_VARIABLE: str(MEMORY_SETTING)}
        try:
            state = Hostile(_start(settings, stack), True, "")
        except ServerError as error:
            if "unknown setting" not in str(error):
                raise
            refusal = re.search(r"unknown setting \w+", str(error))[0]
            del settings[MEMORY_VARIABLE]
            state = Hostile(_start(settings, stack), False, refusal)
        state.baseline = _warm_up(state)
        yield state


def _warm_up(state: Hostile) -> int:
    """A few small requests of every endpoint on new connections (so both workers get some),
    then the larger worker's VmRSS: imports and first-call caches are done by then."""
    bodies = [
        ("POST", SAMPLES, SMALL_SAMPLES),
        ("POST", SAMPLES, b'{"values": [3.5, 1.25, 8.0, 2.75, 5.5, 4.0], '
                         b'"options": {"interval": {"resamples": 200, "seed": 1}}}'),
        ("POST", "/v1/descriptors/table",
         b'{"outcomes": [{"value": 1, "weight": 3}, {"value": 2, "weight": 5}], "weight_kind": "counts"}'),
        ("POST", "/v1/descriptors/bins", b'{"edges": [0, 1, 2, 3], "counts": [4, 9, 2]}'),
        ("POST", "/v1/descriptors/merge", msgspec.json.encode(merge_body(kll_sketch_bytes(WARM_VALUES), WARM_VALUES))),
        ("POST", "/v1/comparisons", b'{"first": {"kind": "samples", "values": [1, 2, 3, 5]}, '
                                    b'"second": {"kind": "samples", "values": [2, 4, 6, 9]}}'),
        ("GET", "/v1/catalog", None), ("GET", "/openapi.json", None), ("GET", "/docs", None),
        ("GET", "/metrics", None), ("GET", "/docs/assets/swagger-ui.css", None),
    ]
    for _round in range(4):  # ~44 requests: both workers get every endpoint in practice
        for method, path, body in bodies:
            answer = _http(state, method, path, body, JSON_HEADERS if body else {"Accept": "*/*"}, timeout=30)
            assert answer.status == 200, (method, path, answer.status, answer.body[:300])
    pids = state.server.worker_pids()
    return max(rss(pid) or 0 for pid in pids)


# ---- requests ----------------------------------------------------------------------------


@dataclass
class Answer:
    status: int | None  # None: the connection ended without a response
    headers: dict[str, str]
    body: bytes
    seconds: float
    error: str = ""
    request_id: str = ""

    def problem(self) -> dict:
        try:
            found = json.loads(self.body)
        except ValueError:
            return {}
        return found if isinstance(found, dict) else {}

    def shown(self) -> str:
        if self.status is None:
            return f"no response after {self.seconds:.1f} s ({self.error})"
        return f"{self.status} after {self.seconds:.1f} s: {self.body[:400]!r}"


def _http(state: Hostile, method: str, path: str, body: bytes | None, headers: dict[str, str] | None,
          *, timeout: float = HANG_GUARD, extra: list[tuple[str, str]] | None = None,
          token: bool = True, request_id: str | None = None) -> Answer:
    """One request on a new connection. ``extra`` headers are sent as given (duplicates too)."""
    request_id = request_id or state.request_id()
    sent = [("X-Request-Id", request_id), *(headers or {}).items()]
    if token:
        sent.append(("Authorization", f"Bearer {TOKEN}"))
    sent += extra or []
    connection = http.client.HTTPConnection(HOST, state.server.port, timeout=timeout)
    started = time.monotonic()
    try:
        connection.putrequest(method, path, skip_accept_encoding=True)
        for name, value in sent:
            connection.putheader(name, value)
        if body is not None:
            connection.putheader("Content-Length", str(len(body)))
        connection.endheaders(body)
        response = connection.getresponse()
        content = response.read()
        return Answer(response.status, {k.lower(): v for k, v in response.getheaders()}, content,
                      time.monotonic() - started, request_id=request_id)
    except (OSError, http.client.HTTPException) as error:
        return Answer(None, {}, b"", time.monotonic() - started, f"{type(error).__name__}: {error}", request_id)
    finally:
        connection.close()


def _log_lines(server: GunicornServer, offset: int) -> list[dict]:
    """The JSON log lines written after byte ``offset`` (lines are split on newline only)."""
    with server.log_path.open("rb") as log:
        log.seek(offset)
        raw = log.read()
    lines = []
    for line in raw.split(b"\n"):
        try:
            lines.append(json.loads(line))
        except ValueError:
            continue
    return lines


def log_size(server: GunicornServer) -> int:
    return server.log_path.stat().st_size


def wait_for_request_line(server: GunicornServer, offset: int, request_id: str,
                           timeout: float = HANG_GUARD) -> dict | None:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        for line in _log_lines(server, offset):
            if line.get("request_id") == request_id and line.get("logger") == "tailgauge.requests":
                return line
        time.sleep(0.1)
    return None


# ---- the suite-wide checks ----------------------------------------------------------------


@dataclass
class Case:
    state: Hostile
    name: str
    pids: set[int]
    log_offset: int
    peaks_reset: bool
    start_rss: dict[int, int]
    answers: list[tuple[str, Answer]] = field(default_factory=list)
    live_worst: float = 0.0
    live_failures: list[str] = field(default_factory=list)
    live_probes: int = 0
    rss_seen: dict[int, int] = field(default_factory=dict)
    killed: list[str] = field(default_factory=list)

    def call(self, label: str, method: str, path: str, body: bytes | None = None,
             headers: dict[str, str] | None = None, **options) -> Answer:
        answer = _http(self.state, method, path, body, headers, **options)
        self.answers.append((label, answer))
        return answer


def wait_for_workers(server: GunicornServer) -> set[int]:
    deadline = time.monotonic() + HANG_GUARD
    while time.monotonic() < deadline:
        pids = server.worker_pids()
        if len(pids) == server.workers and server.ready():
            return pids
        time.sleep(0.1)
    raise ServerError(f"fewer than {server.workers} workers for {HANG_GUARD} s\n{server.log_tail()}")


def _probe_live(case: Case, stop: threading.Event) -> None:
    for _probe in range(5_000):
        if stop.is_set():
            return
        answer = _http(case.state, "GET", "/health/live", None, {"Accept": "application/json"},
                       timeout=5.0, token=False)
        case.live_probes += 1
        case.live_worst = max(case.live_worst, answer.seconds)
        if answer.status != 200 or answer.seconds > LIVE_BOUND:
            case.live_failures.append(f"{answer.status} after {answer.seconds:.2f} s {answer.error}".strip())
        stop.wait(0.2)


def _watch_rss(case: Case, stop: threading.Event) -> None:
    while not stop.wait(0.02):
        for pid in case.pids:
            now = rss(pid)
            if now is None:
                continue
            case.rss_seen[pid] = max(case.rss_seen.get(pid, 0), now)
            if now > SAFETY_CAP:
                with contextlib.suppress(ProcessLookupError):
                    os.kill(pid, signal.SIGKILL)
                case.killed.append(f"worker {pid} killed by the test at {now / MiB:.0f} MiB RSS (safety cap)")


@contextlib.contextmanager
def hostile_case(state: Hostile, name: str) -> Iterator[Case]:
    server = state.server
    pids = wait_for_workers(server)
    peaks_reset = all([reset_peak(pid) for pid in pids])
    case = Case(state, name, pids, log_size(server), peaks_reset, {pid: rss(pid) or 0 for pid in pids})
    stop = threading.Event()
    threads = [threading.Thread(target=target, args=(case, stop), daemon=True)
               for target in (_probe_live, _watch_rss)]
    for thread in threads:
        thread.start()
    failure: BaseException | None = None
    try:
        yield case
    except BaseException as error:  # noqa: BLE001 - re-raised below with the suite-wide findings
        failure = error
    finally:
        stop.set()
        for thread in threads:
            thread.join(10)
    violations, report = _verdict(case)
    print(report)
    if failure is not None:
        if violations:
            failure.add_note("suite-wide checks also failed:\n  " + "\n  ".join(violations))
        failure.add_note(report)
        raise failure
    assert not violations, "\n".join([f"{name}: suite-wide checks failed", *violations, report])


def _verdict(case: Case) -> tuple[list[str], str]:
    state, server = case.state, case.state.server
    violations = list(case.killed)
    after = server.worker_pids()
    if after != case.pids:
        gone = sorted(case.pids - after)
        violations.append(f"worker pids changed: {sorted(case.pids)} -> {sorted(after)} "
                          f"(gone: {gone}; master exit code {server.process.poll()})")
    if case.live_failures:
        violations.append(f"/health/live slower than {LIVE_BOUND} s or failing in {len(case.live_failures)} "
                          f"of {case.live_probes} probes: {case.live_failures[:5]}")
    fives = [f"{label}: {answer.status}" for label, answer in case.answers
             if answer.status is not None and answer.status >= 500]
    for _, answer in case.answers:  # the request line is written just after the response is sent
        if answer.status is not None:
            wait_for_request_line(server, case.log_offset, answer.request_id, timeout=5)
    logged = [line for line in _log_lines(server, case.log_offset)
              if line.get("logger") == "tailgauge.requests" and int(line.get("status", 0)) >= 500]
    if fives or logged:
        violations.append(f"5xx answered: {fives[:5]}; in the request log: "
                          f"{[(line.get('route'), line.get('status')) for line in logged[:5]]}")
    peaks = {}
    for pid in case.pids:
        peak = peak_rss(pid) if pid in after else None
        peaks[pid] = max(filter(None, (peak, case.rss_seen.get(pid))), default=0)
    # A worker may begin a case above the bound, holding memory an earlier case made it take (that
    # case failed for it); this case fails only for a peak it raised itself.
    raised = {pid: peak for pid, peak in peaks.items() if peak > case.start_rss.get(pid, 0) + CARRY_MARGIN}
    worst = max(raised.values(), default=0)
    if worst > state.rss_bound:
        note = "" if state.memory_setting_applied else (
            f" (this server runs without {MEMORY_VARIABLE}: {state.refusal})")
        violations.append(f"peak RSS {worst / MiB:.0f} MiB > bound {state.rss_bound / MiB:.0f} MiB "
                          f"(setting {MEMORY_SETTING / MiB:.0f} + baseline {state.baseline / MiB:.0f} "
                          f"+ slack {RSS_SLACK / MiB:.0f}){note}")
    shown = "; ".join(f"{label}={answer.status}/{answer.seconds:.2f}s" for label, answer in case.answers[:12])
    if len(case.answers) > 12:
        statuses = sorted({str(a.status) for _, a in case.answers})
        shown += f"; ... {len(case.answers)} requests, statuses {statuses}"
    shown_peaks = {pid: f"{case.start_rss.get(pid, 0) / MiB:.0f}->{peak / MiB:.0f} MiB" if peak else "gone"
                   for pid, peak in peaks.items()}
    report = (f"[hostile] {case.name}: {shown} | RSS at start -> VmHWM per worker {shown_peaks}"
              f"{'' if case.peaks_reset else ' (since worker start: reset refused)'} | "
              f"live worst {case.live_worst:.2f} s over {case.live_probes} probes")
    return violations, report


# ---- bodies ------------------------------------------------------------------------------


def msgpack(message: dict) -> bytes:
    return msgspec.msgpack.encode(message)


def _state_of(values: np.ndarray) -> dict:
    mean = float(values.mean())
    deviations = values - mean
    return {"count": float(values.size), "mean": mean,
            "central_sums": [float((deviations**j).sum()) for j in (2, 3, 4)],
            "minimum": float(values.min()), "maximum": float(values.max())}


SKETCH_VALUES = np.random.default_rng(2028).normal(40.0, 6.0, 5_000)
WARM_VALUES = np.random.default_rng(17).normal(12.0, 2.0, 60)


def merge_body(sketch: bytes, values: np.ndarray = SKETCH_VALUES) -> dict:
    """One partial state of ``values`` and one sketch (of the same values, unless corrupted)."""
    return {"states": [_state_of(values)], "sketches": [sketch]}
