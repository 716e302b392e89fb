"""The application factory: the only place where settings, routes and error mapping meet."""

from __future__ import annotations

from litestar import Litestar, Response, get
from litestar.datastructures import State
from litestar.exceptions import HTTPException

from service.api import openapi, problems, routes
from service.api.docs import assets_router, schema_page
from service.core.errors import DescriptorError
from service.settings import Settings


def create_app(settings: Settings | None = None) -> Litestar:
    """Build the ASGI app for ``settings`` (defaults when ``None``); nothing is read at import."""
    settings = settings or Settings()
    document = openapi.document_bytes()

    @get("/openapi.json", include_in_schema=False, sync_to_thread=False)
    def openapi_document() -> Response[bytes]:
        return Response(document, media_type="application/json")

    return Litestar(
        route_handlers=[
            *routes.COMPUTE_HANDLERS,
            *routes.INFO_HANDLERS,
            *routes.HEALTH_HANDLERS,
            openapi_document,
            schema_page,
            assets_router,
        ],
        exception_handlers={
            problems.ApiProblem: problems.handle_api_problem,
            DescriptorError: problems.handle_descriptor_error,
            HTTPException: problems.handle_http_exception,
            Exception: problems.handle_unexpected,
        },
        openapi_config=None,
        request_max_body_size=settings.max_body_bytes,
        state=State({"settings": settings}),
        debug=False,
    )


__all__ = ["create_app"]
