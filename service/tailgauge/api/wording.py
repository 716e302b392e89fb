"""msgspec's error texts, reworded so a caller can act on them without knowing our code or its libraries.

msgspec words a schema violation in its own type syntax (``Expected `float | null`, got `str```,
``Invalid enum value 'BCa'``); the caller sees neither its type names nor ours. ``plain()`` maps
each kind of msgspec text to a phrase, and reads what is allowed from the request's own type at
the error's path (:func:`tailgauge.api.request_types.type_at` walks the Struct type hints along the JSON path), so an enum
error lists the values the Struct accepts, a bound says both ends of the range, and an unknown
field lists the fields accepted beside it. A text this table does not know keeps its words
with msgspec's backtick type syntax spelled out (``_fallback``); no message carries a backtick.

The path of an error is never changed here: only its message.
"""

from __future__ import annotations

import difflib
import re
import typing
from dataclasses import dataclass
from typing import Any

from tailgauge.api.request_types import Alternative, Choice, alternatives, fields_at, type_at
from tailgauge.api.schemas.common import LARGEST

# ---- phrases ---------------------------------------------------------------------------------

# msgspec's type words (what it expected, or what it got) in plain words.
_WORDS = {
    "float": "a number",
    "int": "a whole number",
    "str": "a string",
    "bool": "true or false",
    "null": "null",
    "None": "null",
    "array": "an array",
    "object": "an object",
    "bytes": "bytes",
    "ext": "a MessagePack extension value",
    "datetime": "a timestamp",
    "date": "a date",
    "time": "a time",
    "timedelta": "a duration",
    "uuid": "a UUID",
    "decimal": "a decimal number",
}
_GOT = {**_WORDS, "bool": "a boolean", "bytes": "binary data"}
_ORDER = ("choice", "object", "array", "number", "integer", "string", "boolean", "bytes", "unknown", "null")


def _number(value) -> str:
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e16:
        return str(int(value))
    return f"{value:g}" if isinstance(value, float) else str(value)


def _listing(values) -> str:
    return ", ".join(str(v) for v in values)


def _bytes_phrase(alternative: Alternative, codec_name: str) -> str:
    if alternative.float64_bytes:
        what = "little-endian float64 bytes (8 per value)"
    else:
        what = "bytes"
    return f"base64 of {what}" if codec_name == "JSON" else f"a MessagePack bin of {what}"


def _plural(alternatives_: list[Alternative], codec_name: str) -> str:
    """What an array of these items holds, in the plural."""
    kinds = {a.kind for a in alternatives_} - {"null"}
    if kinds <= {"number", "integer"} and kinds:
        return "whole numbers" if kinds == {"integer"} else "numbers"
    if kinds == {"object"}:
        return "objects"
    if kinds == {"string"} or kinds == {"choice"}:
        return "strings"
    if kinds == {"bytes"}:
        return "byte strings (base64 in JSON)" if codec_name == "JSON" else "MessagePack bins"
    return "values"


def phrase(alternative: Alternative, codec_name: str) -> str:
    """A shape in words: "a number", "an array of numbers", "one of: sample, population"."""
    kind = alternative.kind
    if kind == "choice":
        return "one of: " + _listing(alternative.base.values)
    if kind == "object":
        base = alternative.base
        tag_field = getattr(getattr(base, "__struct_config__", None), "tag_field", None)
        return f'an object (with "{tag_field}")' if tag_field else "an object"
    if kind == "array":
        (item, *_) = typing.get_args(alternative.base) or (Any,)
        return "an array of " + _plural(alternatives(item), codec_name)
    if kind == "bytes":
        return _bytes_phrase(alternative, codec_name)
    return {"number": "a number", "integer": "a whole number", "string": "a string",
            "boolean": "true or false", "null": "null"}.get(kind, "a value of another type")


