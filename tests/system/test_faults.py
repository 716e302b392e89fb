"""Faults against the real server: SIGTERM while loaded, SIGKILL of a worker, slow clients.

No timing is asserted. Where a test must wait, it waits for an observable event (a ``100
Continue``, a pid appearing under the master) with a generous bound that only guards a hang.
"""

from __future__ import annotations

import asyncio
import json
import os
import signal
import time
from dataclasses import dataclass

import pytest

from .client import Connection, ConnectionLost, ProtocolError, Response, encode_request
from .load import JSON_HEADERS, RequestClass, check_response, describes, request_classes, send
from .server import HOST, GunicornServer, _stat

CLASSES = {c.name: c for c in request_classes()}
SMALL = CLASSES["samples_small"]
LIGHT = [CLASSES[name] for name in ("samples_small", "table_counts", "bins", "catalog")]
# Requests with a body, so the server's 100 Continue marks when each one is accepted.
LIGHT_POSTS = [c for c in LIGHT if c.body is not None]
HANG_GUARD = 60.0  # seconds; only ever reached when something hangs


# A resampling request that computes for a few tenths of a second (5,000 distinct values).
HEAVY = RequestClass(
    "samples_bca_heavy", "POST", SMALL.path,
    json.dumps({"values": [250.0 + i * 0.000137 for i in range(5_000)],
                "options": {"interval": {"method": "bca", "resamples": 1999, "seed": 3}}}).encode(),
    1, describes("samples", 5_000, True),
)


@dataclass
class Attempt:
    name: str
    started: float
    accepted_at: float | None = None
    response: Response | None = None
    error: str | None = None


async def _accepted_request(connection: Connection, request_class: RequestClass, attempt: Attempt,
                            before_body=None) -> None:
    """Send with Expect: 100-continue, noting when the server accepted it; ``before_body`` runs after that."""

    def accepted() -> None:
        attempt.accepted_at = time.monotonic()

    attempt.response = await connection.request(
        request_class.method, request_class.path, request_class.body, JSON_HEADERS,
        expect_continue=True, on_accepted=accepted, before_body=before_body,
    )


class RoomyServer(GunicornServer):
    """A server whose workers take the three heavy requests at once whatever else they hold: this
    test is about draining, and the per-worker memory bound (three heavy plans are 510 MiB beside
    a 512 MiB default) would otherwise refuse one with a 503 whenever all three land together
    beside a light request. Admission at the bound has its own tests (tests/system/test_memory.py)."""

    def environment(self) -> dict[str, str]:
        environ = super().environment()
        environ["TAILGAUGE_MAX_WORKER_MEMORY_BYTES"] = str(1 << 30)
        return environ


def test_sigterm_during_load_completes_every_accepted_request():
    """Accepted = the server answered 100 Continue, i.e. the application had started reading the body."""
    with RoomyServer(workers=2) as server:
        _sigterm_during_load(server)


