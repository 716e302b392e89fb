"""The HTTP layer: wire messages, routes, problem mapping and the app factory.

``create_app`` is imported on first use (PEP 562), not with the package: the wire types
(``tailgauge.api.schemas``), the operation table and the media-type names import without the
server's libraries, so the base install (and ``tailgauge.client``) can use them.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from tailgauge.api.app import create_app


def __getattr__(name: str) -> Any:
    if name == "create_app":
        from tailgauge.api.app import create_app

        return create_app
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = ["create_app"]
