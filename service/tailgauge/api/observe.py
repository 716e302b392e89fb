"""Around every HTTP request: the request id, the metrics, one structured log line, and its span.

Runs outside litestar's routing, so unmatched paths (404) and early errors are counted and
logged too. Routes are labelled by their template (``/v1/descriptors/samples``), never by the
raw path, so a scan of random URLs cannot grow the metrics without bound. A client that hangs up
before its answer is complete is counted and logged with status 499. With tracing on
(``tailgauge.api.tracing``) the request runs inside its server span, whose trace id the log line
carries and whose ``traceparent`` the answer carries.
"""

from __future__ import annotations

import logging
import re
import time
import uuid
from collections.abc import Awaitable, Callable

from tailgauge.api import metrics
from tailgauge.api.tracing import Tracing

logger = logging.getLogger("tailgauge.requests")

REQUEST_ID_HEADER = "x-request-id"
# A caller's id is kept when it is short and plain; anything else is replaced (and never logged).
_ACCEPTABLE_ID = re.compile(r"[A-Za-z0-9._:\-]{1,128}")
UNMATCHED_ROUTE = "unmatched"
# The status counted and logged for a request whose client hung up before the answer was complete.
CLIENT_DISCONNECTED = 499
# Methods counted by name; any other token a client sends is counted as "other", so requests with
# invented methods cannot grow the metrics without bound either.
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS", "CONNECT", "TRACE"})
OTHER_METHOD = "other"


def request_id_of(headers: list[tuple[bytes, bytes]]) -> str:
    for name, value in headers:
        if name.lower() == b"x-request-id":
            text = value.decode("latin-1")
            if _ACCEPTABLE_ID.fullmatch(text):
                return text
            break
    return uuid.uuid4().hex


async def observe(
    scope, receive, send, app: Callable[..., Awaitable[None]], *, log: bool, tracing: Tracing | None = None
) -> None:
    started = time.perf_counter()
    request_id = request_id_of(scope.get("headers", []))
    state = scope.setdefault("state", {})
    state["request_id"] = request_id
    # Read before the app runs: a HEAD is routed as a GET, but is counted and logged as a HEAD.
    method = scope.get("method", "")
    counted_method = method if method in _METHODS else OTHER_METHOD
    status = 500
    answered = False  # the last body message of the response has been sent
    disconnected = False  # the client hung up before that
    span = None if tracing is None else tracing.begin(scope, counted_method, request_id)
    added = [(REQUEST_ID_HEADER.encode(), request_id.encode()), *(span.headers if span is not None else ())]

    async def receive_watching() -> dict:
        nonlocal disconnected
        message = await receive()
        if message["type"] == "http.disconnect" and not answered:
            disconnected = True
        return message

    async def send_with_id(message) -> None:
        nonlocal status, answered
        if message["type"] == "http.response.start":
            status = message["status"]
            message = {**message, "headers": [*message.get("headers", []), *added]}
        elif message["type"] == "http.response.body" and not message.get("more_body", False):
            answered = True
        await send(message)

    try:
        await app(scope, receive_watching, send_with_id)
    finally:
        elapsed = time.perf_counter() - started
        route = scope.get("path_template") or UNMATCHED_ROUTE
        # A client that hung up before its answer was complete did not get what status says
        # (litestar's 500 for the broken body, usually): 499, as nginx counts such requests.
        shown = CLIENT_DISCONNECTED if disconnected else status
        labels = {"route": route, "method": counted_method, "status": str(shown)}
        metrics.REQUESTS.labels(**labels).inc()
        metrics.LATENCY.labels(**labels).observe(elapsed)
        try:
            if log:
                logger.info(
                    "request",
                    extra={
                        "request_id": request_id,
                        "method": counted_method,
                        "route": route,
                        "status": shown,
                        "duration_ms": round(elapsed * 1000.0, 3),
                        **{key: state[key] for key in ("values", "resamples") if key in state},
                    },
                )
        finally:
            if span is not None:
                span.end(counted_method, route, shown, state)


__all__ = ["CLIENT_DISCONNECTED", "REQUEST_ID_HEADER", "observe", "request_id_of"]