def _sigterm_during_load(server: GunicornServer) -> None:
    heavy_attempts = [Attempt(HEAVY.name, time.monotonic()) for _ in range(3)]
    held_attempts = [Attempt(SMALL.name, time.monotonic()) for _ in range(2)]
    light_attempts: list[Attempt] = []
    sent = asyncio.Event()

    async def main() -> float:

        async def heavy_client(attempt: Attempt) -> None:
            connection = await Connection.open(HOST, server.port)
            try:
                await _accepted_request(connection, HEAVY, attempt)
            except (ConnectionLost, ProtocolError) as error:
                attempt.error = f"{type(error).__name__}: {error}"
            finally:
                connection.close()

        async def held_client(attempt: Attempt) -> None:
            # Acknowledged before the signal, body sent only after it: certainly in flight while draining.
            connection = await Connection.open(HOST, server.port)
            try:
                await _accepted_request(connection, SMALL, attempt, before_body=sent.wait)
            except (ConnectionLost, ProtocolError) as error:
                attempt.error = f"{type(error).__name__}: {error}"
            finally:
                connection.close()

        async def light_client(index: int) -> None:
            connection: Connection | None = None
            number = index
            while True:
                request_class = LIGHT_POSTS[number % len(LIGHT_POSTS)]
                number += 1
                attempt = Attempt(request_class.name, time.monotonic())
                try:
                    if connection is None or connection.closed:
                        connection = await Connection.open(HOST, server.port)
                    await _accepted_request(connection, request_class, attempt)
                except OSError as error:  # refused: the listener is closed, the drain has begun
                    if sent.is_set():
                        return
                    attempt.error = f"{type(error).__name__}: {error}"
                except (ConnectionLost, ProtocolError) as error:
                    attempt.error = f"{type(error).__name__}: {error}"
                light_attempts.append(attempt)
                if sent.is_set() and attempt.accepted_at is None:
                    return  # the server stopped taking requests on this connection
                if sent.is_set() and server.process.poll() is not None:
                    return

        tasks = [asyncio.create_task(heavy_client(a)) for a in heavy_attempts]
        tasks += [asyncio.create_task(held_client(a)) for a in held_attempts]
        tasks += [asyncio.create_task(light_client(i)) for i in range(3)]

        async def loaded() -> None:
            # Every heavy and held request accepted, and the light load flowing (3 answered).
            while not (all(a.accepted_at for a in heavy_attempts + held_attempts)
                       and sum(a.response is not None for a in light_attempts) >= 3):
                await asyncio.sleep(0.01)

        await asyncio.wait_for(loaded(), HANG_GUARD)
        server.signal(signal.SIGTERM)
        signal_time = time.monotonic()
        sent.set()
        await asyncio.wait_for(asyncio.gather(*tasks), HANG_GUARD)
        return signal_time

    signal_time = asyncio.run(main())
    returncode = server.wait(server.graceful_timeout + 5)

    assert all(a.accepted_at < signal_time for a in heavy_attempts + held_attempts)
    assert sum(a.accepted_at is not None and a.accepted_at < signal_time for a in light_attempts) >= 3
    accepted = [a for a in heavy_attempts + held_attempts + light_attempts if a.accepted_at is not None]
    for attempt in accepted:
        assert attempt.error is None and attempt.response is not None, (attempt, server.log_tail())
        request_class = HEAVY if attempt.name == HEAVY.name else CLASSES[attempt.name]
        assert check_response(request_class, attempt.response) is None, (attempt.name, attempt.response)
    assert returncode == 0, server.log_tail()
    refused = sum(a.accepted_at is None for a in light_attempts)
    print(f"accepted and answered: {len(accepted)} (5 held or heavy, {len(accepted) - 5} light); "
          f"light requests not accepted (the drain had begun): {refused}")


def _wait_dead(pid: int) -> None:
    deadline = time.monotonic() + HANG_GUARD
    while time.monotonic() < deadline:
        fields = _stat(pid)
        if fields is None or fields[0] == "Z":
            return
        time.sleep(0.01)
    raise AssertionError(f"worker {pid} still running after SIGKILL")


def test_sigkill_of_a_worker_keeps_the_service_answering_and_replaces_the_worker(fresh_server):
    """Every request started after the killed worker is gone gets a full 200 answer.

    The one retry allowed: a request that got no byte back on a keep-alive connection opened
    before the kill (its server end died with the worker) is sent again, once, on a new
    connection, as a client would after a connection reset. Requests in flight on the killed
    worker when it died may fail; they are counted, not asserted.
    """
    server = fresh_server
    before = server.worker_pids()
    assert len(before) == 2
    startups = server.startups()
    attempts: list[tuple[Attempt, float, int]] = []  # (attempt, finished, retries)
    kill: dict[str, float | int] = {}  # victim, how many client connections it held, sent, dead

    async def main() -> set[int]:
        stop = asyncio.Event()
        current: list[Connection | None] = [None] * 4

        async def client(index: int) -> None:
            connection: Connection | None = None
            number = index
            while not stop.is_set():
                request_class = LIGHT[number % len(LIGHT)]
                number += 1
                attempt = Attempt(request_class.name, time.monotonic())
                retries = 0
                while True:
                    try:
                        if connection is None or connection.closed:
                            connection = await Connection.open(HOST, server.port)
                            current[index] = connection
                        attempt.response = await asyncio.wait_for(send(connection, request_class), HANG_GUARD)
                        attempt.error = check_response(request_class, attempt.response)
                    except ConnectionLost as error:
                        dead = kill.get("dead")
                        stale = dead is not None and connection.opened_at < dead <= attempt.started
                        if stale and not error.received and retries == 0:
                            retries += 1
                            continue
                        attempt.error = f"ConnectionLost: {error}"
                    except (ProtocolError, OSError) as error:
                        attempt.error = f"{type(error).__name__}: {error}"
                        if connection is not None:
                            connection.close()
                    break
                attempts.append((attempt, time.monotonic(), retries))
            if connection is not None:
                connection.close()

        async def conductor() -> set[int]:
            while sum(a.error is None for a, _, _ in attempts) < 20:
                await asyncio.sleep(0.01)
            # The victim is the worker holding most of the clients' connections, so the kill hits them.
            ports = [c.writer.get_extra_info("sockname")[1] for c in current if c is not None and not c.closed]
            held = list(server.owners_of(ports).values())
            victim = max(before, key=held.count)
            kill.update(victim=victim, held=held.count(victim), sent=time.monotonic())
            os.kill(victim, signal.SIGKILL)
            await asyncio.to_thread(_wait_dead, victim)
            kill["dead"] = time.monotonic()
            replacement = await asyncio.to_thread(server.wait_for_replacement, {victim}, startups, HANG_GUARD)
            # Keep the load on until 40 more requests went through after the replacement started.
            mark = len(attempts)
            while len(attempts) < mark + 40:
                await asyncio.sleep(0.01)
            stop.set()
            return replacement

        replacement, *_ = await asyncio.wait_for(
            asyncio.gather(conductor(), *(client(i) for i in range(4))), HANG_GUARD * 2
        )
        return replacement

    replacement = asyncio.run(main())
    assert kill["held"] >= 1, "the killed worker held none of the clients' connections"
    done_before = [a for a, finished, _ in attempts if finished < kill["sent"]]
    in_flight = [a for a, finished, _ in attempts if a.started < kill["dead"] and finished >= kill["sent"]]
    after = [(a, retries) for a, _, retries in attempts if a.started >= kill["dead"]]
    assert all(a.error is None for a in done_before), [a.error for a in done_before if a.error][:5]
    failures = [(a.name, a.error) for a, _ in after if a.error is not None]
    assert not failures, (failures[:5], server.log_tail())
    assert len(after) >= 40
    assert kill["victim"] not in replacement and len(replacement) == 2 and replacement - before
    assert server.process.poll() is None, "the master must keep running"
    retried = sum(retries for _, retries in after)
    lost = sum(a.error is not None for a in in_flight)
    print(f"killed worker held {kill['held']} of 4 connections; in flight at the kill: {len(in_flight)} "
          f"({lost} failed); after it: {len(after)} requests, {retried} retried once on a stale connection")


