"""runtime.memory.collection_paused: the cyclic collector paused while a request builds many
acyclic objects, and restored to its own state when the last pause ends, across threads."""

from __future__ import annotations

import gc
import threading

from tailgauge.runtime.memory import collection_paused


def test_pauses_nest_and_restore_the_collector():
    assert gc.isenabled()
    with collection_paused():
        assert not gc.isenabled()
        with collection_paused():
            assert not gc.isenabled()
        assert not gc.isenabled()  # the outer pause is still in progress
    assert gc.isenabled()


def test_a_collector_disabled_before_stays_disabled():
    gc.disable()
    try:
        with collection_paused():
            assert not gc.isenabled()
        assert not gc.isenabled()
    finally:
        gc.enable()


def test_overlapping_pauses_of_two_threads_enable_it_once_both_end():
    inside, release = threading.Event(), threading.Event()

    def other() -> None:
        with collection_paused():
            inside.set()
            release.wait(5)

    thread = threading.Thread(target=other)
    with collection_paused():
        thread.start()
        assert inside.wait(5)
    assert not gc.isenabled()  # the other thread's pause goes on after this one ended
    release.set()
    thread.join(5)
    assert gc.isenabled()


def test_an_exception_inside_still_restores_it():
    try:
        with collection_paused():
            raise ValueError("inside")
    except ValueError:
        pass
    assert gc.isenabled()
