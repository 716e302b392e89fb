"""schemathesis hooks: MessagePack request bodies and responses, for in-process and CLI runs.

The OpenAPI document offers every request body as application/json and application/msgpack, and
answers (and problems) in either format. Without these hooks schemathesis would skip the
MessagePack variants. Load for the CLI with ``SCHEMATHESIS_HOOKS=tests.fuzz.hooks``.
"""

import math

import msgspec
import schemathesis

MSGPACK_TYPES = ("application/msgpack", "application/x-msgpack", "application/vnd.msgpack")


def _representable(value):
    """MessagePack integers stop at 64 bits; a larger generated integer travels as a float."""
    if isinstance(value, bool):
        return value
    if isinstance(value, int) and not -(2**63) <= value < 2**64:
        try:
            return float(value)
        except OverflowError:  # beyond float64 as well: sent as an infinity, which must be a 400
            return math.inf if value > 0 else -math.inf
    if isinstance(value, dict):
        return {key: _representable(item) for key, item in value.items()}
    if isinstance(value, list):
        return [_representable(item) for item in value]
    return value


@schemathesis.serializer(*MSGPACK_TYPES)
def to_msgpack(ctx, value):
    # A generated body is any JSON-like value (negative tests send wrong types on purpose).
    return {"data": msgspec.msgpack.encode(_representable(value))}


@schemathesis.deserializer(*MSGPACK_TYPES, "application/problem+msgpack")
def from_msgpack(ctx, response):
    return msgspec.msgpack.decode(response.content)
