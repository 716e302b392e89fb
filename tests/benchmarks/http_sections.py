"""The HTTP sections of run.py: small-request throughput, spreading connections over workers,
and memory of concurrent large resampling requests in one worker.

Each starts its own gunicorn from the tree under test (server.Server) and stops it by its pid.
Data are invented: a roastery's bag weights in grams.
"""

from __future__ import annotations

import asyncio
import json
import statistics
import threading
import time
from pathlib import Path

import numpy as np
from server import (
    Load,
    Server,
    closed_loop,
    connections_by_worker,
    cpu_seconds,
    exchange,
    memory_kb,
    open_connections,
    raw_request,
    run_loop,
    send_once,
)
from timing import NA, record

PATH = "/v1/descriptors/samples"
# Names from the descriptor registry (service/tailgauge/core/registry.py) and the answer's members.
SELECTED = ["mean", "standard_deviation", "quantiles"]


def bag_weights(n: int, seed: int = 20261216) -> list[float]:
    return [round(v, 2) for v in np.random.default_rng(seed).normal(250.4, 1.1, n)]


def json_body(payload: dict) -> bytes:
    return json.dumps(payload, separators=(",", ":")).encode()


def _selection_check(port: int, request: bytes) -> str | None:
    """None when the server honours options.descriptors, else why the figure is n/a."""
    answer = send_once(port, request)
    if answer.status == 400:
        return f"{NA}: the server answers 400 to options.descriptors"
    if answer.status != 200:
        return f"n/a (status {answer.status}: {answer.body[:160]!r})"
    descriptors = json.loads(answer.body).get("descriptors", {})
    extra = sorted(set(descriptors) - set(SELECTED))
    if extra:
        return f"n/a (selection not honoured: the answer also has {', '.join(extra[:4])}...)"
    return None


def _before(server: Server) -> tuple[list[int], dict[int, float], dict[int, float] | None]:
    pids = server.worker_pids()
    return pids, {pid: cpu_seconds(pid) for pid in pids}, server.requests_by_worker()


def _phase(server: Server, request: bytes, connections: int, seconds: float) -> tuple[Load, dict[int, float], dict[int, float] | None]:
    """One closed-loop phase on new connections, with each worker's CPU seconds and request count during it."""
    before = _before(server)
    load = closed_loop(server.port, request, connections, seconds)
    return _after(server, load, before)


def _after(server: Server, load: Load, before) -> tuple[Load, dict[int, float], dict[int, float] | None]:
    pids, cpu_before, counted_before = before
    cpu = {}
    for pid in pids:
        try:
            cpu[pid] = cpu_seconds(pid) - cpu_before[pid]
        except OSError:  # replaced meanwhile (max_requests): its CPU is lost to the figure
            load.errors.append(f"worker {pid} replaced during the phase")
    counted_after = server.requests_by_worker()
    counted = None
    if counted_before is not None and counted_after is not None:
        counted = {pid: counted_after.get(pid, 0.0) - counted_before.get(pid, 0.0) for pid in counted_after}
    return load, cpu, counted


def _phase_line(name: str, load: Load, cpu: dict[int, float], counted: dict[int, float] | None) -> str:
    p50, p99 = load.percentile(50), load.percentile(99)
    served = len(load.latencies)
    per_request = sum(cpu.values()) / served * 1e3 if served else float("nan")
    workers = " / ".join(f"{int(counted[pid])}" for pid in sorted(counted)) if counted else "unknown"
    line = (
        f"  {name:<22}{load.rate:9.0f} req/s  p50 {p50 * 1e3 if p50 else float('nan'):7.2f} ms"
        f"  p99 {p99 * 1e3 if p99 else float('nan'):7.2f} ms  worker CPU {per_request:5.2f} ms/request"
        f"  requests per worker {workers}"
    )
    others = {s: c for s, c in load.statuses.items() if s != 200}
    if others or load.errors or load.reconnects:
        line += f"  (other answers {others}, reconnects {load.reconnects}, errors {len(load.errors)}: {load.errors[:2]})"
    return line


