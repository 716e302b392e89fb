"""Group keys: their order when sorted, and the resampling seed each group gets from the one seed."""

from __future__ import annotations

import hashlib

import numpy as np

Key = str | int


def sort_key(key: Key) -> tuple[int, int | str]:
    """The order of ``options.group_order: "by_key"``: integer keys first, by value, then string
    keys by their Unicode code points (Python's string order). An integer and a string are never
    equal keys (``7`` and ``"7"`` are two groups)."""
    return (0, key) if isinstance(key, int) else (1, key)


def _digest(key: Key) -> tuple[int, ...]:
    """Four 32-bit words of the SHA-256 of the key with its type (``int:7`` and ``str:7`` differ)."""
    text = f"{'int' if isinstance(key, int) else 'str'}:{key}".encode("utf-8", "surrogatepass")
    return tuple(int(word) for word in np.frombuffer(hashlib.sha256(text).digest()[:16], dtype="<u4"))


def group_seed(seed: int, key: Key) -> int:
    """The resampling seed of the group ``key`` under the request's ``seed``.

    The seed sequence of ``seed`` with the key's digest as its spawn key
    (``numpy.random.SeedSequence(seed, spawn_key=...)``), reduced to 53 bits as the comparison's
    side seeds are (:func:`tailgauge.core.compare.side_seeds`), so it survives JSON. It depends
    on the seed and the key alone, never on the group's position: a group's intervals stay the
    same when other groups are added, removed or reordered, and sending its values to
    ``/v1/descriptors/samples`` with this seed reproduces them bit for bit.
    """
    child = np.random.SeedSequence(seed, spawn_key=_digest(key))
    return int(child.generate_state(1, np.uint64)[0] >> np.uint64(11))
