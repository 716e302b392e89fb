"""What every result of the service means, as GET /v1/catalog serves it: a view of the registry.

The entries (response name, member, definition, conventions, when undefined, reference) and the
warning meanings are written once, in :mod:`tailgauge.core.registry`; this module only lays
them out in the served shape.
"""

from __future__ import annotations

from tailgauge.core import registry

Entry = registry.CatalogEntry

DESCRIPTORS: tuple[Entry, ...] = registry.catalog_descriptors()
MEMBERS: tuple[Entry, ...] = registry.MEMBERS
WARNINGS: dict[str, str] = registry.catalog_warnings()
