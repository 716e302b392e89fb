"""Media types: JSON and MessagePack bodies in (by Content-Type) and out (by Accept), figures out.

One ``Codec`` per format holds cached msgspec decoders and its encoder; handlers ask for the
request's codec (415 when the body's type or content coding is not served) and the answer's
codec (406 when the Accept header excludes both, quality values honoured); a gzip body is
inflated by ``compression``. Problem responses follow the answer's format where it can be
known, JSON otherwise. An operation whose table entry declares figure media types
(``image/svg+xml``, ``image/png``) offers them after JSON and MessagePack: ``*/*`` still gets JSON,
``image/*`` an SVG.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import msgspec

if TYPE_CHECKING:  # only annotations: the names and codecs here import without the server's libraries
    from litestar import Request

from tailgauge.figures import FORMATS as FIGURE_TYPES

JSON = "application/json"
MSGPACK = "application/msgpack"
# Names MessagePack goes by in the wild; all are read, the first is answered with by default.
MSGPACK_TYPES = (MSGPACK, "application/x-msgpack", "application/vnd.msgpack")
PROBLEM_JSON = "application/problem+json"
PROBLEM_MSGPACK = "application/problem+msgpack"


@dataclass(eq=False)
class Codec:
    name: str
    media_type: str
    problem_media_type: str
    encoder: Any
    decoder_kind: Any
    _decoders: dict[type, Any] = field(default_factory=dict)

    def decode(self, body: bytes, kind: type) -> Any:
        decoder = self._decoders.get(kind)
        if decoder is None:
            decoder = self._decoders.setdefault(kind, self.decoder_kind(kind))
        return decoder.decode(body)

    def encode(self, message: Any) -> bytes:
        return self.encoder.encode(message)


JSON_CODEC = Codec("JSON", JSON, PROBLEM_JSON, msgspec.json.Encoder(), msgspec.json.Decoder)
MSGPACK_CODEC = Codec("MessagePack", MSGPACK, PROBLEM_MSGPACK, msgspec.msgpack.Encoder(), msgspec.msgpack.Decoder)

_BY_MEDIA_TYPE = {JSON: JSON_CODEC, **{media: MSGPACK_CODEC for media in MSGPACK_TYPES}}
_OFFERED = [JSON, *MSGPACK_TYPES]


class MediaTypeError(Exception):
    """The body's media type is not served (415) or no served type is acceptable (406)."""

    def __init__(
        self, status: int, detail: str, header: str, message: str, headers: dict[str, str] | None = None
    ) -> None:
        super().__init__(detail)
        self.status, self.detail, self.header, self.message = status, detail, header, message
        self.headers = headers


def body_codec(request: Request) -> Codec:
    media = request.headers.get("content-type", "").split(";")[0].strip().lower()
    codec = _BY_MEDIA_TYPE.get(media)
    if codec is None:
        shown = media or "no Content-Type"
        raise MediaTypeError(
            415,
            f"send the request body as {JSON} or {MSGPACK} (got {shown})",
            "header.content-type",
            f"expected {JSON} or {MSGPACK}",
        )
    return codec


def _quality(value: str) -> float | None:
    """An RFC 9110 qvalue, from "0" to "1" (more than three decimals tolerated), or None when malformed."""
    try:
        quality = float(value)
    except ValueError:
        return None
    return quality if 0.0 <= quality <= 1.0 else None


def _ranges(accept: str) -> list[tuple[str, str, float]]:
    """The media ranges of an Accept header as (type, subtype, quality); malformed ranges are skipped."""
    ranges = []
    for part in accept.split(","):
        media, *parameters = part.split(";")
        kind, slash, subtype = media.strip().lower().partition("/")
        if not slash or not kind or not subtype or (kind == "*" and subtype != "*"):
            continue
        quality: float | None = 1.0
        for parameter in parameters:
            name, _, value = parameter.partition("=")
            if name.strip().lower() == "q":
                quality = _quality(value.strip())
        if quality is not None:
            ranges.append((kind, subtype, quality))
    return ranges


