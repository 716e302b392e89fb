"""A seeded sample of the KLL sketch fuzz run (tests/fuzz/sketch_fuzz.py); its checks shown able to fail.

The long run is ``make fuzz-sketches`` (100,000 cases by default); this sample keeps the parser
and the harness honest in ``make test``: 2,000 mutated sketches, every accepted one also decoded
by the native library in a child process and compared.
"""

from __future__ import annotations

import dataclasses
import signal

import datasketches
import numpy as np

from tailgauge.core import read_kll_sketch
from tests.fuzz.sketch_fuzz import NativeWorkers, compare, run


def test_a_seeded_sample_of_mutated_sketches():
    report = run(cases=2000, seed=20260710, workers=2, max_exponent=16)
    assert report.clean, "\n".join(report.lines())
    assert report.cases == 2000 and report.accepted + report.rejected == 2000
    # Both outcomes occurred, and every item type went through the native comparison.
    assert report.accepted >= 100 and report.rejected >= 1000, report.lines()
    assert set(report.accepted_by_type) == {"double", "float", "empty"}, report.lines()


def test_the_harness_sees_a_crash_and_a_mismatch():
    sketch = datasketches.kll_doubles_sketch(8)
    sketch.update(np.arange(31.0))
    good = bytes(sketch.serialize())
    workers = NativeWorkers(1)
    try:
        # The request that killed a service worker: the first level offset set to 0xFFFFFFFF makes
        # the floats decoder write about 16 GB past its buffer. The worker dies, is replaced, and
        # the next case runs.
        hostile = good[:20] + b"\xff\xff\xff\xff" + good[24:]
        answers = workers.decode([(0, "float", hostile), (1, "double", good)])
    finally:
        workers.close()
    assert answers[0][0] == "crashed" and answers[0][1] in (-signal.SIGSEGV, -signal.SIGBUS), answers[0]
    assert workers.restarts == 1
    ours = read_kll_sketch(good)
    assert compare(ours, answers[1]) is None
    wrong = dataclasses.replace(ours, weights=ours.weights[::-1].copy())
    assert compare(wrong, answers[1]) is not None
    assert compare(dataclasses.replace(ours, maximum=ours.maximum + 1), answers[1]) is not None