def expected(alternatives_: list[Alternative], codec_name: str) -> str:
    """The shapes of a path joined: "a number or null", "an array of numbers, or base64 of ..."."""
    ordered = sorted(alternatives_, key=lambda a: _ORDER.index(a.kind))
    phrases: list[str] = []
    choices = [a for a in ordered if a.kind == "choice"]
    if len(choices) > 1:  # several choices at one path (tags of a union): one list
        pooled = tuple(dict.fromkeys(v for a in choices for v in a.base.values))
        ordered = [Alternative(Choice(pooled))] + [a for a in ordered if a.kind != "choice"]
    for alternative in ordered:
        words = phrase(alternative, codec_name)
        if words not in phrases:
            phrases.append(words)
    if len(phrases) == 1:
        return phrases[0]
    if any("," in p or " of " in p for p in phrases):
        return ", or ".join(phrases)
    return ", ".join(phrases[:-1]) + " or " + phrases[-1]


def _range(bounds: dict[str, Any]) -> tuple[str, bool]:
    """The bounds of a number in words, and whether it must be finite (a bound at float64's largest)."""
    low = bounds.get("ge", bounds.get("gt"))
    high = bounds.get("le", bounds.get("lt"))
    finite = False
    if low is not None and low <= -LARGEST:
        low, finite = None, True
    if high is not None and high >= LARGEST:
        high, finite = None, True
    if low is not None and high is not None and "ge" in bounds and "le" in bounds:
        return f"from {_number(low)} to {_number(high)}", finite
    parts = []
    if low is not None:
        parts.append(f"at least {_number(low)}" if "ge" in bounds else f"above {_number(low)}")
    if high is not None:
        parts.append(f"at most {_number(high)}" if "le" in bounds else f"below {_number(high)}")
    return " and ".join(parts), finite


_UNITS = {"entry": "entries", "byte": "bytes", "character": "characters", "field": "fields"}


def _entries(bounds: dict[str, Any], unit: str) -> str:
    """A length range in words: "at least 1 entry", "from 1 to 1000 entries"."""
    low, high = bounds.get("min_length"), bounds.get("max_length")
    plural = _UNITS[unit]
    if low is not None and high is not None:
        return f"from {low} to {high} {plural}"
    if low is not None:
        return f"at least {low} {unit if low == 1 else plural}"
    return f"at most {high} {unit if high == 1 else plural}"


# ---- the table of msgspec's texts ------------------------------------------------------------


@dataclass
class _Context:
    root: type | None
    path: str
    body: bytes | None
    codec_name: str

    def at(self, path: str | None = None) -> list[Alternative]:
        if self.root is None:
            return []
        return type_at(self.root, self.path if path is None else path, self.body, self.codec_name)


def _type_words(spec: str, codec_name: str) -> str:
    """msgspec's ``float | null`` as "a number or null" (no type of ours to read)."""
    words = [_WORDS.get(word.strip(), word.strip()) for word in spec.split("|")]
    if codec_name != "JSON":
        words = ["a MessagePack bin" if w == "bytes" else w for w in words]
    else:
        words = ["a base64 string" if w == "bytes" else w for w in words]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " or " + words[-1]


def _got(word: str) -> str:
    return _GOT.get(word, word)


def _choice_of(alternatives_: list[Alternative]) -> tuple | None:
    values = tuple(v for a in alternatives_ if a.kind == "choice" for v in a.base.values)
    return values or None


def _enum_value(match: re.Match, context: _Context) -> str:
    sent = match["value"]
    found = context.at()
    allowed = _choice_of(found)
    if allowed is None:
        return f"{sent} is not an accepted value here"
    message = f"{sent} is not one of: {_listing(allowed)}"
    if any(a.kind == "null" for a in found):
        message += ", or null"
    text = sent[1:-1] if len(sent) >= 2 and sent[0] == sent[-1] and sent[0] in "'\"" else sent
    close = [v for v in allowed if isinstance(v, str) and v.lower() == text.lower()]
    if len(close) == 1:
        message += f" (values are case-sensitive: did you mean '{close[0]}'?)"
    return message


