"""Memory a request may use, bounded before its body is decoded and while it computes.

Two checks, both before the work they guard:

* ``decoding_bytes``: an upper bound on the memory of decoding a body, from a scan that
  allocates nothing per element (JSON: its separators; MessagePack: the length headers of its
  arrays, read through ``msgspec.Raw`` without decoding the items). A body beyond the
  request's memory, or with more entries than any accepted request can hold, is a 413 before
  a single item is decoded.
* ``MemoryGate``: every request of a worker process holds its estimated bytes (the decoding
  bound first, then the compute estimate of :func:`tailgauge.core.admit`) from one pool of
  ``max_worker_memory_bytes``; a request that does not fit beside the ones in progress answers
  503 at once, with ``Retry-After``. So a worker never plans more than that setting at once,
  whatever the concurrency, and never queues. The pool is larger than one request's limit
  (``max_request_memory_bytes``), so small requests still fit beside the largest one.
"""

from __future__ import annotations

import functools
import math
import threading
import time
import traceback
from contextlib import contextmanager

import msgspec

from tailgauge.api import metrics
from tailgauge.api.media import JSON_CODEC, Codec
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.core.cost import NORMALISED_BYTES_PER_ENTRY
from tailgauge.runtime import memory
from tailgauge.settings import Settings

# Upper bounds of decoded memory, measured with tracemalloc on msgspec 0.23 (rounded up): a
# number in a list becomes a Python float and a list slot (32 bytes); an object of a list
# (an outcome, a state) at most 8 bytes per byte of its MessagePack encoding (field names
# are fixed by the schema, so an outcome takes at least 16 bytes for about 112 decoded).
_BYTES_PER_SCALAR = 40
_BYTES_PER_CONTAINER_BYTE = 8
# Entries beyond any accepted request: values (and as many weights), plus options and names.
_SLACK_ENTRIES = 100_000
# MessagePack byte strings (bin 8/16/32) by their lead byte: header length.
_BIN_HEADERS = {0xC4: 2, 0xC5: 3, 0xC6: 5}
# Retry-After never says more than this many seconds (a plan may be far off on a slow machine).
_MAX_RETRY_AFTER = 60


def _msgpack_header(raw) -> tuple[str, int, int]:
    """(kind, count, header length) of the MessagePack value starting ``raw``."""
    lead = raw[0]
    if 0x90 <= lead <= 0x9F:
        return "array", lead & 0x0F, 1
    if 0x80 <= lead <= 0x8F:
        return "map", lead & 0x0F, 1
    if lead in (0xDC, 0xDE) and len(raw) >= 3:
        return ("array" if lead == 0xDC else "map"), int.from_bytes(raw[1:3], "big"), 3
    if lead in (0xDD, 0xDF) and len(raw) >= 5:
        return ("array" if lead == 0xDD else "map"), int.from_bytes(raw[1:5], "big"), 5
    return "scalar", 1, 0


def _msgpack_entries(raw, path: str, depth: int, largest: list) -> float:
    """Upper bound of decoded bytes of one MessagePack value; records the largest array.

    ``largest``: [count, path] of the largest array, then the numbers seen so far (items of
    arrays of scalars, and 8-byte float64 values in byte strings).
    """
    kind, count, header = _msgpack_header(raw)
    if kind == "map" and depth < 4:
        fields = msgspec.msgpack.decode(raw, type=dict[str, msgspec.Raw])
        return sum(_msgpack_entries(memoryview(v), f"{path}.{k}", depth + 1, largest) for k, v in fields.items())
    if kind == "array":
        if count > largest[0]:
            largest[0:2] = [count, path]
        first = raw[header] if count and len(raw) > header else 0
        if 0x80 <= first <= 0x9F or first in (0xDC, 0xDD, 0xDE, 0xDF):
            return float(_BYTES_PER_CONTAINER_BYTE * len(raw))
        largest[2] += count
        return float(_BYTES_PER_SCALAR * count)
    if kind == "map":
        return float(_BYTES_PER_CONTAINER_BYTE * len(raw))
    if raw and raw[0] in _BIN_HEADERS:
        largest[2] += max(0, len(raw) - _BIN_HEADERS[raw[0]]) // 8
    return float(_BYTES_PER_SCALAR + len(raw))


