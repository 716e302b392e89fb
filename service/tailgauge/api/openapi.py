"""The OpenAPI 3.1 document, generated from the wire Structs by msgspec.

msgspec's JSON Schema keeps every constraint of the Structs (item bounds, enumerations,
``additionalProperties: false``), so the published schema is exactly what the decoder
enforces. Paths come from :data:`OPERATIONS`; a test checks it against the app's routes.
"""

from __future__ import annotations

from dataclasses import dataclass

import msgspec

import tailgauge
from tailgauge.api import schemas
from tailgauge.api.media import JSON, MSGPACK, PROBLEM_JSON, PROBLEM_MSGPACK
from tailgauge.api.problems import PROBLEM_TYPES

BODY_MEDIA_TYPES = (JSON, MSGPACK)


@dataclass(frozen=True)
class Operation:
    method: str
    path: str
    operation_id: str
    summary: str
    description: str
    request: type | None
    response: type | None  # None: a text/plain answer (the metrics exposition)
    problems: tuple[int, ...]
    tag: str
    # Whether the operation asks for a bearer token when the server is configured with tokens.
    protected: bool = True


# A valid body per compute operation (invented scenarios), shown by the schema page's "Try it
# out"; a test sends each one and expects a 200.
EXAMPLES = {
    "/v1/descriptors/samples": {
        "values": [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3, 250.3],
        "options": {"probabilities": [0.05, 0.5, 0.95]},
    },
    "/v1/descriptors/table": {
        "outcomes": [{"value": 0, "weight": 412}, {"value": 1, "weight": 187}, {"value": 2, "weight": 61},
                     {"value": 3, "weight": 17}, {"value": 4, "weight": 3}],
        "weight_kind": "counts",
    },
    "/v1/descriptors/bins": {"edges": [0, 15, 30, 45, 60, None], "counts": [18, 64, 41, 12, 5]},
    "/v1/descriptors/merge": {
        "states": [
            {"count": 4, "mean": 2.5, "central_sums": [5.0, 0.0, 10.25], "minimum": 1, "maximum": 4},
            {"count": 2, "mean": 15.0, "central_sums": [50.0, 0.0, 1250.0], "minimum": 10, "maximum": 20},
        ]
    },
    "/v1/comparisons": {
        "first": {"kind": "samples", "values": [34, 41, 38, 45, 52, 39, 36, 48, 61, 40, 37, 44]},
        "second": {"kind": "samples", "values": [31, 35, 33, 40, 58, 30, 34, 36, 29, 38, 33, 71]},
        "options": {"probabilities": [0.5, 0.9]},
    },
}


OPERATIONS = (
    Operation(
        method="post",
        path="/v1/descriptors/samples",
        operation_id="describeSamples",
        summary="Describe a raw sample, optionally weighted",
        description=(
            "Every descriptor of raw observations: location, spread, moments, shape in the "
            "Joanes & Gill families, quantiles by any Hyndman & Fan type, modes, the largest tail "
            "contributors and lag-1 autocorrelation. Optional frequency or reliability weights. "
            "Undefined results are null with a warning saying why."
        ),
        request=schemas.SamplesRequest,
        response=schemas.DescriptionResponse,
        problems=(400, 401, 406, 413, 415, 422, 503),
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/descriptors/table",
        operation_id="describeTable",
        summary="Describe a table of outcomes with counts or probabilities",
        description=(
            "Counts: sample descriptors exactly as if each value were repeated its count times, "
            "computed without expanding the table. Probabilities: the exact population descriptors "
            "of a discrete distribution (probabilities must sum to 1 within 1e-9)."
        ),
        request=schemas.TableRequest,
        response=schemas.DescriptionResponse,
        problems=(400, 401, 406, 413, 415, 422, 503),
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/descriptors/bins",
        operation_id="describeBins",
        summary="Describe binned counts (a histogram)",
        description=(
            "Moments from bin midpoints (null while an open-ended bin holds data), grouped median and "
            "quantiles by interpolation within bins, the modal class and interpolated grouped mode, "
            "and optional Sheppard's corrections for equal widths."
        ),
        request=schemas.BinsRequest,
        response=schemas.DescriptionResponse,
        problems=(400, 401, 406, 413, 415, 422, 503),
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/descriptors/merge",
        operation_id="mergeStates",
        summary="Describe the union of partial states computed where the data live",
        description=(
            "Exact moment descriptors of the union of many parts of one sample from their partial "
            "states (Pebay 2008 pairwise formulas, merged as a tree), minimum and maximum; with KLL "
            "sketches of the same parts, approximate quantiles with the sketches' rank error. The "
            "merged state is returned too, so merges can be merged again. States come from "
            "options.partial_state on /v1/descriptors/samples or from tailgauge.core.partial_state."
        ),
        request=schemas.MergeRequest,
        response=schemas.MergedDescriptionResponse,
        problems=(400, 401, 406, 413, 415, 422, 503),
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/comparisons",
        operation_id="compare",
        summary="Compare two inputs of any kind, second against first",
        description=(
            "Both descriptor sets, the difference (second minus first) of every descriptor, ratios of "
            "the scale descriptors, Hedges' g, quantile shifts, both inputs' quantiles on the z scale, "
            "and a two-sample test (Kolmogorov-Smirnov, or chi-square homogeneity for bins on the same "
            "edges). With options.interval every contrast gets a bootstrap interval from independent "
            "resampling of the two inputs."
        ),
        request=schemas.ComparisonRequest,
        response=schemas.ComparisonResponse,
        problems=(400, 401, 406, 413, 415, 422, 503),
        tag="comparisons",
    ),
    Operation(
        method="get",
        path="/v1/catalog",
        operation_id="catalog",
        summary="Every descriptor: definition, conventions, when undefined, reference",
        description="The meaning of every name a descriptor response can carry, and every warning code.",
        request=None,
        response=schemas.Catalog,
        problems=(401, 406),
        tag="catalog",
    ),
    Operation(
        method="get",
        path="/metrics",
        operation_id="metrics",
        summary="Prometheus metrics",
        description=(
            "Request counts and latencies by route and status (499: the client hung up before its "
            "answer was complete), values per request, resamples computed "
            "and budget rejections, summed over all workers of the server. Asks for a token only when "
            "TAILGAUGE_METRICS_REQUIRE_TOKEN is set."
        ),
        request=None,
        response=None,
        problems=(),
        tag="operations",
        protected=False,
    ),
    Operation(
        method="get",
        path="/health/live",
        operation_id="live",
        summary="Liveness",
        description="200 while the process serves requests.",
        request=None,
        response=schemas.Health,
        problems=(),
        tag="health",
        protected=False,
    ),
    Operation(
        method="get",
        path="/health/ready",
        operation_id="ready",
        summary="Readiness",
        description=(
            "200 while this worker accepts new work; 503 with status draining once it is stopping. "
            "notes lists what works less well in this worker while it serves, e.g. metrics it cannot "
            "export because their directory is full."
        ),
        request=None,
        response=schemas.Readiness,
        problems=(),
        tag="health",
        protected=False,
    ),
)

