"""HTTP handlers: negotiate media types, hand the bytes to a worker thread, return the bytes.

A compute request whose Accept header chooses one of its operation's figure media types is
handed the chosen type (``figure=``) and answered with the figure's bytes, always from a thread.

Each handler is built from its entry in the endpoint table (``tailgauge.api.operations``): the
path, method and name come from there; this module gives only the bodies, keyed by operation id.
"""

from __future__ import annotations

import inspect
from functools import partial

import anyio.to_thread
import msgspec
from litestar import Request, Response, get, post
from litestar.handlers import HTTPRouteHandler

from tailgauge.api import compression, endpoints, group_endpoints, media, metrics, schemas
from tailgauge.api.media import MediaTypeError
from tailgauge.api.operations import OPERATION_IDS, OPERATIONS, Operation
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.core import catalog
from tailgauge.runtime import metric_files
from tailgauge.runtime.lifecycle import draining

_STATUS_SLUG = {415: "unsupported-media-type", 406: "not-acceptable"}


def _problem(error: MediaTypeError) -> ApiProblem:
    return ApiProblem(
        _STATUS_SLUG[error.status],
        error.detail,
        [ProblemLocation(path=error.header, message=error.message)],
        headers=error.headers,
    )


def _answer(request: Request, figures: tuple[str, ...] = ()) -> tuple[media.Codec, str]:
    try:
        return media.answer_codec(request, figures)
    except MediaTypeError as error:
        raise _problem(error) from None


def _encoded(work, gzip_body: bool, gzip_answer: bool):
    """``work`` with the body inflated first (a gzip request) and the answer compressed after (when accepted).

    Both run where ``work`` runs (a worker thread for anything but a small plain body), so neither
    inflating a body nor compressing an answer holds the event loop.
    """

    def run(body, body_codec, answer_codec, settings):
        if gzip_body:
            body = compression.inflate(body, settings.max_body_bytes)
        result = work(body, body_codec, answer_codec, settings)
        encoded, headers = compression.answer(result.body, gzip_answer)
        return result, encoded, headers

    return run


async def _compute(request: Request, work, endpoint: str, figures: tuple[str, ...]) -> Response[bytes]:
    try:
        coding = media.content_coding(request)
        body_codec = media.body_codec(request)
    except MediaTypeError as error:
        raise _problem(error) from None
    answer_codec, answer_type = _answer(request, figures)
    figure = answer_type if answer_type in figures else None
    body = await request.body()
    settings = request.app.state.settings
    gzip_body = coding == "gzip"
    # A PNG is compressed already; an SVG is text and shrinks as JSON does.
    gzip_answer = answer_type != "image/png" and compression.accepts_gzip(request.headers.getall("accept-encoding", []))
    run = _encoded(partial(work, figure=figure), gzip_body, gzip_answer)
    if figure is None and not gzip_body and endpoints.runs_inline(body):
        result, encoded, headers = run(body, body_codec, answer_codec, settings)  # cheaper than the hop to a thread
    else:
        # CPU-bound work (decoding, drawing and encoding included) runs off the event loop, so health
        # stays live; a figure is always drawn in a thread, and a gzip body always inflated in one (a
        # few bytes may inflate to the whole body limit).
        result, encoded, headers = await anyio.to_thread.run_sync(partial(run, body, body_codec, answer_codec, settings))
    request.state.values = result.values
    metrics.VALUES.labels(endpoint).observe(result.values)
    if result.resamples:
        request.state.resamples = result.resamples
        metrics.RESAMPLES.labels(endpoint).inc(result.resamples)
    return Response(encoded, media_type=answer_type, headers=headers)


def _computing(work, label: str, operation_id: str):
    """The body of a compute operation: ``work`` (in ``endpoints``) in a thread; metrics under ``label``;
    the figure media types its table entry declares."""
    figures = OPERATION_IDS[operation_id].figures

    async def compute(request: Request) -> Response[bytes]:
        return await _compute(request, work, label, figures)

    return compute


def live() -> Response[bytes]:
    return Response(b'{"status":"ok"}', media_type=media.JSON)


def ready() -> Response[bytes]:
    # A note says what works less well in this worker without making it unready (it still serves).
    notes = [note for note in (metric_files.degradation(),) if note]
    if draining.is_set():
        body = schemas.Readiness(status="draining", notes=notes)
        return Response(msgspec.json.encode(body), status_code=503, media_type=media.JSON)
    return Response(msgspec.json.encode(schemas.Readiness(status="ok", notes=notes)), media_type=media.JSON)


def _accepts_gzip(request: Request) -> bool:
    return compression.accepts_gzip(request.headers.getall("accept-encoding", []))


def metrics_exposition(request: Request) -> Response[bytes]:
    # A scraper asks for gzip (Prometheus does); the text is tens of kilobytes, level 1 takes
    # tens of microseconds, so it is compressed here on the event loop.
    body, headers = compression.answer(metrics.exposition(), _accepts_gzip(request))
    # litestar appends "; charset=utf-8" to a text/ media type: the type is given without one.
    return Response(body, media_type=metrics.MEDIA_TYPE, headers=headers)


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


_CATALOG_MSGPACK = compression.Prepared(msgspec.msgpack.encode(msgspec.json.decode(_CATALOG)))
_CATALOG = compression.Prepared(_CATALOG)


def describe_catalog(request: Request) -> Response[bytes]:
    codec, answer_type = _answer(request)
    body, headers = (_CATALOG if codec is media.JSON_CODEC else _CATALOG_MSGPACK).answer(_accepts_gzip(request))
    return Response(body, media_type=answer_type, headers=headers)


# Operation id -> its body. Compute bodies run in a worker thread themselves; the others are
# cheap and run on the event loop. Metric labels of the compute endpoints are API (dashboards).
BODIES = {
    "describeSamples": _computing(endpoints.describe_samples, "samples", "describeSamples"),
    "describeGroups": _computing(group_endpoints.describe_groups_request, "groups", "describeGroups"),
    "describeTable": _computing(endpoints.describe_table, "table", "describeTable"),
    "describeBins": _computing(endpoints.describe_bins, "bins", "describeBins"),
    "describeHistogram": _computing(endpoints.describe_histogram, "histogram", "describeHistogram"),
    "mergeStates": _computing(endpoints.merge_states_request, "merge", "mergeStates"),
    "compare": _computing(endpoints.compare_inputs, "comparisons", "compare"),
    "catalog": describe_catalog,
    "metrics": metrics_exposition,
    "live": live,
    "ready": ready,
}


def route(operation: Operation, body) -> HTTPRouteHandler:
    """The litestar handler of ``operation`` running ``body`` (documented by ``openapi``, not litestar)."""
    decorator = {"get": get, "post": post}[operation.method]
    options = {"include_in_schema": False, "name": operation.operation_id}
    if operation.method == "post":
        options["status_code"] = 200  # litestar's default for POST is 201
    if not inspect.iscoroutinefunction(body):
        options["sync_to_thread"] = False
    return decorator(operation.path, **options)(body)


def handlers() -> list[HTTPRouteHandler]:
    """One handler per operation of the table; a body without an operation, or the reverse, is an error."""
    declared = {op.operation_id for op in OPERATIONS}
    if declared != set(BODIES):
        raise RuntimeError(
            f"the endpoint table and the handler bodies disagree: operations without a body "
            f"{sorted(declared - set(BODIES))}, bodies without an operation {sorted(set(BODIES) - declared)}"
        )
    return [route(op, BODIES[op.operation_id]) for op in OPERATIONS]


__all__ = ["BODIES", "handlers", "route"]