def decoding_bytes(body: bytes, codec: Codec, settings: Settings) -> float:
    """An upper bound of the memory decoding ``body`` takes (the body included), or a 413."""
    return _decoding(body, codec, settings)[0]


def _decoding(body: bytes, codec: Codec, settings: Settings) -> tuple[float, int]:
    """:func:`decoding_bytes`, and an upper bound of the numbers the body holds."""
    if codec is JSON_CODEC:
        entries = body.count(b",") + 1
        largest, path, numbers = entries, "$", entries
        estimate = float(_BYTES_PER_SCALAR * entries)
    else:
        track = [0, "$", 0]
        try:
            estimate = _msgpack_entries(body, "$", 0, track) if body else 0.0
        except (msgspec.MsgspecError, RecursionError):
            # Not a map of fields (or nested past any schema): the decoder's own error will say
            # why; until it does, no more than a container's bytes per byte can be decoded.
            return float(_BYTES_PER_CONTAINER_BYTE * len(body) + len(body)), 0
        largest, path, numbers = track
    limit = settings.max_values * 2 + _SLACK_ENTRIES
    if largest > limit:
        raise ApiProblem(
            "body-too-large",
            f"the body holds {largest} entries{'' if path == '$' else ' in ' + path}; this server accepts at most "
            f"{settings.max_values} values",
            [ProblemLocation(path=path, message=f"at most {settings.max_values} entries")],
        )
    # A gzip request's compressed bytes stay held beside the inflated body (compression.Inflated).
    total = estimate + len(body) + getattr(body, "compressed_size", 0)
    if total > settings.max_request_memory_bytes:
        raise ApiProblem(
            "body-too-large",
            f"decoding this body would take about {total / 2**20:.0f} MiB, beyond this server's "
            f"{settings.max_request_memory_bytes / 2**20:.0f} MiB per request; send fewer values, or values as "
            "float64 bytes in MessagePack",
            [ProblemLocation(path=path, message="too many entries to decode within the memory limit")],
        )
    return total, numbers


class MemoryGate:
    """Bytes planned by the requests of this process, at most ``capacity`` at once.

    A request that does not fit beside the ones in progress is refused at once (503
    ``server-busy``) rather than queued: a queue would hold a thread, a connection and the
    decoded body of every waiting request. ``Retry-After`` says when enough of the memory held
    should be free again, from the planned seconds of the requests in progress. A request that
    planned at least ``trim_after`` bytes gives the allocator's free pages back to the system
    once its work has returned (:func:`giving_back`; see ``tailgauge.runtime.memory``).
    """

    def __init__(self, capacity: int, trim_after: int = 0) -> None:
        self.capacity = capacity
        self.trim_after = trim_after
        self.held = 0.0
        self._lock = threading.Lock()
        self._tickets: set[_Ticket] = set()

    def _retry_after(self, amount: float, now: float) -> int:
        """Whole seconds until the requests expected to end first free ``amount`` (lock held)."""
        need = self.held + amount - self.capacity
        wait = 1.0
        for ticket in sorted(self._tickets, key=lambda t: t.expected_end):
            wait = ticket.expected_end - now
            need -= ticket.amount
            if need <= 0:
                break
        return max(1, min(_MAX_RETRY_AFTER, math.ceil(wait)))

    def _take(self, ticket: _Ticket, amount: float) -> None:
        amount = min(amount, self.capacity)  # an estimate beyond it was refused before
        with self._lock:
            if self.held + amount > self.capacity:
                retry = self._retry_after(amount, time.monotonic())
                metrics.ADMISSION_REFUSALS.inc()
                raise ApiProblem(
                    "server-busy",
                    "this worker's memory is taken by requests in progress; retry shortly",
                    [ProblemLocation(path="$", message="retry after the requests in progress finish")],
                    headers={"Retry-After": str(retry)},
                )
            self.held += amount
            ticket.amount = amount
            metrics.INFLIGHT_BYTES.inc(amount)

    def _give(self, ticket: _Ticket) -> None:
        with self._lock:
            self.held -= ticket.amount
            metrics.INFLIGHT_BYTES.dec(ticket.amount)
            ticket.amount = 0.0

    @contextmanager
    def hold(self, amount: float, deadline: float):
        """Hold ``amount`` bytes for the block; ``ticket.resize(n, seconds)`` changes the amount held.

        ``deadline`` (monotonic) is when the request ends at the latest, until a plan says sooner.
        """
        ticket = _Ticket(self, deadline)
        self._take(ticket, amount)
        planned = ticket.amount
        with self._lock:
            self._tickets.add(ticket)
        metrics.INFLIGHT_REQUESTS.inc()
        try:
            yield ticket
        finally:
            planned = max(planned, ticket.amount)
            with self._lock:
                self._tickets.discard(ticket)
            self._give(ticket)
            metrics.INFLIGHT_REQUESTS.dec()
            if self.trim_after and planned >= self.trim_after:
                _large.ended = True


