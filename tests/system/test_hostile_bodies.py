"""Hostile request bodies against the real server: corrupt KLL sketches (seeded mutations of a
valid one), a MessagePack length bomb, a 32 MB JSON body broken at its end, and gzip bodies (a
gzip bomb among them): each answered or refused, never by dropping the connection or by a worker
growing past the memory bound.

Every case that uses the ``hostile`` server runs inside ``hostile_case``
(tests/system/hostile_harness.py), which also checks, whatever the case asserts, that no worker
crashed or restarted, that ``GET /health/live`` answered within 1 s throughout, that nothing
answered 5xx, and that each worker's peak RSS stayed under the memory bound.

No outside reference values: the expectations are the statuses and problem types of the
service's own contract.

Run the hostile-input suite alone with ``python -m pytest tests/system/test_hostile*.py -rA``
(or ``make hostile``; ``-s`` shows one line per case: statuses, times and each worker's peak RSS).
"""

from __future__ import annotations

import gzip
import random
import time

import numpy as np

from tailgauge.core.sketches import kll_sketch_bytes

from .hostile_harness import (
    JSON_HEADERS,
    MSGPACK_HEADERS,
    PROMPT,
    SAMPLES,
    SKETCH_VALUES,
    SMALL_SAMPLES,
    MiB,
    hostile_case,
    merge_body,
    msgpack,
    wait_for_workers,
)

INVALID_BODY = "urn:tailgauge:problem:invalid-body"


# ---- 1. corrupt KLL sketches --------------------------------------------------------------


