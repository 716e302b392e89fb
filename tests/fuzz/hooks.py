"""schemathesis hooks: MessagePack request bodies and responses, for in-process and CLI runs.

The OpenAPI document offers every request body as application/json and application/msgpack, and
answers (and problems) in either format. Without these hooks schemathesis would skip the
MessagePack variants. Load for the CLI with ``SCHEMATHESIS_HOOKS=tests.fuzz.hooks``.

A serializer registered with ``schemathesis.serializer`` returns the body's bytes; schemathesis
wraps them itself. (Returning ``{"data": ...}`` instead sends that dict as a form,
``data=%84...``, so every MessagePack body was garbage: tests/fuzz/test_schema_fuzz.py now
checks that MessagePack bodies get 200 answers.)
"""

import base64
import binascii
import fnmatch
import json
import math

import msgspec
import schemathesis

MSGPACK_TYPES = ("application/msgpack", "application/x-msgpack", "application/vnd.msgpack")
# Float64Bytes and KllSketch have at least 8 bytes; every enum word of the schema is shorter
# as base64 or not base64 at all ("omit", "bins" decode to 3 bytes), so only those go as bin.
_MIN_BIN_BYTES = 8


def _as_bin(text: str) -> bytes | None:
    """The bytes of ``text`` when it is strict base64 of at least 8 bytes, else None."""
    if len(text) < 12 or len(text) % 4:
        return None
    try:
        raw = base64.b64decode(text, validate=True)
    except (binascii.Error, ValueError):
        return None
    return raw if len(raw) >= _MIN_BIN_BYTES else None


# The schema's bound on every number (schemas.common.LARGEST), as the document writes it.
_LARGEST_AS_WRITTEN = 17976931348623157 * 10**292


def _representable(value):
    """The generated JSON-like value as a MessagePack client would send it.

    The schema's byte arrays are base64 strings (the JSON form); MessagePack carries them as bin.
    MessagePack integers stop at 64 bits; a larger generated integer travels as a float.
    """
    if isinstance(value, bool):
        return value
    if isinstance(value, str):
        raw = _as_bin(value)
        return value if raw is None else raw
    if isinstance(value, int) and not -(2**63) <= value < 2**64:
        if abs(value) > _LARGEST_AS_WRITTEN:
            # Beyond the schema's bound as written (1.7976931348623157e+308, a little below float64's
            # largest value, which it stands for): sent as an infinity, which must be a 400. As a
            # float it would round to the largest value, and a body that broke the bound as a
            # validator reads the document would arrive as one the server must accept.
            return math.inf if value > 0 else -math.inf
        return float(value)
    if isinstance(value, dict):
        return {key: _representable(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_representable(item) for item in value]
    return value


@schemathesis.serializer(*MSGPACK_TYPES)
def to_msgpack(ctx, value) -> bytes:
    # A generated body is any JSON-like value (negative tests send wrong types on purpose).
    return msgspec.msgpack.encode(_representable(value))


@schemathesis.deserializer(*MSGPACK_TYPES, "application/problem+msgpack")
def from_msgpack(ctx, response):
    return msgspec.msgpack.decode(response.content)


# Known bugs found by the fuzz runs, by the signature that identifies each exactly. Each is
# pinned by a strict xfail in test_schema_fuzz.py; when one passes, remove it here and there.
# (file, function) of the service code where a numpy RuntimeWarning escaped: a 500 where
# warnings are errors (the test suite; the long run's server), a warning in production.
# None is open: every bug found so far is fixed and its case is a regression test in test_schema_fuzz.py.
KNOWN_WARNINGS: dict = {}
# Answer members (dotted paths, list indexes left out; * matches any prefix) that carried a NaN
# or infinity: MessagePack shows it, JSON writes null. True where the schema says number, so
# that a JSON null there is the same bug; False where null is allowed (a warning must say why).
KNOWN_ANSWERS: dict = {}  # all fixed; see the regression tests in test_schema_fuzz.py


def _paths(value, keep, path: str = "") -> list[str]:
    if isinstance(value, dict):
        return [p for key, item in value.items() for p in _paths(item, keep, f"{path}.{key}" if path else key)]
    if isinstance(value, list):
        return [p for item in value for p in _paths(item, keep, path)]
    return [path] if keep(value) else []


def non_finite_paths(value) -> list[str]:
    """Dotted paths (list indexes left out) of every NaN or infinity in a decoded answer."""
    return _paths(value, lambda v: isinstance(v, float) and not math.isfinite(v))


def _known_answer(path: str) -> tuple[str, bool] | None:
    return next((bug for pattern, bug in KNOWN_ANSWERS.items() if fnmatch.fnmatchcase(path, pattern)), None)


def known_answer_bug(answer, media_type: str) -> str | None:
    """The known bug a decoded 200 answer shows, when every sign of a bug in it is a known one."""
    if media_type in MSGPACK_TYPES:
        found = [_known_answer(p) for p in non_finite_paths(answer)]
        return None if not found or None in found else found[0][0]
    nulls = [bug for bug in map(_known_answer, _paths(answer, lambda v: v is None)) if bug and bug[1]]
    return nulls[0][0] if nulls else None


@schemathesis.check
def answer_is_finite(ctx, response, case):
    """A MessagePack answer holds no NaN or infinity (JSON cannot; msgspec would write null)."""
    media = (response.headers.get("content-type") or [""])[0].split(";")[0].strip()
    if media not in MSGPACK_TYPES + ("application/problem+msgpack",):
        return None
    bad = sorted(set(non_finite_paths(msgspec.msgpack.decode(response.content))))
    if bad:
        known = sorted({bug[0] for bug in map(_known_answer, bad) if bug})
        raise AssertionError(f"NaN or infinity at {', '.join(bad)}" + (f" (known bug {'; '.join(known)})" if known else ""))
    return None


PROBLEM_PREFIX = "urn:tailgauge:problem:"
# Statuses whose problem must say where: the body's field ($...) or the header (header.<name>).
_LOCATED_STATUSES = (400, 406, 413, 415, 422)


@schemathesis.check
def problem_names_the_field(ctx, response, case):
    """A 400/406/413/415/422 is an RFC 9457 problem of our type whose errors name a field or header."""
    if response.status_code not in _LOCATED_STATUSES:
        return None
    media = (response.headers.get("content-type") or [""])[0].split(";")[0].strip()
    if media == "application/problem+json":
        problem = json.loads(response.content)
    elif media == "application/problem+msgpack":
        problem = msgspec.msgpack.decode(response.content)
    else:
        raise AssertionError(f"a {response.status_code} answered as {media!r}, not a problem document")
    if not str(problem.get("type", "")).startswith(PROBLEM_PREFIX) or problem.get("status") != response.status_code:
        raise AssertionError(f"problem type/status {problem.get('type')!r}/{problem.get('status')!r}")
    errors = problem.get("errors") or []
    if not errors or not all(str(e.get("path", "")).startswith(("$", "header.")) for e in errors):
        raise AssertionError(f"the problem names no field: {problem!r}")
    return None

