"""Bodies of the informational endpoints: health, readiness and the catalog."""

from __future__ import annotations

from enum import StrEnum
from typing import Annotated

import msgspec
from msgspec import Meta

from tailgauge.api.schemas.common import Answer


class HealthStatus(StrEnum):
    """ok: serving; draining: stopping, send new work elsewhere."""

    OK = "ok"
    DRAINING = "draining"


class Health(Answer):
    status: HealthStatus


class Readiness(Health):
    notes: Annotated[
        list[str],
        Meta(description="What works less well in this worker while it still serves (e.g. metrics not exported)."),
    ] = msgspec.field(default_factory=list)


class CatalogEntry(Answer):
    name: Annotated[str, Meta(description="Response name (member.name for non-descriptor results).")]
    member: Annotated[str, Meta(description="Where it appears in a descriptor response.")]
    definition: Annotated[str, Meta(description="The formula in plain text.")]
    conventions: Annotated[list[str], Meta(description="Options that change it.")]
    undefined_when: Annotated[list[str], Meta(description="What makes it null (with a warning).")]
    reference: Annotated[str, Meta(description="Published source of the definition.")]


class WarningCode(Answer):
    code: str
    meaning: str


class Catalog(Answer):
    descriptors: list[CatalogEntry]
    members: list[CatalogEntry]
    warnings: list[WarningCode]
    note: str


__all__ = ["Catalog", "CatalogEntry", "Health", "HealthStatus", "Readiness", "WarningCode"]