def _mutations(valid: bytes, count: int, seed: int) -> list[tuple[str, bytes]]:
    """Seeded corruptions of ``valid``: header bytes, 32-bit words, truncations, bit flips."""
    rng = random.Random(seed)
    levels = valid[18]
    header = 20 + 4 * (levels + 1)
    out = []
    for i in range(count):
        blob = bytearray(valid)
        kind = i % 4
        if kind == 0:
            at = rng.randrange(header)
            blob[at] = rng.randrange(256)
        elif kind == 1:
            at = 4 * rng.randrange(header // 4)
            blob[at:at + 4] = rng.choice([b"\xff\xff\xff\xff", rng.randbytes(4), b"\x00\x00\x00\x80"])
        elif kind == 2:
            blob = blob[: rng.randrange(8, len(valid))]
        else:
            at = rng.randrange(len(blob))
            blob[at] ^= 1 << rng.randrange(8)
        out.append((f"mutation{i}:{['byte', 'word', 'cut', 'bit'][kind]}", bytes(blob)))
    return out


def test_corrupt_sketches_are_refused_without_dropping_the_connection(hostile):
    valid = kll_sketch_bytes(SKETCH_VALUES)
    assert valid[18] >= 3, f"the sketch has only {valid[18]} levels"  # byte 18: number of levels
    offset_bomb = valid[:20] + b"\xff\xff\xff\xff" + valid[24:]  # bytes 20-23: first level's offset
    cases = [("first-level-offset-0xFFFFFFFF", offset_bomb), ("truncated-to-20-bytes", valid[:20])]
    cases += _mutations(valid, 200, seed=2028)
    with hostile_case(hostile, "1 corrupt sketches") as case:
        control = case.call("valid", "POST", "/v1/descriptors/merge", msgpack(merge_body(valid)), MSGPACK_HEADERS)
        assert control.status == 200, f"the valid sketch: {control.shown()}"
        dropped, started = [], time.monotonic()
        for label, blob in cases:
            if len(dropped) >= 3 or time.monotonic() - started > 60:
                break
            answer = case.call(label, "POST", "/v1/descriptors/merge", msgpack(merge_body(blob)),
                               MSGPACK_HEADERS, timeout=30)
            if answer.status is None:
                dropped.append(f"{label}: {answer.error}")
                wait_for_workers(hostile.server)
        answered = {label: answer for label, answer in case.answers[1:]}
        assert not dropped, f"connections dropped (a worker died?): {dropped}"
        assert len(answered) == len(cases), f"only {len(answered)} of {len(cases)} sent within 60 s"
        for label in ("first-level-offset-0xFFFFFFFF", "truncated-to-20-bytes"):
            problem = answered[label].problem()
            assert answered[label].status == 422 and problem["errors"][0]["path"] == "$.sketches[0]", (
                f"{label}: {answered[label].shown()}")
        unexpected = {label: a.status for label, a in answered.items() if a.status not in (200, 422)}
        assert not unexpected, f"mutations answered other than 200 or 422: {dict(list(unexpected.items())[:10])}"
        print(f"[hostile] mutations: {sum(a.status == 422 for a in answered.values())} refused, "
              f"{sum(a.status == 200 for a in answered.values())} valid")


# ---- 6. a MessagePack length bomb ----------------------------------------------------------


def test_messagepack_length_bomb_is_413_with_bounded_memory(hostile):
    count = 30_000_000
    # {"values": [1, 1, ...]}: a fixmap of one, the key, an array32 header and 30e6 positive fixints.
    body = b"\x81" + msgpack("values") + b"\xdd" + count.to_bytes(4, "big") + b"\x01" * count
    with hostile_case(hostile, "6 msgpack 30M fixints") as case:
        answer = case.call("30M-fixints", "POST", SAMPLES, body, MSGPACK_HEADERS)
        assert answer.status == 413, answer.shown()
        assert answer.problem().get("type") == "urn:tailgauge:problem:body-too-large", answer.shown()
        assert answer.seconds < PROMPT, f"413 only after {answer.seconds:.1f} s"


# ---- 7. a 32 MB JSON body broken at its end ------------------------------------------------


def test_json_syntax_error_at_the_end_of_32_mb_is_400(hostile):
    numbers = np.random.default_rng(9).uniform(1000.0, 9999.0, 1_600_000)
    text = ",".join(f"{x:.14f}" for x in numbers)  # 19 characters each, 20 with the comma
    body = b'{"values": [' + text.encode() + b", @]}"
    assert 30 * MiB < len(body) <= 32 * MiB, len(body)
    with hostile_case(hostile, "7 json 32 MB, error at the end") as case:
        answer = case.call("32MB-json", "POST", SAMPLES, body, JSON_HEADERS)
        assert answer.status == 400 and answer.problem().get("type") == INVALID_BODY, answer.shown()
        assert answer.seconds < PROMPT, f"400 only after {answer.seconds:.1f} s"


# ---- 11. Content-Encoding gzip -------------------------------------------------------------


def test_gzip_content_encoding_is_inflated_within_the_limit(hostile):
    # Issue 20: gzip bodies are inflated, never past the body limit (32 MiB by default): a bomb of
    # about 100 kB that would inflate to 100 MiB is a 413 without the worker's memory growing past
    # the case's bound; a plain body labelled gzip is a 400, deflate still a 415.
    bomb = gzip.compress(b'{"values": [1' + b" " * (100 * 2**20) + b"]}", 9)
    with hostile_case(hostile, "11 Content-Encoding gzip") as case:
        compressed = case.call("gzip-body", "POST", SAMPLES, gzip.compress(SMALL_SAMPLES),
                               {**JSON_HEADERS, "Content-Encoding": "gzip"})
        plain = case.call("plain-body-gzip-header", "POST", SAMPLES, SMALL_SAMPLES,
                          {**JSON_HEADERS, "Content-Encoding": "gzip"})
        bombed = case.call("gzip-bomb", "POST", SAMPLES, bomb, {**JSON_HEADERS, "Content-Encoding": "gzip"})
        deflated = case.call("deflate-body", "POST", SAMPLES, SMALL_SAMPLES, {**JSON_HEADERS, "Content-Encoding": "deflate"})
        assert (compressed.status, plain.status, bombed.status, deflated.status) == (200, 400, 413, 415), (
            f"{compressed.shown()} | {plain.shown()} | {bombed.shown()} | {deflated.shown()}")