class _Ticket:
    def __init__(self, gate: MemoryGate, deadline: float) -> None:
        self.gate, self.amount, self.expected_end = gate, 0.0, deadline
        self.decoding = 0.0  # the part of amount that decoding the body takes

    def resize(self, amount: float, seconds: float | None = None) -> None:
        """Hold ``amount`` instead (503 when it does not fit); ``seconds``: the plan's time from now."""
        if seconds is not None:
            self.expected_end = min(self.expected_end, time.monotonic() + seconds)
        # Released first, then taken again: two requests growing at once cannot hold each other up.
        self.gate._give(self)
        self.gate._take(self, amount)


# Set by a gate when a large request of this thread ends; read by :func:`giving_back`.
_large = threading.local()


def _clear_frames(error: BaseException) -> None:
    """Drop the local variables of the finished frames of ``error``'s traceback and its context's."""
    seen = set()
    while error is not None and id(error) not in seen:
        seen.add(id(error))
        traceback.clear_frames(error.__traceback__)
        error = error.__cause__ or error.__context__


def giving_back(work):
    """``work`` (an endpoint), then the allocator's free pages back to the system if it planned much.

    Called after ``work`` has returned, when its frames (and their arrays) are gone: trimming
    inside the request would find most of its memory still in use.
    """

    @functools.wraps(work)
    def run(*args, **kwargs):
        _large.ended = False
        try:
            return work(*args, **kwargs)
        except BaseException as error:
            if _large.ended:
                # A refused or failed request: its traceback holds its frames, and their arrays
                # with them, in a reference cycle that only a later full collection would free.
                _clear_frames(error)
            raise
        finally:
            if _large.ended:
                _large.ended = False
                memory.give_back()

    return run


_GATES: dict[tuple[int, int], MemoryGate] = {}
_GATES_LOCK = threading.Lock()


def gate_for(settings: Settings) -> MemoryGate:
    """This process's gate for the configured memory (one pool per worker process)."""
    key = (settings.max_worker_memory_bytes, settings.trim_after_bytes)
    with _GATES_LOCK:
        gate = _GATES.get(key)
        if gate is None:
            gate = _GATES[key] = MemoryGate(*key)
        return gate


@contextmanager
def admitted(body: bytes, codec: Codec, settings: Settings):
    """Check the body's decoding bound and hold it in the worker's gate for the request.

    Held from the start: the decoding bound (``ticket.decoding``) and the normalised arrays of
    as many entries as the body holds numbers. The plan, made after normalising, replaces both
    (``ticket.resize``). Without the second part, requests arriving together all decoded and
    normalised millions of values before any plan could refuse them (a worker holding one
    2e6-value request in progress peaked at 1.16 GB with three more arriving).
    """
    deadline = time.monotonic() + settings.max_request_seconds
    decoding, numbers = _decoding(body, codec, settings)
    with gate_for(settings).hold(decoding + NORMALISED_BYTES_PER_ENTRY * numbers, deadline) as ticket:
        ticket.decoding = decoding
        yield ticket


__all__ = ["MemoryGate", "admitted", "decoding_bytes", "gate_for", "giving_back"]