def _expected_got(match: re.Match, context: _Context) -> str:
    found = context.at()
    got = match["got"]
    if found:
        wanted = expected(found, context.codec_name)
    else:
        wanted = _type_words(match["spec"], context.codec_name)
    message = f"expected {wanted}"
    looks_like_json = (context.body or b"").lstrip()[:1] in (b"{", b"[")
    if context.path == "$" and context.codec_name != "JSON" and looks_like_json:
        return message + "; the body looks like JSON (if it is, say so in Content-Type)"
    if got is not None:
        message += f"; got {_got(got)}"
        if got == "float" and all(a.kind == "integer" for a in found if a.kind != "null") and found:
            if context.codec_name == "JSON":
                message = (f"expected {wanted}, written without a decimal point; "
                           "got a number with a decimal point")
            else:
                message = f"expected {wanted} (a MessagePack integer); got a floating-point number"
    return message


def _base64(match: re.Match, context: _Context) -> str:
    found = context.at()
    if any(a.float64_bytes for a in found):
        other = [a for a in found if a.kind == "array"]
        usual = ""
        if other:
            usual = f"; the usual form is {phrase(other[0], context.codec_name)}, e.g. [1.5, 2, 3]"
        return ("a string here must be base64 of little-endian float64 bytes (8 bytes per value), and this "
                "one "
                "is not valid base64" + usual)
    return "a string here must be valid base64 (standard alphabet, padded with =), and this one is not"


def _number_bound(match: re.Match, context: _Context) -> str:
    kind = "a whole number" if match["type"] == "int" else "a number"
    found = [a for a in context.at() if a.kind in ("number", "integer")]
    if found and found[0].bounds:
        words, finite = _range(found[0].bounds)
        if finite and not words:
            message = f"must be a finite {kind[2:]} (NaN and Infinity are not accepted)"
            if any(a.kind == "null" for a in context.at()):
                message += "; null marks a missing value"
            return message
        kind = f"a finite {kind[2:]}," if finite else kind
        return f"must be {kind} {words}"
    operator, bound = match["operator"], float(match["bound"])
    words = {">=": "at least", "<=": "at most", ">": "above", "<": "below"}[operator]
    return f"must be {kind} {words} {_number(bound)}"


def _length_bound(match: re.Match, context: _Context) -> str:
    units = {"array": "entry", "bytes": "byte", "str": "character", "object": "field"}
    unit = units.get(match["type"], "entry")
    found = [a for a in context.at() if a.kind == {"array": "array", "bytes": "bytes", "str": "string",
                                                     "object": "object"}.get(match["type"])]
    bounds = found[0].bounds if found else {}
    if not ({"min_length", "max_length"} & bounds.keys()):
        operator, count = match["operator"], int(match["count"])
        bounds = {"min_length": count} if operator == ">=" else {"max_length": count}
    message = f"must hold {_entries(bounds, unit)}"
    if match["type"] == "bytes" and found and found[0].float64_bytes:
        message += " (8 bytes per float64 value)"
        if context.codec_name == "JSON":
            message = "the base64 string must decode to " + message.removeprefix("must hold ")
    return message


def _unknown_field(match: re.Match, context: _Context) -> str:
    name = match["field"]
    parent = context.path.rsplit(".", 1)[0] if context.path.endswith("." + name) else context.path
    accepted = fields_at(context.root, parent, context.body, context.codec_name) if context.root else []
    message = f"unknown field '{name}'"
    close = difflib.get_close_matches(name, accepted, n=1, cutoff=0.75)
    if close:
        message += f" (did you mean '{close[0]}'?)"
    if accepted:
        message += f"; the fields accepted here are: {_listing(accepted)}"
    return message


def _missing_field(match: re.Match, context: _Context) -> str:
    name = match["field"]
    message = f"required field '{name}' is missing"
    found = context.at()
    if found:
        message += f"; it takes {expected(found, context.codec_name)}"
    return message


