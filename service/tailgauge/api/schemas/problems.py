"""RFC 9457 problem details as sent (the table from errors to problems is ``tailgauge.api.problems``)."""

from __future__ import annotations

from typing import Annotated

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import Answer


class ProblemLocation(Answer):
    path: Annotated[str, Meta(description="JSON path of the offending input, e.g. $.values[3].")]
    message: str


class Problem(Answer):
    """RFC 9457 problem details."""

    type: Annotated[str, Meta(description="Stable URI identifying the problem type.")]
    title: str
    status: int
    detail: str
    errors: list[ProblemLocation] = msgspec.field(default_factory=list)


__all__ = ["Problem", "ProblemLocation"]
