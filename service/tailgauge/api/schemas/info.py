"""Bodies of the informational endpoints: health, readiness and the catalog."""

from __future__ import annotations

from typing import Annotated, Literal

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import Message


class Health(Message):
    status: Literal["ok", "draining"]


class Readiness(Health):
    notes: Annotated[
        list[str],
        Meta(description="What works less well in this worker while it still serves (e.g. metrics not exported)."),
    ] = msgspec.field(default_factory=list)


class CatalogEntry(Message):
    name: Annotated[str, Meta(description="Response name (member.name for non-descriptor results).")]
    member: Annotated[str, Meta(description="Where it appears in a descriptor response.")]
    definition: Annotated[str, Meta(description="The formula in plain text.")]
    conventions: Annotated[list[str], Meta(description="Options that change it.")]
    undefined_when: Annotated[list[str], Meta(description="What makes it null (with a warning).")]
    reference: Annotated[str, Meta(description="Published source of the definition.")]


class WarningCode(Message):
    code: str
    meaning: str


class Catalog(Message):
    descriptors: list[CatalogEntry]
    members: list[CatalogEntry]
    warnings: list[WarningCode]
    note: str


__all__ = ["Catalog", "CatalogEntry", "Health", "Readiness", "WarningCode"]
