"""Memory a request may use, bounded before its body is decoded and while it computes.

Two checks, both before the work they guard:

* ``decoding_bytes``: an upper bound on the memory of decoding a body, from a scan that
  allocates nothing per element (JSON: its separators; MessagePack: the length headers of its
  arrays, read through ``msgspec.Raw`` without decoding the items). A body beyond the
  request's memory, or with more entries than any accepted request can hold, is a 413 before
  a single item is decoded.
* ``MemoryGate``: every request of a worker process holds its estimated bytes (the decoding
  bound first, then the compute estimate of :func:`tailgauge.core.admit`) from one pool of
  ``max_request_memory_bytes``; a request that does not fit waits for others to finish, up to
  its deadline, then answers 503. So a worker never plans more than that setting at once,
  whatever the concurrency.
"""

from __future__ import annotations

import threading
import time
from contextlib import contextmanager

import msgspec

from tailgauge.api.media import JSON_CODEC, Codec
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.settings import Settings

# Upper bounds of decoded memory, measured with tracemalloc on msgspec 0.23 (rounded up): a
# number in a list becomes a Python float and a list slot (32 bytes); an object of a list
# (an outcome, a state) at most 8 bytes per byte of its MessagePack encoding (field names
# are fixed by the schema, so an outcome takes at least 16 bytes for about 112 decoded).
_BYTES_PER_SCALAR = 40
_BYTES_PER_CONTAINER_BYTE = 8
# Entries beyond any accepted request: values (and as many weights), plus options and names.
_SLACK_ENTRIES = 100_000


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
    """Upper bound of decoded bytes of one MessagePack value; records the largest array."""
    kind, count, header = _msgpack_header(raw)
    if kind == "map" and depth < 4:
        fields = msgspec.msgpack.decode(raw, type=dict[str, msgspec.Raw])
        return sum(_msgpack_entries(memoryview(v), f"{path}.{k}", depth + 1, largest) for k, v in fields.items())
    if kind == "array":
        if count > largest[0]:
            largest[:] = [count, path]
        first = raw[header] if count and len(raw) > header else 0
        if 0x80 <= first <= 0x9F or first in (0xDC, 0xDD, 0xDE, 0xDF):
            return float(_BYTES_PER_CONTAINER_BYTE * len(raw))
        return float(_BYTES_PER_SCALAR * count)
    if kind == "map":
        return float(_BYTES_PER_CONTAINER_BYTE * len(raw))
    return float(_BYTES_PER_SCALAR + len(raw))


def decoding_bytes(body: bytes, codec: Codec, settings: Settings) -> float:
    """An upper bound of the memory decoding ``body`` takes (the body included), or a 413."""
    if codec is JSON_CODEC:
        entries = body.count(b",") + 1
        largest, path = entries, "$"
        estimate = float(_BYTES_PER_SCALAR * entries)
    else:
        track = [0, "$"]
        try:
            estimate = _msgpack_entries(body, "$", 0, track) if body else 0.0
        except (msgspec.MsgspecError, RecursionError):
            # Not a map of fields (or nested past any schema): the decoder's own error will say
            # why; until it does, no more than a container's bytes per byte can be decoded.
            return float(_BYTES_PER_CONTAINER_BYTE * len(body) + len(body))
        largest, path = track
    limit = settings.max_values * 2 + _SLACK_ENTRIES
    if largest > limit:
        raise ApiProblem(
            "body-too-large",
            f"the body holds {largest} entries{'' if path == '$' else ' in ' + path}; this server accepts at most "
            f"{settings.max_values} values",
            [ProblemLocation(path=path, message=f"at most {settings.max_values} entries")],
        )
    total = estimate + len(body)
    if total > settings.max_request_memory_bytes:
        raise ApiProblem(
            "body-too-large",
            f"decoding this body would take about {total / 2**20:.0f} MiB, beyond this server's "
            f"{settings.max_request_memory_bytes / 2**20:.0f} MiB per request; send fewer values, or values as "
            "float64 bytes in MessagePack",
            [ProblemLocation(path=path, message="too many entries to decode within the memory limit")],
        )
    return total


class MemoryGate:
    """Bytes held by the requests of this process, at most ``capacity`` at once."""

    def __init__(self, capacity: int) -> None:
        self.capacity = capacity
        self.held = 0.0
        self._changed = threading.Condition()

    def _take(self, amount: float, deadline: float) -> None:
        amount = min(amount, self.capacity)  # an estimate beyond it was refused before
        with self._changed:
            while self.held + amount > self.capacity:
                left = deadline - time.monotonic()
                if left <= 0 or not self._changed.wait(timeout=left):
                    if self.held + amount <= self.capacity:
                        break
                    raise ApiProblem(
                        "server-busy",
                        "this worker's memory is taken by requests in progress; retry shortly",
                        [ProblemLocation(path="$", message="retry after the requests in progress finish")],
                        headers={"Retry-After": "1"},
                    )
            self.held += amount

    def _give(self, amount: float) -> None:
        with self._changed:
            self.held -= min(amount, self.capacity)
            self._changed.notify_all()

    @contextmanager
    def hold(self, amount: float, deadline: float):
        """Hold ``amount`` bytes for the block; ``ticket.resize(n)`` changes the amount held."""
        ticket = _Ticket(self, amount, deadline)
        self._take(amount, deadline)
        try:
            yield ticket
        finally:
            self._give(ticket.amount)


class _Ticket:
    def __init__(self, gate: MemoryGate, amount: float, deadline: float) -> None:
        self.gate, self.amount, self.deadline = gate, amount, deadline

    def resize(self, amount: float) -> None:
        # Released first, then taken again: two requests growing at once cannot hold each other up.
        self.gate._give(self.amount)
        self.amount = 0.0
        self.gate._take(amount, self.deadline)
        self.amount = amount


_GATES: dict[int, MemoryGate] = {}
_GATES_LOCK = threading.Lock()


def gate_for(settings: Settings) -> MemoryGate:
    """This process's gate for the configured memory (one pool per worker process)."""
    with _GATES_LOCK:
        gate = _GATES.get(settings.max_request_memory_bytes)
        if gate is None:
            gate = _GATES[settings.max_request_memory_bytes] = MemoryGate(settings.max_request_memory_bytes)
        return gate


@contextmanager
def admitted(body: bytes, codec: Codec, settings: Settings):
    """Check the body's decoding bound and hold it in the worker's gate for the request."""
    deadline = time.monotonic() + settings.max_request_seconds
    with gate_for(settings).hold(decoding_bytes(body, codec, settings), deadline) as ticket:
        yield ticket


__all__ = ["MemoryGate", "admitted", "decoding_bytes", "gate_for"]
