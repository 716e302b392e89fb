"""gzip on the wire: request bodies inflated within the body limit, answers compressed when accepted.

Request bodies (``Content-Encoding: gzip``): inflated by a streaming decompressor that never
produces more than the limit plus one byte, so a gzip bomb (a few kilobytes that inflate to
gigabytes) is a 413 after at most ``max_body_bytes + 1`` bytes of output, and the decoded body
then meets every check a plain body meets (admission's decoding bound and the memory plan see
the decoded size, and the plan adds the compressed bytes held beside it). Any other content coding is a 415 (``media.content_coding``).

Answers: gzip when the request's ``Accept-Encoding`` accepts it (RFC 9110, section 12.5.3:
quality values honoured, ``gzip;q=0`` refuses it, ``*`` stands for codings not named) and the
answer is at least :data:`MIN_GZIP_BYTES`; every answer that could have been compressed says
``Vary: Accept-Encoding``, so a cache never hands a compressed answer to a client that did not
ask for one.
"""

from __future__ import annotations

import gzip
import zlib

from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation

# Below this many bytes an answer is sent as it is. Measured on this service's answers
# (tests/benchmarks/compression.py, zlib level 1): a 757-byte answer (one descriptor) becomes
# 467 bytes, a 1,103-byte one 505 bytes; with its headers (about 250 bytes) either fits in one
# TCP segment (1,448 bytes on Ethernet) compressed or not, so gzip saves no packet and no round
# trip there, only bytes inside a packet that is sent anyway. From about 1,400 bytes the plain
# answer needs a second segment and the compressed one does not; a default description of two
# values (8,612 bytes) becomes 2,141 bytes (7 segments to 2) for 22 us of compression, and 136 KB
# of 1,000 quantiles 22 KB for 0.45 ms.
MIN_GZIP_BYTES = 1400
# Level 1: on these answers level 6 saved 2 to 3 points of size more (0.28 against 0.30 of the
# plain size) for 2.5 times the CPU; level 9 nothing more. Answers built once (the catalog, the
# document) are compressed at level 9 when built.
ANSWER_LEVEL = 1
STATIC_LEVEL = 9
VARY = ("Vary", "Accept-Encoding")
# Output of one inflation step: the bound on how far past the limit a bomb is ever inflated is
# one byte (each step asks for at most what is left of the limit, plus one).
_STEP = 1 << 20
# gzip members (RFC 1952 allows several, concatenated) in one body; each costs a Python step.
MAX_MEMBERS = 64


class Inflated(bytes):
    """An inflated request body; ``compressed_size``: the bytes it came in, still held beside it.

    The request keeps its compressed body while it computes, so the memory plan counts both
    (``admission``: the body's own length plus ``compressed_size``).
    """

    compressed_size: int = 0


def inflate(body: bytes, limit: int) -> Inflated:
    """``body`` (gzip, one or more members) inflated, never past ``limit`` bytes: 413 beyond, 400 if not gzip."""
    parts: list[bytes] = []
    size = 0
    pending = body
    members = 0
    while True:
        members += 1
        if members > MAX_MEMBERS:
            raise _not_gzip(f"it holds more than {MAX_MEMBERS} gzip members")
        decompressor = zlib.decompressobj(wbits=16 + zlib.MAX_WBITS)
        try:
            while True:
                chunk = decompressor.decompress(pending, min(_STEP, limit + 1 - size))
                size += len(chunk)
                if size > limit:
                    raise ApiProblem(
                        "body-too-large",
                        f"the gzip body inflates past this server's limit of {limit} bytes (it was "
                        f"{len(body)} bytes compressed); send fewer values, or values as float64 bytes in "
                        "MessagePack",
                        [ProblemLocation(path="$", message=f"at most {limit} bytes once inflated")],
                    )
                parts.append(chunk)
                pending = decompressor.unconsumed_tail
                if decompressor.eof or (not chunk and not pending):
                    break
        except zlib.error as error:
            raise _not_gzip(f"it is not valid gzip data ({error})") from None
        if not decompressor.eof:
            raise _not_gzip("the gzip data ends before its last member does")
        pending = decompressor.unused_data
        if not pending:
            break
    inflated = Inflated(b"".join(parts))
    inflated.compressed_size = len(body)
    return inflated


def _not_gzip(why: str) -> ApiProblem:
    return ApiProblem(
        "invalid-body",
        f"the body is labelled Content-Encoding: gzip, but {why}",
        [ProblemLocation(path="$", message="must be gzip data (RFC 1952) when Content-Encoding is gzip")],
    )


def _quality(value: str) -> float:
    try:
        quality = float(value)
    except ValueError:
        return 0.0
    return quality if 0.0 <= quality <= 1.0 else 0.0


def accepts_gzip(accept_encoding: list[str]) -> bool:
    """Whether the ``Accept-Encoding`` header values accept gzip (RFC 9110, section 12.5.3).

    ``gzip`` (or its alias ``x-gzip``) with a quality above 0; or, when neither is named, ``*``
    with a quality above 0. No header: no compression (a client that sends none is served as sent).
    """
    named = None
    anything = 0.0
    for value in accept_encoding:
        for part in value.split(","):
            coding, *parameters = part.split(";")
            coding = coding.strip().lower()
            quality = 1.0
            for parameter in parameters:
                name, _, raw = parameter.partition("=")
                if name.strip().lower() == "q":
                    quality = _quality(raw.strip())
            if coding in ("gzip", "x-gzip"):
                named = quality if named is None else max(named, quality)
            elif coding == "*":
                anything = max(anything, quality)
    return (named if named is not None else anything) > 0.0


def answer(body: bytes, accepted: bool) -> tuple[bytes, dict[str, str]]:
    """The body to send and its headers: gzip (level 1) when accepted and large enough; always Vary."""
    if accepted and len(body) >= MIN_GZIP_BYTES:
        return gzip.compress(body, ANSWER_LEVEL, mtime=0), {"Content-Encoding": "gzip", VARY[0]: VARY[1]}
    return body, {VARY[0]: VARY[1]}


class Prepared:
    """An answer built once (the catalog, the document), with its gzip form made once too."""

    def __init__(self, body: bytes) -> None:
        self.body = body
        self.compressed = gzip.compress(body, STATIC_LEVEL, mtime=0) if len(body) >= MIN_GZIP_BYTES else None

    def answer(self, accepted: bool) -> tuple[bytes, dict[str, str]]:
        if accepted and self.compressed is not None:
            return self.compressed, {"Content-Encoding": "gzip", VARY[0]: VARY[1]}
        return self.body, {VARY[0]: VARY[1]}


__all__ = ["MIN_GZIP_BYTES", "Inflated", "Prepared", "accepts_gzip", "answer", "inflate"]
