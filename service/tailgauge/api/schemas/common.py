"""What every wire message shares: the strict base Struct and the constrained number types.

Constraints are named aliases defined once here and reused by every message.
"""

from __future__ import annotations

from typing import Annotated

import msgspec
from msgspec import Meta

# Hard ceilings of the published schema, defined beside the settings that may only lower them.
from tailgauge.settings import (
    SCHEMA_MAX_MOMENT_ORDER,
    SCHEMA_MAX_PROBABILITIES,
    SCHEMA_MAX_SCORES,
    SCHEMA_MAX_STATES,
)

MAX_SEED = 2**53 - 1

Probability = Annotated[float, Meta(ge=0.0, le=1.0, description="A probability in [0, 1].")]
# Every number a caller sends must be finite: JSON cannot carry NaN or Infinity, and the bounds
# below make MessagePack's native NaN and Infinity errors too (named by their path).
LARGEST = 1.7976931348623157e308
Finite = Annotated[float, Meta(ge=-LARGEST, le=LARGEST, description="A finite number.")]
NonNegative = Annotated[float, Meta(ge=0.0, le=LARGEST, description="A finite number >= 0.")]
Observation = Annotated[
    Finite | None,
    Meta(description="One observation; null marks a missing value (see options.missing)."),
]
Float64Bytes = Annotated[
    bytes,
    Meta(
        min_length=8,
        description=(
            "Fast path for large arrays: IEEE 754 float64 values, little-endian, packed end to end "
            "(8 bytes each) - a MessagePack bin, or a base64 string in JSON."
        ),
    ),
]
MaybeNumber = Annotated[
    float | None, Meta(description="A number, or null when undefined (a warning says why).")
]


class Message(msgspec.Struct, forbid_unknown_fields=True, kw_only=True):
    """Base of every request message: unknown fields are errors, never silently ignored."""


class Answer(msgspec.Struct, kw_only=True):
    """Base of every response message: open to members added later.

    A client reading an answer must ignore a member it does not know (the API-change rules add
    members, never rename them), so the published response schemas do not forbid them; only
    requests are strict.
    """


__all__ = [
    "LARGEST",
    "Answer",
    "MAX_SEED",
    "SCHEMA_MAX_MOMENT_ORDER",
    "SCHEMA_MAX_PROBABILITIES",
    "SCHEMA_MAX_SCORES",
    "SCHEMA_MAX_STATES",
    "Finite",
    "Float64Bytes",
    "MaybeNumber",
    "Message",
    "NonNegative",
    "Observation",
    "Probability",
]
