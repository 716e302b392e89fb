"""Media types: JSON and MessagePack bodies in (by Content-Type) and out (by Accept).

One ``Codec`` per format holds cached msgspec decoders and its encoder; handlers ask for the
request's codec (415 when the body's type is not served) and the answer's codec (406 when the
Accept header excludes both). Problem responses follow the answer's format where it can be
known, JSON otherwise.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import msgspec
from litestar import Request

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

    def __init__(self, status: int, detail: str, header: str, message: str) -> None:
        super().__init__(detail)
        self.status, self.detail, self.header, self.message = status, detail, header, message


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


def answer_codec(request: Request) -> tuple[Codec, str]:
    """The codec and exact media type to answer with; JSON when the client states no preference."""
    if "accept" not in request.headers:
        return JSON_CODEC, JSON
    chosen = request.accept.best_match(_OFFERED)
    if chosen is None:
        raise MediaTypeError(
            406,
            f"this endpoint answers with {JSON} or {MSGPACK}; the Accept header excludes both",
            "header.accept",
            f"accept {JSON} or {MSGPACK}",
        )
    # best_match answers with one of the offers (the first one for a wildcard).
    return _BY_MEDIA_TYPE[chosen], chosen


def problem_codec(request: Request) -> Codec:
    """The format of an error response: MessagePack only when the client prefers it to JSON."""
    try:
        if "accept" not in request.headers:
            return JSON_CODEC
        chosen = request.accept.best_match([PROBLEM_JSON, JSON, PROBLEM_MSGPACK, *MSGPACK_TYPES])
    except Exception:  # a malformed Accept header must not turn an error into a crash
        return JSON_CODEC
    return MSGPACK_CODEC if chosen in (PROBLEM_MSGPACK, *MSGPACK_TYPES) else JSON_CODEC


__all__ = [
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
    "problem_codec",
]