def bench_small(tree: Path, quick: bool) -> None:
    """Row 1: a 100-value describe against GET /health/live, 2 workers, alternating phases."""
    seconds, rounds, connections = (2.0, 1, 8) if quick else (10.0, 3, 8)
    values = bag_weights(100)
    sides = {
        "health_live": raw_request("GET", "/health/live"),
        "samples_default": raw_request("POST", PATH, json_body({"values": values})),
        "samples_selected": raw_request("POST", PATH, json_body({"values": values, "options": {"descriptors": SELECTED}})),
    }
    print(
        f"small requests: 2 workers, {connections} keep-alive connections (closed loop), {seconds:g} s per phase,"
        f" {rounds} round(s) of health / samples / samples with options.descriptors={SELECTED}"
    )
    print("  (gunicorn max_requests off here: recycling every ~20,000 requests would restart workers mid-phase)")
    with Server(tree, 2, recycle=False) as server:
        first = send_once(server.port, sides["samples_default"])
        if first.status != 200:
            raise RuntimeError(f"the 100-value request answers {first.status}: {first.body[:200]!r}")
        unavailable = _selection_check(server.port, sides["samples_selected"])
        if unavailable:
            print(f"  samples_selected: {unavailable}")
            del sides["samples_selected"]
        rates: dict[str, list[float]] = {name: [] for name in sides}
        loads: dict[str, list[Load]] = {name: [] for name in sides}

        async def alternate_phases() -> None:
            # One set of connections for every phase: each side meets the same spread over workers.
            pairs = await open_connections(server.port, connections)
            try:
                for request in sides.values():  # warm-up
                    await run_loop(pairs, server.port, request, 1.0)
                held = connections_by_worker(server.worker_pids(), server.port)
                print(f"  connections held per worker: {' / '.join(str(held[pid]) for pid in sorted(held))}"
                      " (the same connections serve every phase)")
                for round_number in range(rounds):
                    for name, request in sides.items():
                        before = _before(server)
                        load = await run_loop(pairs, server.port, request, seconds)
                        load, cpu, counted = _after(server, load, before)
                        rates[name].append(load.rate)
                        loads[name].append(load)
                        print(_phase_line(f"{name} [{round_number + 1}]", load, cpu, counted))
            finally:
                for _, writer in pairs:
                    writer.close()

        asyncio.run(alternate_phases())
    health = rates["health_live"]
    targets = {"samples_default": ">= 0.4x", "samples_selected": ">= 0.7x"}
    for name in ("samples_default", "samples_selected"):
        label = "100 values, every descriptor" if name == "samples_default" else f"100 values, descriptors={SELECTED}"
        if name not in rates:
            record("1 small requests", f"{label}, req/s vs /health/live", None, "x", targets[name], unavailable or NA)
            continue
        ratio = statistics.median(a / b for a, b in zip(rates[name], health))
        p99 = statistics.median(load.percentile(99) or float("nan") for load in loads[name]) * 1e3
        print(f"  {name}: {ratio:.2f}x the req/s of /health/live (median over rounds; target {targets[name]}),"
              f" p99 {p99:.1f} ms")
        record("1 small requests", f"{label}, req/s vs /health/live", ratio, "x", targets[name],
               f"{statistics.median(rates[name]):.0f} vs {statistics.median(health):.0f} req/s, p99 {p99:.1f} ms")


def bench_balance(tree: Path, quick: bool) -> None:
    """Row 7: 8 connections opened at once against 2 workers; which workers serve them."""
    seconds, trials = (3.0, 1) if quick else (8.0, 3)
    request = raw_request("POST", PATH, json_body({"values": bag_weights(100)}))
    print(f"balance: 2 workers, 8 connections opened at once, 100-value requests for {seconds:g} s; {trials} trial(s)")
    shares, rates = [], []
    with Server(tree, 2, recycle=False) as server:
        for trial in range(trials):
            time.sleep(1.0)  # both workers idle, waiting in accept
            pids = server.worker_pids()
            held: dict[int, int] = {}

            def sample_connections() -> None:
                held.update(connections_by_worker(pids, server.port))

            sampler = threading.Timer(min(1.0, seconds / 2), sample_connections)
            sampler.start()
            load, cpu, counted = _phase(server, request, 8, seconds)
            sampler.join()
            nan = float("nan")
            busiest = max(cpu.values()) / sum(cpu.values()) if sum(cpu.values()) else float("nan")
            shares.append(busiest)
            rates.append(load.rate)
            print(
                f"  trial {trial + 1}: {load.rate:6.0f} req/s; connections held per worker "
                f"{' / '.join(str(held.get(pid, '?')) for pid in pids)}; CPU s per worker "
                f"{' / '.join(f'{cpu.get(pid, nan):.2f}' for pid in pids)}; requests per worker "
                f"{' / '.join(str(int(counted[pid])) for pid in sorted(counted)) if counted else 'unknown'}"
            )
    share = statistics.median(shares)
    record("7 balance", "8 connections at once, 2 workers: busier worker's share of worker CPU", share * 100, "%",
           "both serve (near 50 %)", f"median of {trials}; {statistics.median(rates):.0f} req/s")


