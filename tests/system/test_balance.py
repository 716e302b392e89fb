"""Connections opened at once are spread over both workers (deploy/gunicorn.conf.py: reuse_port).

With one listening socket shared by the workers, the first worker to wake accepted every
connection waiting in the queue: 8 connections opened at once all landed on one worker in 4
of 10 rounds. With ``reuse_port`` each worker listens on a socket of its own and the kernel
picks one per connection by a hash of its addresses, so a round lands wholly on one worker
only by the chance 2 x 2^-8 (1 in 128).

No timing is asserted; the only waits are bounds against a hang.
"""

from __future__ import annotations

import asyncio
import collections
import os
from pathlib import Path

from .client import Connection
from .load import check_response, request_classes, send
from .server import HOST

CONNECTIONS = 8
ROUNDS = 3
HANG_GUARD = 60.0
SMALL = next(c for c in request_classes() if c.name == "samples_small")


def _listening_sockets(server) -> dict[str, set[int]]:
    """Inodes of the sockets listening on the server's port -> pids of the workers holding them."""
    local = f"0100007F:{server.port:04X}"
    inodes = set()
    for line in Path("/proc/net/tcp").read_text().splitlines()[1:]:
        fields = line.split()
        if fields[1] == local and fields[3] == "0A":  # TCP_LISTEN
            inodes.add(fields[9])
    holders: dict[str, set[int]] = {inode: set() for inode in inodes}
    for pid in server.worker_pids():
        for fd in Path(f"/proc/{pid}/fd").glob("*"):
            try:
                target = os.readlink(fd)
            except OSError:
                continue
            if target.startswith("socket:[") and target[8:-1] in holders:
                holders[target[8:-1]].add(pid)
    return holders


async def _round(server) -> collections.Counter:
    """Open CONNECTIONS connections at once, answer a request on each, and count them by worker."""
    connections = await asyncio.gather(*(Connection.open(HOST, server.port) for _ in range(CONNECTIONS)))
    try:
        answers = await asyncio.wait_for(asyncio.gather(*(send(c, SMALL) for c in connections)), HANG_GUARD)
        for answer in answers:
            assert check_response(SMALL, answer) is None, answer
        ports = [c.writer.get_extra_info("sockname")[1] for c in connections]
        # The server end of each connection, still open after its answer, is held by the worker that answered.
        owners = server.owners_of(ports)
        assert len(owners) == CONNECTIONS, (owners, server.log_tail())
        return collections.Counter(owners.values())
    finally:
        for connection in connections:
            connection.close()


def test_each_worker_listens_on_its_own_socket(shared_server):
    holders = _listening_sockets(shared_server)
    workers = shared_server.worker_pids()
    assert len(holders) == len(workers) == 2, holders
    # One worker per socket, each worker on one socket: the kernel, not a race, picks the worker.
    assert sorted(len(pids) for pids in holders.values()) == [1, 1], holders
    assert set().union(*holders.values()) == workers


def test_connections_opened_at_once_are_served_by_both_workers(shared_server):
    workers = shared_server.worker_pids()
    rounds = [asyncio.run(_round(shared_server)) for _ in range(ROUNDS)]
    print("connections per worker in each round:", [sorted(r.values()) for r in rounds])
    for served in rounds:
        assert set(served) <= workers and sum(served.values()) == CONNECTIONS
    # By a fair hash, two rounds of three on one worker happen with probability about 2e-4.
    assert sum(len(served) == 2 for served in rounds) >= ROUNDS - 1, rounds
