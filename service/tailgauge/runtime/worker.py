"""The gunicorn worker class: uvicorn's, plus readiness that turns false while draining.

gunicorn's master sends SIGTERM (or SIGQUIT/SIGINT) to a worker it wants gone; uvicorn then
stops accepting connections and finishes the requests in flight. This subclass marks the
process as draining at that moment, so ``/health/ready`` answers 503 to any probe that still
reaches it.
"""

from __future__ import annotations

import sys

from gunicorn.arbiter import Arbiter
from uvicorn.server import Server
from uvicorn_worker import UvicornWorker

from tailgauge.runtime import memory
from tailgauge.runtime.lifecycle import draining


class DrainingServer(Server):
    def handle_exit(self, sig, frame) -> None:
        draining.set()
        super().handle_exit(sig, frame)


class Worker(UvicornWorker):
    """``uvicorn_worker.UvicornWorker`` serving through :class:`DrainingServer`."""

    def handle_exit(self, sig, frame) -> None:  # SIGQUIT path installed by UvicornWorker
        draining.set()
        super().handle_exit(sig, frame)

    async def _serve(self) -> None:
        # The same steps as UvicornWorker._serve (uvicorn-worker 0.4.0), with the draining server.
        self.config.app = self.wsgi
        memory.freeze_startup_objects()
        server = DrainingServer(config=self.config)
        self._install_sigquit_handler()
        await server.serve(sockets=self.sockets)
        if not server.started:
            sys.exit(Arbiter.WORKER_BOOT_ERROR)


__all__ = ["DrainingServer", "Worker"]
