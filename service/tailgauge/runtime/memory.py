"""Giving memory back to the system after a large request, and reading this process's resident size.

Two things kept a worker's memory after its large requests (measured in
tests/system/test_memory.py: 128 MB idle, over 600 MB after three bursts of 2e6-value requests):

* reference cycles: an exception's traceback holds its frames and their arrays, and litestar's
  and uvicorn's request objects form cycles too; they wait for a full collection, which a
  worker doing few but large requests reaches rarely;
* glibc's allocator keeps freed memory for reuse: each thread's arena shrinks only from its
  top, and a freed mmap-sized block raises the threshold under which later blocks come from the
  heap instead.

:func:`give_back` collects the cycles, then ``malloc_trim(0)`` returns the free pages of every
arena to the system. It is called only after a request that planned many bytes, so small
requests pay nothing for it; :func:`freeze_startup_objects` keeps the collection short (the
objects of the loaded app are not scanned again).

Kept free of the web stack (a process concern, like the other runtime modules).
"""

from __future__ import annotations

import ctypes
import ctypes.util
import gc
import logging
import os
import threading
from collections.abc import Iterator
from contextlib import contextmanager

logger = logging.getLogger("tailgauge.memory")


def _malloc_trim():
    """glibc's ``malloc_trim``, or None where the C library has none (musl, macOS)."""
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        trim = libc.malloc_trim
    except (OSError, AttributeError):
        return None
    trim.argtypes = [ctypes.c_size_t]
    trim.restype = ctypes.c_int
    return trim


_TRIM = _malloc_trim()


def give_back() -> bool:
    """Free unreachable cycles, then return the allocator's free pages to the system.

    True when the C library could release memory (False where there is no ``malloc_trim``).
    """
    gc.collect()
    if _TRIM is None:
        return False
    return bool(_TRIM(0))


def freeze_startup_objects() -> None:
    """Move every object alive now (the loaded app, its modules) out of the collector's scans.

    Called once a worker has loaded its app: a full collection then takes well under a
    millisecond instead of about 20 ms (litestar's and numpy's objects, measured on the 2-core
    machine), so :func:`give_back` costs little and holds the GIL only briefly.
    """
    gc.collect()
    gc.freeze()


_pauses = 0  # pauses in progress (any thread)
_enabled_before = False
_pausing = threading.Lock()


@contextmanager
def collection_paused() -> Iterator[None]:
    """Pause the cyclic garbage collector while a request builds many small acyclic objects.

    A request of 10,000 groups builds about 200,000 answer objects beside the decoded body's
    10,000 lists; each collection the allocations trigger scans them all and frees nothing (the
    answers hold no cycles), which took a quarter of such a request's time here. Nested and
    concurrent pauses count: the collector is enabled again when the last one ends, if it was
    enabled before the first. Cycles made meanwhile wait for the next collection
    (:func:`give_back` runs one after a large request).
    """
    global _pauses, _enabled_before
    with _pausing:
        if _pauses == 0:
            _enabled_before = gc.isenabled()
            gc.disable()
        _pauses += 1
    try:
        yield
    finally:
        with _pausing:
            _pauses -= 1
            if _pauses == 0 and _enabled_before:
                gc.enable()


def resident_bytes(pid: int | None = None) -> int:
    """Resident set size of ``pid`` (default: this process) in bytes, from /proc (0 elsewhere)."""
    try:
        with open(f"/proc/{pid or os.getpid()}/statm", "rb") as statm:
            return int(statm.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):
        return 0


__all__ = ["collection_paused", "freeze_startup_objects", "give_back", "resident_bytes"]