def negotiate(accept: str, offered: list[str]) -> str | None:
    """The offered media type the Accept header prefers, or None when it finds none acceptable.

    RFC 9110, section 12.5.1: each offer takes the quality of the most specific range matching it
    (``type/subtype`` over ``type/*`` over ``*/*``), so ``*/*;q=0`` or ``application/json;q=0``
    refuses a type rather than being ignored. Ties go to the more specific match, then to the
    earlier offer (JSON first).
    """
    ranges = _ranges(accept)
    best, best_key = None, (0.0, -1)
    for offer in offered:
        kind, _, subtype = offer.partition("/")
        match = (-1, 0.0)  # (specificity, quality) of the most specific matching range
        for range_kind, range_subtype, quality in ranges:
            if range_kind == kind and range_subtype == subtype:
                specificity = 2
            elif range_kind == kind and range_subtype == "*":
                specificity = 1
            elif range_kind == "*":
                specificity = 0
            else:
                continue
            if specificity > match[0]:
                match = (specificity, quality)
        key = (match[1], match[0])
        if match[1] > 0 and key > best_key:
            best, best_key = offer, key
    return best


def answer_codec(request: Request, figures: tuple[str, ...] = ()) -> tuple[Codec, str]:
    """The codec and exact media type to answer with; JSON when the client states no preference.

    ``figures``: the figure media types the operation also answers with (its table entry's). When
    one of them is chosen the codec is JSON's, for the problems a figure request may still meet.
    """
    accept = ", ".join(request.headers.getall("accept", []))
    if not accept:
        return JSON_CODEC, JSON
    chosen = negotiate(accept, [*_OFFERED, *figures])
    if chosen is None:
        served = [JSON, MSGPACK, *figures]
        listed = ", ".join(served[:-1]) + f" or {served[-1]}"
        raise MediaTypeError(
            406,
            f"this endpoint answers with {listed}; the Accept header excludes {'both' if len(served) == 2 else 'all'}",
            "header.accept",
            f"accept {listed} (with a quality above 0)",
        )
    if chosen in figures:
        return JSON_CODEC, chosen
    return _BY_MEDIA_TYPE[chosen], chosen


def problem_codec(request: Request) -> Codec:
    """The format of an error response: MessagePack only when the client prefers it to JSON."""
    try:
        accept = ", ".join(request.headers.getall("accept", []))
        if not accept:
            return JSON_CODEC
        chosen = negotiate(accept, [PROBLEM_JSON, JSON, PROBLEM_MSGPACK, *MSGPACK_TYPES])
    except Exception:  # a malformed Accept header must not turn an error into a crash
        return JSON_CODEC
    return MSGPACK_CODEC if chosen in (PROBLEM_MSGPACK, *MSGPACK_TYPES) else JSON_CODEC


def content_coding(request: Request) -> str:
    """The body's content coding: "identity" or "gzip" (``x-gzip`` is its alias); 415 for any other.

    RFC 9110, section 15.5.16: 415 also answers a Content-Encoding the server does not accept,
    and RFC 7694 has the answer's Accept-Encoding name the codings that are. One gzip layer at
    most: a body gzipped twice is refused rather than inflated twice.
    """
    codings = [
        coding.strip().lower()
        for value in request.headers.getall("content-encoding", [])
        for coding in value.split(",")
        if coding.strip()
    ]
    applied = [coding for coding in codings if coding != "identity"]
    if not applied:
        return "identity"
    if len(applied) == 1 and applied[0] in ("gzip", "x-gzip"):
        return "gzip"
    raise MediaTypeError(
        415,
        f"send the request body as gzip or without a content coding (got Content-Encoding: {', '.join(applied)})",
        "header.content-encoding",
        "only gzip (once) or identity (no Content-Encoding) is accepted",
        headers={"Accept-Encoding": "gzip"},
    )


__all__ = [
    "FIGURE_TYPES",
    "JSON",
    "JSON_CODEC",
    "MSGPACK",
    "MSGPACK_CODEC",
    "MSGPACK_TYPES",
    "PROBLEM_JSON",
    "PROBLEM_MSGPACK",
    "Codec",
    "MediaTypeError",
    "answer_codec",
    "body_codec",
    "content_coding",
    "negotiate",
    "problem_codec",
]