@pytest.mark.parametrize("hold", ["body", "headers"])
def test_slow_clients_do_not_block_others(shared_server, hold):
    """Four connections trickle a request one byte at a time and finish only after every other
    request has been answered: if they blocked the workers, the others could never complete."""
    server = shared_server
    padding = 4_000
    done = asyncio.Event()

    async def main() -> tuple[list[Response], list[tuple[Response, int]]]:
        started = [asyncio.Event() for _ in range(4)]

        async def slow(index: int) -> tuple[Response, int]:
            connection = await Connection.open(HOST, server.port)
            trickled = 0
            try:
                if hold == "body":
                    body = b" " * padding + SMALL.body  # JSON allows leading whitespace
                    head = encode_request("POST", SMALL.path, connection.host, body,
                                          {**JSON_HEADERS, "Expect": "100-continue"})
                    connection.writer.write(head)
                    await connection.writer.drain()
                    status, _ = await connection.read_head()
                    assert status == 100  # the worker is reading this request's body
                    pending = body
                else:
                    head = encode_request("POST", SMALL.path, connection.host, SMALL.body,
                                          {**JSON_HEADERS, "X-Padding": "p" * padding})
                    pending = head + SMALL.body
                while not done.is_set() and trickled < len(pending) - 1:
                    connection.writer.write(pending[trickled : trickled + 1])
                    await connection.writer.drain()
                    trickled += 1
                    if trickled == 5:
                        started[index].set()
                    await asyncio.sleep(0.02)
                connection.writer.write(pending[trickled:])
                await connection.writer.drain()
                return await connection.read_response(), trickled
            finally:
                connection.close()

        async def others() -> list[Response]:
            for event in started:
                await event.wait()
            responses = []

            async def client(index: int) -> None:
                connection = await Connection.open(HOST, server.port)
                try:
                    for number in range(10):
                        request_class = LIGHT[(index + number) % len(LIGHT)]
                        response = await send(connection, request_class)
                        responses.append((request_class, response))
                finally:
                    connection.close()

            await asyncio.gather(*(client(i) for i in range(4)))
            done.set()
            return responses

        slow_tasks = [asyncio.create_task(slow(i)) for i in range(4)]
        answered = await asyncio.wait_for(others(), HANG_GUARD)
        return answered, await asyncio.wait_for(asyncio.gather(*slow_tasks), HANG_GUARD)

    answered, slow_results = asyncio.run(main())
    assert len(answered) == 40
    for request_class, response in answered:
        assert check_response(request_class, response) is None, (request_class.name, response.status)
    for response, trickled in slow_results:
        # Each slow request was still unfinished when the others were all answered, then completed.
        assert trickled < padding
        assert check_response(SMALL, response) is None, (response.status, response.body[:200])
