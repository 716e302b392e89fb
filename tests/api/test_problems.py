"""Locating a JSON syntax error by path (service/tailgauge/api/problems.py).

Regression: a 32 MB body with its syntax error at the end took 18 s of CPU and 917 MB to locate,
one Python step per byte. The scan now skips numbers and commas at C speed and gives up (naming
"$") past a bounded number of strings and brackets; it must still name the same paths as the
obvious byte-by-byte scan, which this test carries as its reference.
"""

from __future__ import annotations

import random

import msgspec
import pytest

from tailgauge.api import problems
from tailgauge.api.problems import invalid_body, json_path_at


def reference_path_at(body: bytes, offset: int) -> str:
    """The byte-by-byte scan the fast one replaced, kept here as the definition of the answer."""
    stack: list[list] = []
    i, end = 0, min(offset, len(body))
    while i < end:
        c = body[i : i + 1]
        if c == b'"':
            j = i + 1
            while j < len(body) and body[j : j + 1] != b'"':
                j += 2 if body[j : j + 1] == b"\\" else 1
            if stack and stack[-1][0] == "object" and stack[-1][2]:
                stack[-1][1] = body[i + 1 : j].decode("utf-8", "replace")
            i = j + 1
            continue
        if c == b"{":
            stack.append(["object", None, True])
        elif c == b"[":
            stack.append(["array", 0])
        elif c in (b"}", b"]") and stack:
            stack.pop()
        elif c == b":" and stack and stack[-1][0] == "object":
            stack[-1][2] = False
        elif c == b"," and stack:
            if stack[-1][0] == "array":
                stack[-1][1] += 1
            else:
                stack[-1][2] = True
        i += 1
    path = "$"
    for entry in stack:
        path += f"[{entry[1]}]" if entry[0] == "array" else (f".{entry[1]}" if entry[1] is not None else "")
    return path


PIECES = [b"{", b"}", b"[", b"]", b",", b":", b'"k"', b'"a,b"', b'"x\\"y"', b'"\\\\"', b"\\", b'"', b"1",
          b"-2.5e3", b" ", b"\n", b"null", b'"caf\xc3\xa9"']


def test_the_fast_scan_names_the_same_path_as_the_byte_by_byte_scan_at_every_offset():
    rng = random.Random(20240611)
    compared = 0
    for _ in range(3000):
        body = b"".join(rng.choice(PIECES) for _ in range(rng.randint(0, 40)))
        for offset in range(len(body) + 2):
            assert json_path_at(body, offset) == reference_path_at(body, offset), (body, offset)
            compared += 1
    assert compared > 50_000


def test_a_long_array_of_numbers_is_located_exactly():
    body = b'{"options": {"probabilities": [0.5]}, "values": [' + b", ".join(b"%d.25" % i for i in range(300_000)) + b", ]}"
    with pytest.raises(msgspec.DecodeError) as caught:
        msgspec.json.decode(body)
    problem = invalid_body(caught.value, body)
    assert problem.errors[0].path == "$.values[300000]"
    assert "byte" in problem.errors[0].message


def test_past_the_token_budget_the_location_is_the_root(monkeypatch):
    body = b'{"values": [' + b", ".join([b'"x"'] * 50) + b", ]}"
    error_at = len(body) - 2
    assert json_path_at(body, error_at) == "$.values[50]"
    monkeypatch.setattr(problems, "MAX_LOCATED_TOKENS", 40)
    assert json_path_at(body, error_at) == "$"
    # Within the budget the answer is still exact.
    assert json_path_at(body, body.index(b'"x"', 30)) == "$.values[4]"  # items start at 12, 17, ..., 32
