"""The HTTP layer: wire messages, routes, problem mapping and the app factory."""

from tailgauge.api.app import create_app

__all__ = ["create_app"]
