"""HTTP handlers: check media types, hand the bytes to a worker thread, return the bytes."""

from __future__ import annotations

from functools import partial

import anyio.to_thread
from litestar import Request, Response, get, post

import msgspec

from service.api import compute, schemas
from service.api.problems import ApiProblem
from service.api.schemas import ProblemLocation
from service.core import catalog

JSON = "application/json"


def _require_json_body(request: Request) -> None:
    media = request.headers.get("content-type", "").split(";")[0].strip().lower()
    if media != JSON:
        shown = media or "no Content-Type"
        raise ApiProblem(
            "unsupported-media-type",
            f"send the request body as {JSON} (got {shown})",
            [ProblemLocation(path="header.content-type", message=f"expected {JSON}")],
        )


def _require_json_accepted(request: Request) -> None:
    if "accept" in request.headers and request.accept.best_match([JSON]) is None:
        raise ApiProblem(
            "not-acceptable",
            f"this endpoint answers with {JSON}; the Accept header excludes it",
            [ProblemLocation(path="header.accept", message=f"accept {JSON}")],
        )


async def _compute(request: Request, work) -> Response[bytes]:
    _require_json_body(request)
    _require_json_accepted(request)
    body = await request.body()
    # CPU-bound work (decoding included) runs off the event loop, so health checks stay live.
    encoded = await anyio.to_thread.run_sync(partial(work, body, request.app.state.settings))
    return Response(encoded, media_type=JSON)


@post("/v1/descriptors/samples", status_code=200, include_in_schema=False)
async def describe_samples(request: Request) -> Response[bytes]:
    return await _compute(request, compute.describe_samples)


@post("/v1/descriptors/table", status_code=200, include_in_schema=False)
async def describe_table(request: Request) -> Response[bytes]:
    return await _compute(request, compute.describe_table)


@post("/v1/descriptors/bins", status_code=200, include_in_schema=False)
async def describe_bins(request: Request) -> Response[bytes]:
    return await _compute(request, compute.describe_bins)


@get("/health/live", include_in_schema=False, sync_to_thread=False)
def live() -> Response[bytes]:
    return Response(b'{"status":"ok"}', media_type=JSON)


@get("/health/ready", include_in_schema=False, sync_to_thread=False)
def ready() -> Response[bytes]:
    return Response(b'{"status":"ok"}', media_type=JSON)


_CATALOG = msgspec.json.encode(
    msgspec.convert(
        {
            "descriptors": [vars(entry) for entry in catalog.DESCRIPTORS],
            "members": [vars(entry) for entry in catalog.MEMBERS],
            "warnings": [{"code": code, "meaning": meaning} for code, meaning in catalog.WARNINGS.items()],
            "note": (
                "Descriptors summarise data; they do not certify a process. A p-value is evidence against "
                "normality, not a verdict."
            ),
        },
        schemas.Catalog,
    )
)


@get("/v1/catalog", include_in_schema=False, sync_to_thread=False)
def describe_catalog(request: Request) -> Response[bytes]:
    _require_json_accepted(request)
    return Response(_CATALOG, media_type=JSON)


COMPUTE_HANDLERS = [describe_samples, describe_table, describe_bins]
INFO_HANDLERS = [describe_catalog]
HEALTH_HANDLERS = [live, ready]
