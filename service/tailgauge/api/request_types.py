"""The type a request accepts at a JSON path: the Struct type hints walked along the path.

Read by the error wording (:mod:`tailgauge.api.wording`) so a message can say what is allowed
where the error is (an enum's values, a number's bounds, an object's fields), from the request
type itself rather than from a copy. A comparison input's ``kind`` is read from the body, so the
walk follows the input kind that was sent.
"""

from __future__ import annotations

import enum
import re
import types
import typing
from dataclasses import dataclass, field
from typing import Annotated, Any, Literal, Union

import msgspec

from tailgauge.api.schemas.common import Float64Bytes

# ---- the type at a path ----------------------------------------------------------------------


@dataclass(frozen=True)
class Alternative:
    """One shape the value at a path may take: its base type and the constraints of its Meta."""

    base: Any
    bounds: dict[str, Any] = field(default_factory=dict)
    float64_bytes: bool = False  # bytes that carry little-endian float64 values

    @property
    def kind(self) -> str:
        base = self.base
        if base is type(None):
            return "null"
        if isinstance(base, Choice):
            return "choice"
        if isinstance(base, type):
            if issubclass(base, msgspec.Struct):
                return "object"
            if issubclass(base, enum.Enum):
                return "choice"
            if issubclass(base, bool):
                return "boolean"
            if issubclass(base, int):
                return "integer"
            if issubclass(base, float):
                return "number"
            if issubclass(base, str):
                return "string"
            if issubclass(base, (bytes, bytearray)):
                return "bytes"
        if typing.get_origin(base) in (list, tuple, set, frozenset):
            return "array"
        if typing.get_origin(base) is dict:
            return "object"
        return "unknown"


@dataclass(frozen=True)
class Choice:
    """A closed set of wire values: a Literal, an enum, or the tags of a tagged union."""

    values: tuple


def _meta_bounds(metadata) -> dict[str, Any]:
    bounds: dict[str, Any] = {}
    for meta in metadata:
        if isinstance(meta, msgspec.Meta):
            for name in ("ge", "gt", "le", "lt", "min_length", "max_length"):
                value = getattr(meta, name)
                if value is not None:
                    bounds[name] = value
    return bounds


def alternatives(tp, bounds: dict[str, Any] | None = None, float64_bytes: bool = False) -> list[Alternative]:
    """The shapes ``tp`` accepts, with Annotated constraints and unions flattened."""
    bounds = dict(bounds or {})
    float64_bytes = float64_bytes or tp == Float64Bytes
    origin = typing.get_origin(tp)
    if origin is Annotated:
        base, *metadata = typing.get_args(tp)
        return alternatives(base, {**bounds, **_meta_bounds(metadata)}, float64_bytes)
    if origin in (Union, types.UnionType):
        # Constraints of a whole union (rare) apply to each member.
        return [a for member in typing.get_args(tp) for a in alternatives(member, bounds, float64_bytes)]
    if origin is Literal:
        return [Alternative(Choice(typing.get_args(tp)), bounds)]
    if isinstance(tp, type) and issubclass(tp, enum.Enum):
        return [Alternative(Choice(tuple(member.value for member in tp)), bounds)]
    if tp is None:
        tp = type(None)
    return [Alternative(tp, bounds, float64_bytes)]


_SEGMENT = re.compile(r"\.([^.\[]+)|\[(\d+)\]")


def _segments(path: str) -> list[str | int] | None:
    """``$.options.interval[0]`` -> ``["options", "interval", 0]``; None for a path not of this form."""
    if not path.startswith("$"):
        return None
    segments: list[str | int] = []
    position = 1
    while position < len(path):
        match = _SEGMENT.match(path, position)
        if match is None:
            return None
        segments.append(match[1] if match[1] is not None else int(match[2]))
        position = match.end()
    return segments


def struct_fields(cls: type[msgspec.Struct]) -> dict[str, Any]:
    """Wire name -> type of each field of ``cls`` (its tag field first, as a choice of one tag)."""
    config = cls.__struct_config__
    named: dict[str, Any] = {}
    if config.tag_field is not None:
        named[config.tag_field] = Literal[config.tag]
    for info in msgspec.structs.fields(cls):
        named[info.encode_name] = info.type
    return named


def _tag_value(raw: bytes | None, codec_name: str, keys: list[str], tag_field: str):
    """The tag sent in the object at ``keys`` of ``raw`` (the request body), or None."""
    if raw is None:
        return None
    decode = msgspec.msgpack.decode if codec_name == "MessagePack" else msgspec.json.decode
    try:
        current = raw
        for key in keys:
            current = decode(current, type=dict[str, msgspec.Raw])[key]
        return decode(decode(current, type=dict[str, msgspec.Raw])[tag_field])
    except (msgspec.MsgspecError, KeyError, TypeError):
        return None


def type_at(root: type, path: str, body: bytes | None = None, codec_name: str = "JSON") -> list[Alternative]:
    """The alternatives of the value at ``path`` of a request decoded as ``root``; [] when unknown.

    A tagged union (a comparison's input) is narrowed by the tag the body sent at that object,
    when ``body`` is given and its path holds only field names; otherwise its members' answers
    are pooled.
    """
    segments = _segments(path)
    if segments is None:
        return []
    current = alternatives(root)
    for depth, segment in enumerate(segments):
        current = _narrowed(current, segments[:depth], segment, body, codec_name)
        following: list[Alternative] = []
        for alternative in current:
            base = alternative.base
            if isinstance(segment, str) and alternative.kind == "object" and isinstance(base, type):
                fields = struct_fields(base)
                if segment not in fields:
                    continue
                if segment == base.__struct_config__.tag_field:
                    tags = tuple(a.base.__struct_config__.tag for a in current if a.kind == "object")
                    following.append(Alternative(Choice(tags)))
                    break  # one choice of every tag, not one per member
                following.extend(alternatives(fields[segment]))
            elif isinstance(segment, int) and alternative.kind == "array":
                (item, *_) = typing.get_args(base) or (Any,)
                following.extend(alternatives(item))
        current = following
        if not current:
            return []
    return _narrowed(current, segments, None, body, codec_name)


def _narrowed(current: list[Alternative], walked: list, following, body: bytes | None, codec_name: str):
    """The members of a tagged union at ``walked`` reduced to the one whose tag the body sent.

    Kept whole when the next segment is the tag itself, when the path holds an index (the tag
    is then not looked up), or when the body's tag cannot be read.
    """
    tagged = [a for a in current if a.kind == "object" and isinstance(a.base, type)
              and a.base.__struct_config__.tag_field is not None]
    if len(tagged) < 2 or not all(isinstance(s, str) for s in walked):
        return current
    tag_field = tagged[0].base.__struct_config__.tag_field
    if following == tag_field:
        return current
    sent = _tag_value(body, codec_name, [str(s) for s in walked], tag_field)
    chosen = [a for a in tagged if a.base.__struct_config__.tag == sent]
    return chosen or current


def fields_at(root: type, path: str, body: bytes | None = None, codec_name: str = "JSON") -> list[str]:
    """The field names accepted in the object at ``path`` (declared order, no repeats)."""
    names: list[str] = []
    for alternative in type_at(root, path, body, codec_name):
        if alternative.kind == "object" and isinstance(alternative.base, type):
            names.extend(name for name in struct_fields(alternative.base) if name not in names)
    return names
