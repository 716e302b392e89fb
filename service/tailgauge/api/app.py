"""The application factory: the only place where settings, routes and error mapping meet."""

from __future__ import annotations

import hmac

from litestar import Litestar, Request, Response, get
from litestar.config.cors import CORSConfig
from litestar.connection import ASGIConnection
from litestar.datastructures import State
from litestar.exceptions import HTTPException
from litestar.handlers.base import BaseRouteHandler

from tailgauge.runtime import logs
from tailgauge.api import compression, openapi, problems, routes, tracing
from tailgauge.api.docs import asset, schema_page
from tailgauge.api.observe import REQUEST_ID_HEADER, observe
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.core.errors import DescriptorError
from tailgauge.settings import Settings

# Paths that never ask for a token: probes must work without secrets, and the schema page
# and document describe the API without exposing any data.
_OPEN_PREFIXES = ("/health/", "/docs", "/openapi.json")


def token_matches(presented: str, tokens: tuple[str, ...]) -> bool:
    """Whether ``presented`` equals one of ``tokens``, compared in constant time.

    Every token is compared (no early exit), so the time taken does not say which one, or how
    much of one, matched.
    """
    given = presented.encode()
    found = False
    for token in tokens:
        found |= hmac.compare_digest(given, token.encode())
    return found


async def _require_token(connection: ASGIConnection, _: BaseRouteHandler) -> None:
    # A coroutine, so litestar awaits it on the event loop: a plain function guard is run in its
    # thread pool, a hop to another thread and back on every request for a few comparisons.
    settings: Settings = connection.app.state.settings
    if connection.scope.get("method") == "OPTIONS":
        return
    path = connection.url.path
    if path.startswith(_OPEN_PREFIXES) or (path == "/metrics" and not settings.metrics_require_token):
        return
    # Two Authorization headers (or two credentials in one, as a proxy may join them with a comma;
    # no token contains one) are refused whether or not tokens are configured: which one counts
    # would be a guess, and the answer must not depend on configuration.
    credentials = [part for value in connection.headers.getall("authorization", []) for part in value.split(",")]
    if len(credentials) > 1:
        raise ApiProblem(
            "invalid-header",
            f"send one Authorization header with one credential (got {len(credentials)})",
            [ProblemLocation(path="header.authorization", message="must appear at most once")],
        )
    if not settings.api_tokens:
        return
    scheme, _, presented = (credentials[0] if credentials else "").partition(" ")
    if scheme.lower() == "bearer" and presented and token_matches(presented.strip(), settings.api_tokens):
        return
    challenge = 'Bearer realm="tailgauge"'
    detail = "send a bearer token: Authorization: Bearer <token>"
    if presented:
        challenge += ', error="invalid_token"'
        detail = "the bearer token is not valid for this server"
    raise ApiProblem(
        "unauthorized",
        detail,
        [ProblemLocation(path="header.authorization", message="a valid bearer token is required")],
        headers={"WWW-Authenticate": challenge},
    )


def _without_body(send):
    """``send`` for a HEAD request: the GET answer's status and headers (Content-Length included), no body."""

    async def send_head(message) -> None:
        if message["type"] in ("http.response.body", "http.response.pathsend"):
            more = message.get("more_body", False) if message["type"] == "http.response.body" else False
            message = {"type": "http.response.body", "body": b"", "more_body": more}
        await send(message)

    return send_head


class _ObservedLitestar(Litestar):
    """Litestar with request ids, metrics, the request log and its span wrapped around every request.

    HEAD is answered here for every GET route, as RFC 9110 (section 9.3.2) asks: the request is
    routed as a GET and the body is dropped, so status and headers are the GET's. Every GET
    handler is free of side effects, so running it for a HEAD changes nothing.
    """

    # Set by create_app: None unless tracing is on (tailgauge.api.tracing).
    tracing: tracing.Tracing | None = None

    async def __call__(self, scope, receive, send) -> None:
        if scope["type"] != "http":
            await super().__call__(scope, receive, send)
            return
        await observe(scope, receive, send, self._route, log=self.state.settings.request_log, tracing=self.tracing)

    async def _route(self, scope, receive, send) -> None:
        if scope["method"] == "HEAD":
            scope["method"] = "GET"  # in place: litestar records the matched route on this scope
            send = _without_body(send)
        await super().__call__(scope, receive, send)


def create_app(settings: Settings | None = None) -> Litestar:
    """Build the ASGI app for ``settings`` (defaults when ``None``); nothing is read at import."""
    settings = settings or Settings()
    if settings.request_log:
        logs.configure()
    document = compression.Prepared(openapi.document_bytes(metrics_require_token=settings.metrics_require_token))

    @get("/openapi.json", include_in_schema=False, sync_to_thread=False)
    def openapi_document(request: Request) -> Response[bytes]:
        body, headers = document.answer(compression.accepts_gzip(request.headers.getall("accept-encoding", [])))
        return Response(body, media_type="application/json", headers=headers)

    cors = None
    if settings.cors_origins:
        cors = CORSConfig(
            allow_origins=list(settings.cors_origins),
            allow_methods=["GET", "POST"],
            allow_headers=["Accept", "Authorization", "Content-Encoding", "Content-Type",
                           REQUEST_ID_HEADER, tracing.TRACEPARENT, "tracestate"],
            expose_headers=[REQUEST_ID_HEADER, tracing.TRACEPARENT],
        )

    app = _ObservedLitestar(
        route_handlers=[
            *routes.handlers(),
            openapi_document,
            schema_page,
            asset,
        ],
        guards=[_require_token],
        exception_handlers={
            problems.ApiProblem: problems.handle_api_problem,
            DescriptorError: problems.handle_descriptor_error,
            HTTPException: problems.handle_http_exception,
            Exception: problems.handle_unexpected,
        },
        cors_config=cors,
        openapi_config=None,
        # Logging is ours (service/tailgauge/runtime/logs.py, and gunicorn's config); litestar's default would
        # reconfigure the root logger of the process.
        logging_config=None,
        request_max_body_size=settings.max_body_bytes,
        state=State({"settings": settings}),
        debug=False,
    )
    # None unless the otel extra is installed and OTEL_* variables ask for traces (api/tracing.py).
    app.tracing = tracing.from_environment()
    return app


__all__ = ["create_app", "token_matches"]
