"""HTTP handlers: negotiate media types, hand the bytes to a worker thread, return the bytes."""

from __future__ import annotations

from functools import partial

import anyio.to_thread
from litestar import Request, Response, get, post

import msgspec

from tailgauge.api import endpoints, media, metrics, schemas
from tailgauge.api.media import MediaTypeError
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.runtime import metric_files
from tailgauge.core import catalog
from tailgauge.runtime.lifecycle import draining

_STATUS_SLUG = {415: "unsupported-media-type", 406: "not-acceptable"}


def _problem(error: MediaTypeError) -> ApiProblem:
    return ApiProblem(
        _STATUS_SLUG[error.status],
        error.detail,
        [ProblemLocation(path=error.header, message=error.message)],
        headers=error.headers,
    )


def _answer(request: Request) -> tuple[media.Codec, str]:
    try:
        return media.answer_codec(request)
    except MediaTypeError as error:
        raise _problem(error) from None


async def _compute(request: Request, work, endpoint: str) -> Response[bytes]:
    try:
        media.check_content_encoding(request)
        body_codec = media.body_codec(request)
    except MediaTypeError as error:
        raise _problem(error) from None
    answer_codec, answer_type = _answer(request)
    body = await request.body()
    # CPU-bound work (decoding and encoding included) runs off the event loop, so health stays live.
    result = await anyio.to_thread.run_sync(
        partial(work, body, body_codec, answer_codec, request.app.state.settings)
    )
    request.state.values = result.values
    metrics.VALUES.labels(endpoint).observe(result.values)
    if result.resamples:
        request.state.resamples = result.resamples
        metrics.RESAMPLES.labels(endpoint).inc(result.resamples)
    return Response(result.body, media_type=answer_type)


@post("/v1/descriptors/samples", status_code=200, include_in_schema=False)
async def describe_samples(request: Request) -> Response[bytes]:
    return await _compute(request, endpoints.describe_samples, "samples")


@post("/v1/descriptors/table", status_code=200, include_in_schema=False)
async def describe_table(request: Request) -> Response[bytes]:
    return await _compute(request, endpoints.describe_table, "table")


@post("/v1/descriptors/bins", status_code=200, include_in_schema=False)
async def describe_bins(request: Request) -> Response[bytes]:
    return await _compute(request, endpoints.describe_bins, "bins")


@post("/v1/descriptors/merge", status_code=200, include_in_schema=False)
async def merge_states(request: Request) -> Response[bytes]:
    return await _compute(request, endpoints.merge_states_request, "merge")


@post("/v1/comparisons", status_code=200, include_in_schema=False)
async def compare_inputs(request: Request) -> Response[bytes]:
    return await _compute(request, endpoints.compare_inputs, "comparisons")


@get("/health/live", include_in_schema=False, sync_to_thread=False)
def live() -> Response[bytes]:
    return Response(b'{"status":"ok"}', media_type=media.JSON)


@get("/health/ready", include_in_schema=False, sync_to_thread=False)
def ready() -> Response[bytes]:
    # A note says what works less well in this worker without making it unready (it still serves).
    notes = [note for note in (metric_files.degradation(),) if note]
    if draining.is_set():
        body = schemas.Readiness(status="draining", notes=notes)
        return Response(msgspec.json.encode(body), status_code=503, media_type=media.JSON)
    return Response(msgspec.json.encode(schemas.Readiness(status="ok", notes=notes)), media_type=media.JSON)


@get("/metrics", include_in_schema=False, sync_to_thread=False)
def metrics_exposition() -> Response[bytes]:
    return Response(metrics.exposition(), media_type=metrics.CONTENT_TYPE)


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


_CATALOG_MSGPACK = msgspec.msgpack.encode(msgspec.json.decode(_CATALOG))


@get("/v1/catalog", include_in_schema=False, sync_to_thread=False)
def describe_catalog(request: Request) -> Response[bytes]:
    codec, answer_type = _answer(request)
    return Response(_CATALOG if codec is media.JSON_CODEC else _CATALOG_MSGPACK, media_type=answer_type)


COMPUTE_HANDLERS = [describe_samples, describe_table, describe_bins, merge_states, compare_inputs]
INFO_HANDLERS = [describe_catalog]
HEALTH_HANDLERS = [live, ready]
METRICS_HANDLERS = [metrics_exposition]