_REF = "#/components/schemas/{name}"


def _content(schema: dict, media_types: tuple[str, ...]) -> dict:
    return {media: {"schema": schema} for media in media_types}


def build_document() -> dict:
    """The complete OpenAPI 3.1 document as a JSON-ready dict."""
    types = [schemas.Problem]
    for op in OPERATIONS:
        if op.response is not None:
            types.append(op.response)
        if op.request is not None:
            types.append(op.request)
    refs, components = msgspec.json.schema_components(types, ref_template=_REF)
    ref_of = dict(zip(types, refs))
    problem_ref = ref_of[schemas.Problem]

    paths: dict[str, dict] = {}
    for op in OPERATIONS:
        if op.response is None:
            success = {"text/plain": {"schema": {"type": "string"}}}
        elif op.tag == "health":
            success = _content(ref_of[op.response], (JSON,))
        else:
            success = _content(ref_of[op.response], BODY_MEDIA_TYPES)
        responses = {"200": {"description": "Success.", "content": success}}
        if op.path == "/health/ready":
            responses["503"] = {
                "description": "This worker is draining (stopping); send new work elsewhere.",
                "content": _content(ref_of[op.response], (JSON,)),
            }
        for status in op.problems:
            titles = sorted({title for code, title in PROBLEM_TYPES.values() if code == status})
            description = "; ".join(titles) + " (RFC 9457 problem details)."
            if status == 401:
                description += " Only when the server is configured with bearer tokens."
            if status == 503:
                description += " The worker's memory is taken by requests in progress; retry after Retry-After."
            responses[str(status)] = {
                "description": description,
                "content": _content(problem_ref, (PROBLEM_JSON, PROBLEM_MSGPACK)),
            }
        entry = {
            "operationId": op.operation_id,
            "summary": op.summary,
            "description": op.description,
            "tags": [op.tag],
            "responses": responses,
        }
        if op.protected:
            # Either no token (an open server) or a bearer token.
            entry["security"] = [{}, {"bearerToken": []}]
        if op.request is not None:
            content = _content(ref_of[op.request], BODY_MEDIA_TYPES)
            if op.path in EXAMPLES:
                content[JSON]["example"] = EXAMPLES[op.path]
            entry["requestBody"] = {"required": True, "content": content}
        paths.setdefault(op.path, {})[op.method] = entry

    return {
        "openapi": "3.1.0",
        "info": {
            "title": "Tailgauge",
            "version": tailgauge.__version__,
            "description": (
                "Descriptors of a distribution with named estimator conventions. "
                "Descriptors summarise data; they do not certify a process. Bodies may be JSON or "
                "MessagePack (by Content-Type) and answers either (by Accept); large arrays may be "
                "sent as little-endian float64 bytes."
            ),
        },
        "paths": paths,
        "components": {
            "schemas": components,
            "securitySchemes": {
                "bearerToken": {
                    "type": "http",
                    "scheme": "bearer",
                    "description": "Asked for only when the server is configured with TAILGAUGE_API_TOKENS.",
                }
            },
        },
    }


def document_bytes() -> bytes:
    """The document as canonical, indented JSON (the form committed under openapi/)."""
    return msgspec.json.format(msgspec.json.encode(build_document()), indent=2) + b"\n"