def _malformed(match: re.Match, context: _Context) -> str:
    reason, byte = match["reason"], match["byte"]
    offset = int(byte)
    body = context.body or b""
    hint = ""
    if context.codec_name == "JSON":
        start = offset - 1 if offset and body[offset - 1 : offset] == b"-" else offset
        if reason == "invalid character" and re.match(rb"-?(?:NaN|Infinity)", body[start : start + 10]):
            reason = "NaN and Infinity are not JSON numbers; send finite numbers"
        else:
            reason = _JSON_REASONS.get(reason, reason)
            if offset == 0 and body[:1] >= b"\x80":
                hint = "; the body does not begin like JSON (if it is MessagePack, say so in Content-Type)"
    else:
        opcode = re.match(r"invalid opcode '\\x(?P<hex>[0-9a-f]{2})'", reason)
        if opcode:
            reason = f"0x{opcode['hex']} begins no MessagePack value"
        else:
            reason = _MSGPACK_REASONS.get(reason, reason)
    return f"{reason} (byte {offset}){hint}"


_JSON_REASONS = {
    "trailing characters": "unexpected characters after the complete JSON value",
    "object keys must be strings": "object keys must be strings in double quotes",
    "invalid character": "a character that cannot appear here",
    "invalid number": "a malformed number",
    "trailing comma in array": "a comma after the last item of an array",
    "trailing comma in object": "a comma after the last field of an object",
    "invalid escape character in string": "a backslash escape that JSON does not define",
    "invalid escaped character": "a backslash escape that JSON does not define",
}
_MSGPACK_REASONS = {
    "trailing characters": "unexpected bytes after the complete MessagePack value",
    "map keys must be hashable": "a map key must be a string",
}


def _truncated(match: re.Match, context: _Context) -> str:
    if not context.body:
        return f"the body is empty; send one {context.codec_name} object"
    if context.codec_name == "JSON":
        return "the body ends before its value is complete (cut off, or a bracket, brace or quote left open)"
    return "the body ends before its value is complete (cut off, or a length that runs past its end)"


def _number_range(match: re.Match, context: _Context) -> str:
    return "the number is beyond the range of a float64 (about -1.8e308 to 1.8e308)"


_TABLE: list[tuple[re.Pattern, Any]] = [
    (re.compile(r"^Invalid (?:enum )?value (?P<value>'.*'|\".*\"|-?\d+)$", re.DOTALL), _enum_value),
    (re.compile(r"^Expected `(?P<spec>[^`]+)`(?:, got `(?P<got>[^`]+)`)?$"), _expected_got),
    (re.compile(r"^Invalid base64 encoded string$"), _base64),
    (re.compile(r"^Expected `(?P<type>int|float)` (?P<operator>[<>]=?) (?P<bound>\S+)$"), _number_bound),
    (re.compile(r"^Expected `(?P<type>\w+)` of length (?P<operator>[<>]=) (?P<count>\d+)$"), _length_bound),
    (re.compile(r"^Object contains unknown field `(?P<field>[^`]*)`$", re.DOTALL), _unknown_field),
    (re.compile(r"^Object missing required field `(?P<field>[^`]*)`$", re.DOTALL), _missing_field),
    (re.compile(r"^(?:JSON|MessagePack) (?:data )?is malformed: (?P<reason>.*) \(byte (?P<byte>\d+)\)$"),
     _malformed),
    (re.compile(r"^Input data was truncated$"), _truncated),
    (re.compile(r"^(?:Number|Integer value) out of range$"), _number_range),
    (re.compile(r"^Invalid UTF-8 encoded string$"), lambda m, c: "a string is not valid UTF-8"),
]
_BACKTICKED = re.compile(r"`([^`]*)`")


def _fallback(text: str, codec_name: str) -> str:
    """A text the table does not know: its type syntax spelled out, and no backtick left."""
    spelled = _BACKTICKED.sub(lambda m: _type_words(m[1], codec_name), text)
    spelled = spelled.replace("`", "'")
    return spelled[:1].lower() + spelled[1:] if spelled[:2] != spelled[:2].upper() else spelled


def plain(text: str, path: str, root: type | None = None, body: bytes | None = None,
          codec_name: str = "JSON") -> str:
    """msgspec's ``text`` about the value at ``path`` (of a body decoded as ``root``) in plain words."""
    context = _Context(root, path, body, codec_name)
    for pattern, word in _TABLE:
        match = pattern.match(text)
        if match:
            return word(match, context)
    return _fallback(text, codec_name)


__all__ = ["Alternative", "Choice", "alternatives", "expected", "fields_at", "phrase", "plain", "type_at"]
