"""Mixed load against the real server: requests/s and p50/p99 per request class, and the ratio to /health/live.

Usage (from the repository root):
    python -m tests.system.load --seconds 30 --concurrency 8 --output test-artifacts/load.json
    python -m tests.system.load --base-url http://127.0.0.1:8000   (a server already running)

Without --base-url it starts gunicorn (2 workers, deploy/gunicorn.conf.py) on a free 127.0.0.1
port and stops it at the end. Two phases on the same server: the trivial endpoint /health/live
alone, then the mix. Each phase ends after --seconds or --max-requests, whichever comes first,
once one of every class has been sent. Every answer is checked (status 200, JSON, the input
kind and size echoed); the exit status is 1 when any request failed. One retry is allowed and
counted: a request on a kept-alive connection that the server closed before answering (as it
does when gunicorn recycles a worker after max_requests) is sent again on a new connection.
The client shares the machine's cores with the server: the figures compare endpoints and runs
on one machine; they are not a capacity statement.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import platform
import random
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from urllib.parse import urlsplit

from .client import Connection, ConnectionLost, ProtocolError, Response

JSON_HEADERS = {"Content-Type": "application/json", "Accept": "application/json"}


@dataclass(frozen=True)
class RequestClass:
    """One kind of request in the mix: what is sent, how often, and what a full answer contains."""

    name: str
    method: str
    path: str
    body: bytes | None
    weight: int
    check: Callable[[dict], str | None]  # None when the parsed answer is complete, else why not


def describes(kind: str, n: float, resampled: bool) -> Callable[[dict], str | None]:
    def check(answer: dict) -> str | None:
        if answer.get("kind") != kind:
            return f"kind {answer.get('kind')!r}, expected {kind!r}"
        if answer.get("size", {}).get("n") != n:
            return f"size.n {answer.get('size', {}).get('n')!r}, expected {n}"
        if "mean" not in answer.get("descriptors", {}):
            return "no mean among the descriptors"
        if resampled and (answer.get("resampling") or {}).get("seed") is None:
            return "no resampling member with its seed"
        return None

    return check


def _catalog_check(answer: dict) -> str | None:
    return None if answer.get("descriptors") and answer.get("warnings") else "catalog without entries"


def _live_check(answer: dict) -> str | None:
    return None if answer == {"status": "ok"} else f"unexpected health answer {answer!r}"


def request_classes(seed: int = 20261201) -> list[RequestClass]:
    """The mix: invented data (a roastery's bag weights, a courier's delivery times), built once."""
    rng = random.Random(seed)

    def bag_weights(n: int, decimals: int = 2) -> list[float]:
        return [round(rng.gauss(250.4, 1.1), decimals) for _ in range(n)]

    def body(payload: dict) -> bytes:
        return json.dumps(payload, separators=(",", ":")).encode()

    small = bag_weights(50)
    # About 1.1 MB of JSON. Readings of a fine balance (6 decimals): few ties, as 100,000 readings at
    # 0.01 g would have hundreds of ties each, which the medcouple handles far more slowly.
    large = bag_weights(100_000, decimals=6)
    resampled = bag_weights(2_000)
    outcomes = [{"value": minutes, "weight": rng.randint(1, 60)} for minutes in range(5, 125, 3)]
    counts_total = sum(outcome["weight"] for outcome in outcomes)
    bins = {"edges": [0, 15, 30, 45, 60, 90, None], "counts": [12, 58, 41, 17, 9, 3]}
    percentile_interval = {"interval": {"method": "percentile", "resamples": 999, "seed": 7}}
    bca_interval = {"interval": {"method": "bca", "resamples": 999, "seed": 1}}
    return [
        RequestClass("samples_small", "POST", "/v1/descriptors/samples", body({"values": small}), 6,
                     describes("samples", 50, False)),
        RequestClass("samples_large", "POST", "/v1/descriptors/samples", body({"values": large}), 1,
                     describes("samples", 100_000, False)),
        RequestClass("samples_bca_999", "POST", "/v1/descriptors/samples",
                     body({"values": resampled, "options": bca_interval}), 1, describes("samples", 2_000, True)),
        RequestClass("table_counts", "POST", "/v1/descriptors/table",
                     body({"weight_kind": "counts", "outcomes": outcomes}), 3,
                     describes("table", counts_total, False)),
        RequestClass("table_percentile_999", "POST", "/v1/descriptors/table",
                     body({"weight_kind": "counts", "outcomes": outcomes, "options": percentile_interval}), 1,
                     describes("table", counts_total, True)),
        RequestClass("bins", "POST", "/v1/descriptors/bins", body(bins), 3, describes("bins", 140, False)),
        RequestClass("catalog", "GET", "/v1/catalog", None, 1, _catalog_check),
    ]


LIVE = RequestClass("health_live", "GET", "/health/live", None, 1, _live_check)


@dataclass
class Outcome:
    name: str
    seconds: float
    error: str | None = None
    retried: bool = False  # sent again after the server closed its kept-alive connection


@dataclass
class Phase:
    """The outcomes of one phase, and its wall time."""

    outcomes: list[Outcome] = field(default_factory=list)
    elapsed: float = 0.0


def check_response(request_class: RequestClass, response: Response) -> str | None:
    """None for a full, valid answer; otherwise what is wrong with it."""
    if response.status != 200:
        return f"status {response.status}: {response.body[:200]!r}"
    if not response.headers.get("content-type", "").startswith("application/json"):
        return f"content type {response.headers.get('content-type')!r}"
    try:
        answer = json.loads(response.body)
    except ValueError as error:
        return f"body is not JSON ({error})"
    return request_class.check(answer)


async def send(connection: Connection, request_class: RequestClass) -> Response:
    headers = JSON_HEADERS if request_class.body is not None else {"Accept": "application/json"}
    return await connection.request(request_class.method, request_class.path, request_class.body, headers)


async def run_phase(
    host: str,
    port: int,
    classes: list[RequestClass],
    *,
    seconds: float,
    max_requests: int,
    concurrency: int,
    timeout: float,
    seed: int,
) -> Phase:
    """``concurrency`` clients, each on its own keep-alive connection, until time or count runs out.

    The clients take their requests from one shared schedule: a seeded shuffle of a cycle that
    holds each class ``weight`` times, repeated. The first cycle is always sent whole, so every
    class is exercised even in a phase shorter than one slow request.
    """
    phase = Phase()
    deadline = time.monotonic() + seconds
    cycle = [c for c in classes for _ in range(c.weight)]
    random.Random(seed).shuffle(cycle)
    dispatched = [0]

    def next_class() -> RequestClass | None:
        count = dispatched[0]
        if count >= max(max_requests, len(cycle)) or (count >= len(cycle) and time.monotonic() >= deadline):
            return None
        dispatched[0] += 1
        return cycle[count % len(cycle)]

    async def client() -> None:
        connection: Connection | None = None
        try:
            while (request_class := next_class()) is not None:
                start = time.perf_counter()
                error, retried = None, False
                while True:
                    try:
                        if connection is None or connection.closed:
                            connection = await Connection.open(host, port)
                        reused = connection.heads_read > 0
                        response = await asyncio.wait_for(send(connection, request_class), timeout)
                        error = check_response(request_class, response)
                    except ConnectionLost as lost:
                        # A kept-alive connection the server closed as the request went out (it does
                        # so to idle connections when gunicorn recycles a worker): nothing was read,
                        # so the request is sent again once on a new connection, as HTTP clients do
                        # (RFC 9112 9.3.1; these POSTs compute a pure function of the body). Counted.
                        if reused and not lost.received and not retried:
                            retried = True
                            continue
                        error = f"ConnectionLost: {lost}"
                    except (ProtocolError, OSError, asyncio.TimeoutError) as failure:
                        error = f"{type(failure).__name__}: {failure}"
                        if connection is not None:
                            connection.close()
                    break
                phase.outcomes.append(Outcome(request_class.name, time.perf_counter() - start, error, retried))
        finally:
            if connection is not None:
                connection.close()

    start = time.perf_counter()
    await asyncio.gather(*(client() for _ in range(concurrency)))
    phase.elapsed = time.perf_counter() - start
    return phase


def percentile(sorted_values: list[float], p: float) -> float:
    """Nearest-rank percentile (the smallest value with at least p % of the values at or below it)."""
    rank = max(1, -(-len(sorted_values) * p // 100))
    return sorted_values[int(rank) - 1]


def summarize(outcomes: list[Outcome], elapsed: float) -> dict:
    times = sorted(o.seconds for o in outcomes)
    errors = [o for o in outcomes if o.error is not None]
    summary = {
        "requests": len(outcomes),
        "errors": len(errors),
        "retried_after_keepalive_close": sum(o.retried for o in outcomes),
        "requests_per_second": len(outcomes) / elapsed if elapsed > 0 else None,
        "p50_ms": percentile(times, 50) * 1e3 if times else None,
        "p99_ms": percentile(times, 99) * 1e3 if times else None,
    }
    if errors:
        summary["first_errors"] = [f"{o.name}: {o.error}" for o in errors[:5]]
    return summary


def report(live: Phase, mixed: Phase, classes: list[RequestClass], settings: dict) -> dict:
    trivial = summarize(live.outcomes, live.elapsed)
    overall = summarize(mixed.outcomes, mixed.elapsed)
    per_class = {}
    for request_class in classes:
        mine = [o for o in mixed.outcomes if o.name == request_class.name]
        entry = summarize(mine, mixed.elapsed)
        entry["share_of_requests"] = len(mine) / len(mixed.outcomes) if mixed.outcomes else None
        entry["request_bytes"] = len(request_class.body or b"")
        if entry["p50_ms"] is not None and trivial["p50_ms"]:
            entry["p50_ratio_to_trivial"] = entry["p50_ms"] / trivial["p50_ms"]
            entry["p99_ratio_to_trivial"] = entry["p99_ms"] / trivial["p99_ms"]
        per_class[request_class.name] = entry
    ratios = {}
    if overall["requests_per_second"] and trivial["requests_per_second"]:
        ratios = {
            "throughput_mixed_over_trivial": overall["requests_per_second"] / trivial["requests_per_second"],
            "p50_mixed_over_trivial": overall["p50_ms"] / trivial["p50_ms"],
            "p99_mixed_over_trivial": overall["p99_ms"] / trivial["p99_ms"],
        }
    return {
        "settings": settings,
        "machine": {
            "cpus_available": len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count(),
            "python": platform.python_version(),
            "note": "client and server share the machine",
        },
        "trivial": trivial,
        "mixed": overall,
        "classes": per_class,
        "ratio_to_trivial": ratios,
        "errors": trivial["errors"] + overall["errors"],
        "retried_after_keepalive_close": trivial["retried_after_keepalive_close"]
        + overall["retried_after_keepalive_close"],
    }


async def warm_up(host: str, port: int, classes: list[RequestClass], workers: int) -> None:
    """Each class once per worker, concurrently on fresh connections (first calls load lazy imports).

    Not measured; which worker takes a connection is the kernel's choice, so this is best effort.
    """

    async def once(request_class: RequestClass) -> None:
        connection = await Connection.open(host, port)
        try:
            await send(connection, request_class)
        finally:
            connection.close()

    for request_class in [*classes, LIVE]:
        await asyncio.gather(*(once(request_class) for _ in range(workers)))


async def measure(
    base_url: str, *, seconds: float, concurrency: int, max_requests: int, timeout: float, workers: int = 2
) -> dict:
    parts = urlsplit(base_url)
    host, port = parts.hostname, parts.port or 80
    classes = request_classes()
    await warm_up(host, port, classes, workers)
    common = dict(seconds=seconds, max_requests=max_requests, concurrency=concurrency, timeout=timeout)
    live = await run_phase(host, port, [LIVE], seed=1, **common)
    mixed = await run_phase(host, port, classes, seed=2, **common)
    settings = {"base_url": base_url, "workers": workers, **common}
    return report(live, mixed, classes, settings)


def print_report(figures: dict, out=sys.stdout) -> None:
    def row(name: str, entry: dict) -> str:
        ratio = entry.get("p50_ratio_to_trivial")
        shown = f"{ratio:8.1f}" if ratio is not None else "       -"
        p50 = f"{entry['p50_ms']:9.2f}" if entry["p50_ms"] is not None else "        -"
        p99 = f"{entry['p99_ms']:9.2f}" if entry["p99_ms"] is not None else "        -"
        return (f"{name:<22}{entry['requests']:>9}{entry['errors']:>7}{entry['requests_per_second']:>10.1f}"
                f"{p50}{p99}{shown}")

    s = figures["settings"]
    print(f"{s['concurrency']} connections, {s['seconds']} s per phase (at most {s['max_requests']} requests), "
          f"{s['workers']} workers, {figures['machine']['cpus_available']} CPUs shared with the client", file=out)
    print(f"{'class':<22}{'requests':>9}{'errors':>7}{'req/s':>10}{'p50 ms':>9}{'p99 ms':>9}{'p50/triv':>8}", file=out)
    print(row("health_live (trivial)", figures["trivial"]), file=out)
    for name, entry in figures["classes"].items():
        print(row(name, entry), file=out)
    print(row("mixed (all classes)", figures["mixed"]), file=out)
    for name, value in figures["ratio_to_trivial"].items():
        print(f"{name}: {value:.3f}", file=out)
    print(f"errors: {figures['errors']}; requests sent again after the server closed a kept-alive "
          f"connection: {figures['retried_after_keepalive_close']}", file=out)
    for line in figures["trivial"].get("first_errors", []) + figures["mixed"].get("first_errors", []):
        print(f"  {line}", file=out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--seconds", type=float, default=10.0, help="length of each phase (default 10)")
    parser.add_argument("--concurrency", type=int, default=8, help="concurrent connections (default 8)")
    parser.add_argument("--max-requests", type=int, default=200_000, help="most requests per phase")
    parser.add_argument("--timeout", type=float, default=60.0, help="limit for one request, seconds")
    parser.add_argument("--base-url", help="measure a running server instead of starting one")
    parser.add_argument("--workers", type=int, default=2, help="gunicorn workers when starting one")
    parser.add_argument("--output", type=Path, help="write the figures as JSON to this path")
    args = parser.parse_args(argv)
    common = dict(seconds=args.seconds, concurrency=args.concurrency, max_requests=args.max_requests,
                  timeout=args.timeout)
    if args.base_url:
        figures = asyncio.run(measure(args.base_url, workers=args.workers, **common))
    else:
        from .server import GunicornServer

        with GunicornServer(workers=args.workers) as server:
            figures = asyncio.run(measure(server.base_url, workers=args.workers, **common))
    print_report(figures)
    if args.output:
        args.output.parent.mkdir(parents=True, exist_ok=True)
        args.output.write_text(json.dumps(figures, indent=2) + "\n")
        print(f"figures written to {args.output}")
    return 1 if figures["errors"] else 0


if __name__ == "__main__":
    sys.exit(main())
