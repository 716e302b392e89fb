"""Around every HTTP request: the request id, the metrics, and one structured log line.

Runs outside litestar's routing, so unmatched paths (404) and early errors are counted and
logged too. Routes are labelled by their template (``/v1/descriptors/samples``), never by the
raw path, so a scan of random URLs cannot grow the metrics without bound.
"""

from __future__ import annotations

import logging
import re
import time
import uuid
from collections.abc import Awaitable, Callable

from service.api import metrics

logger = logging.getLogger("service.requests")

REQUEST_ID_HEADER = "x-request-id"
# A caller's id is kept when it is short and plain; anything else is replaced (and never logged).
_ACCEPTABLE_ID = re.compile(r"[A-Za-z0-9._:\-]{1,128}")
UNMATCHED_ROUTE = "unmatched"


def request_id_of(headers: list[tuple[bytes, bytes]]) -> str:
    for name, value in headers:
        if name.lower() == b"x-request-id":
            text = value.decode("latin-1")
            if _ACCEPTABLE_ID.fullmatch(text):
                return text
            break
    return uuid.uuid4().hex


async def observe(scope, receive, send, app: Callable[..., Awaitable[None]], *, log: bool) -> None:
    started = time.perf_counter()
    request_id = request_id_of(scope.get("headers", []))
    state = scope.setdefault("state", {})
    state["request_id"] = request_id
    status = 500
    header = (REQUEST_ID_HEADER.encode(), request_id.encode())

    async def send_with_id(message) -> None:
        nonlocal status
        if message["type"] == "http.response.start":
            status = message["status"]
            message = {**message, "headers": [*message.get("headers", []), header]}
        await send(message)

    try:
        await app(scope, receive, send_with_id)
    finally:
        elapsed = time.perf_counter() - started
        route = scope.get("path_template") or UNMATCHED_ROUTE
        labels = {"route": route, "method": scope.get("method", ""), "status": str(status)}
        metrics.REQUESTS.labels(**labels).inc()
        metrics.LATENCY.labels(**labels).observe(elapsed)
        if log:
            logger.info(
                "request",
                extra={
                    "request_id": request_id,
                    "method": labels["method"],
                    "route": route,
                    "status": status,
                    "duration_ms": round(elapsed * 1000.0, 3),
                    **{key: state[key] for key in ("values", "resamples") if key in state},
                },
            )


__all__ = ["REQUEST_ID_HEADER", "observe", "request_id_of"]
