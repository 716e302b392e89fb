"""Process lifecycle shared by the worker and the app: whether this worker is draining."""

from __future__ import annotations

import threading

# Set when the worker has been told to stop: readiness answers 503 from then on, while requests
# already accepted run to completion.
draining = threading.Event()

__all__ = ["draining"]