def bench_memory(tree: Path, quick: bool) -> None:
    """Row 8: four concurrent large BCa requests into one worker; its RSS during and after."""
    import msgspec

    # 999 resamples: the service's default count is refused at once (422) for 2e6 values as too
    # slow for the per-request time limit; 999 take about 9 s alone on this machine.
    n, resamples = (200_000 if quick else 2_000_000), 999
    small_count = 50 if quick else 200
    x = np.random.default_rng(20261218).lognormal(5.5, 0.3, n)
    heavy = raw_request(
        "POST", PATH,
        msgspec.msgpack.encode({"values": x.astype("<f8").tobytes(), "options": {"interval": {"method": "bca", "resamples": resamples, "seed": 1}}}),
        content_type="application/msgpack",
    )
    small = raw_request("POST", PATH, json_body({"values": bag_weights(100)}))
    print(f"memory: 1 worker, 4 concurrent BCa requests ({resamples} resamples) of {n:,} values (float64 bytes in MessagePack), "
          f"then {small_count} small requests")
    with Server(tree, 1) as server:
        (pid,) = server.worker_pids()
        idle = memory_kb(pid)["VmRSS"] / 1024
        peak = [idle]
        stop = threading.Event()

        def poll() -> None:
            while not stop.is_set():
                try:
                    peak[0] = max(peak[0], memory_kb(pid)["VmRSS"] / 1024)
                except OSError:
                    return
                time.sleep(0.02)

        poller = threading.Thread(target=poll)
        poller.start()

        async def four() -> list[tuple[int, str, float]]:
            pairs = await open_connections(server.port, 4)

            async def one(reader, writer):
                start = time.perf_counter()
                try:
                    answer = await asyncio.wait_for(exchange(reader, writer, heavy), 180)
                    return answer.status, answer.headers.get("retry-after", ""), time.perf_counter() - start
                except (TimeoutError, OSError, asyncio.IncompleteReadError) as error:
                    return 0, type(error).__name__, time.perf_counter() - start
                finally:
                    writer.close()

            return list(await asyncio.gather(*(one(r, w) for r, w in pairs)))

        try:
            answers = asyncio.run(four())
        finally:
            stop.set()
            poller.join()
        alive = server.worker_pids() == [pid]
        after = memory_kb(pid) if alive else {}
        time.sleep(1.0)
        settled = memory_kb(pid)["VmRSS"] / 1024 if alive else float("nan")
        for _ in range(small_count):
            send_once(server.port, small)
        after_small = memory_kb(pid)["VmRSS"] / 1024 if alive else float("nan")
    statuses = ", ".join(f"{s}{' Retry-After ' + r if r else ''} in {t:.1f} s" for s, r, t in answers)
    hwm = after.get("VmHWM", 0) / 1024
    print(f"  answers: {statuses}")
    print(f"  worker RSS idle {idle:.0f} MB; peak {max(peak[0], hwm):.0f} MB (VmHWM {hwm:.0f} MB, polled {peak[0]:.0f} MB);"
          f" 1 s after {settled:.0f} MB; after {small_count} small requests {after_small:.0f} MB"
          + ("" if alive else "; THE WORKER WAS REPLACED"))
    record("8 memory", f"4 concurrent BCa requests of {n:.0e} values, 1 worker: peak RSS", max(peak[0], hwm), "MB",
           "bounded by a setting", f"answers {'/'.join(str(s) for s, _, _ in answers)}")
    record("8 memory", "RSS idle -> after the small requests", after_small, "MB", "freed memory returned",
           f"from {idle:.0f} MB")
