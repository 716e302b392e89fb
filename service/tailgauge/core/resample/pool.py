"""The process's resampling threads: one pool per thread count, started on first use and kept."""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

_POOLS: dict[int, ThreadPoolExecutor] = {}
_POOLS_LOCK = threading.Lock()


def pool(threads: int) -> ThreadPoolExecutor:
    """The process's pool of ``threads`` resampling threads, started on first use and kept:
    starting threads for every request costs milliseconds, and one pool also bounds the
    resampling threads of requests computing at the same time."""
    with _POOLS_LOCK:
        found = _POOLS.get(threads)
        if found is None:
            found = _POOLS[threads] = ThreadPoolExecutor(max_workers=threads, thread_name_prefix="resample")
        return found
