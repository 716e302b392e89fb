"""The endpoint table: every documented operation declared once.

Path, method, operation id, summary, description, tag, request and response types, the
statuses of its problem responses, the media types of its answers and its example live here
and nowhere else: ``routes`` builds the litestar handlers from this table (the handler bodies
are keyed by operation id, and a missing or extra body is an error when the app is built), and ``openapi``
builds the published document from it. The schema page and the document itself
(``/docs``, ``/docs/assets``, ``/openapi.json``) describe the API and are not part of it.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from tailgauge.api import schemas
from tailgauge.api.media import FIGURE_TYPES, JSON, MSGPACK

BODY_MEDIA_TYPES = (JSON, MSGPACK)
# What a descriptor or comparison operation answers with: its JSON or MessagePack body, or a
# figure of it (SVG, PNG; tailgauge.figures).
WITH_FIGURES = (*BODY_MEDIA_TYPES, *FIGURE_TYPES)
TEXT = "text/plain"
COMPUTE_PROBLEMS = (400, 401, 406, 413, 415, 422, 503)


@dataclass(frozen=True)
class Operation:
    method: str
    path: str
    operation_id: str
    summary: str
    description: str
    tag: str
    request: type | None
    # None: a text/plain answer (the metrics exposition)
    response: type | None
    # Statuses answered with an RFC 9457 problem document.
    problems: tuple[int, ...] = ()
    # Media types of a success; a request body may come in any of BODY_MEDIA_TYPES. Those of
    # FIGURE_TYPES among them answer a figure of the result (routes negotiate them, the document
    # declares them, so the schema page offers them).
    answers: tuple[str, ...] = BODY_MEDIA_TYPES

    # Other statuses answered with the response type (status -> description).
    other_answers: dict[int, str] = field(default_factory=dict)
    # Whether the operation asks for a bearer token when the server is configured with tokens.
    protected: bool = True
    # A setting (of tailgauge.settings.Settings) that makes an unprotected operation ask for a
    # token too when it is true; the served document follows the server's settings.
    protected_when: str | None = None
    # A valid body (an invented scenario), shown by the schema page's "Try it out"; a test
    # sends each one and expects a 200.
    example: dict | None = None
    # Bodies the operation answers with a problem, by status (400: a schema violation, 422: a
    # rule the schema cannot express). The published examples are the app's real answers to
    # them (tailgauge.api.examples records them; other statuses come from the example itself).
    problem_examples: dict[int, dict] = field(default_factory=dict)

    @property
    def figures(self) -> tuple[str, ...]:
        """The figure media types this operation answers with (none: it draws nothing)."""
        return tuple(media for media in self.answers if media in FIGURE_TYPES)


_EXAMPLES = {
    "/v1/descriptors/samples": {
        # Bag weights in filling order: order as_sent adds the effective n from their autocorrelation.
        "values": [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3, 250.3],
        "options": {"probabilities": [0.05, 0.5, 0.95], "order": "as_sent", "thresholds": [249.5], "tail_levels": [0.9]},
    },
    "/v1/descriptors/groups": {
        "groups": [
            {"key": "head-1", "values": [500.8, 501.2, 499.9, 500.4, 501.0, 500.6, 500.1, 500.9]},
            {"key": "head-2", "values": [501.9, 502.4, 501.6, 502.8, 502.1, 501.7, 502.5, 502.0]},
            {"key": "head-3", "values": [499.2, 500.9, 498.7, 501.5, 499.8, 500.3, 498.9, 501.1]},
        ],
        "options": {
            "descriptors": ["mean", "standard_deviation", "quantiles"],
            "probabilities": [0.05, 0.5, 0.95],
            "baseline": "head-1",
        },
    },
    "/v1/descriptors/table": {
        "outcomes": [{"value": 0, "weight": 412}, {"value": 1, "weight": 187}, {"value": 2, "weight": 61},
                     {"value": 3, "weight": 17}, {"value": 4, "weight": 3}],
        "weight_kind": "counts",
        "options": {"thresholds": [2], "tail_levels": [0.95, 0.99]},
    },
    "/v1/descriptors/bins": {
        "edges": [0, 15, 30, 45, 60, None], "counts": [18, 64, 41, 12, 5],
        "options": {"thresholds": [40], "tail_levels": [0.5]},
    },
    "/v1/descriptors/histogram": {
        "layout": "cumulative",
        "upper_bounds": [0.025, 0.05, 0.1, 0.2, 0.3, 0.5, 1.0, 2.5, None],
        "cumulative_counts": [1180, 5230, 10940, 13460, 14020, 14160, 14205, 14218, 14220],
        "sum": 1298.4,
        "count": 14220,
        "options": {"probabilities": [0.5, 0.9, 0.99], "thresholds": [0.3]},
    },
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


# A request per compute operation that breaks the schema (400) and one that breaks a rule only
# the data can (422); the answers to them are the document's problem examples.
_PROBLEM_EXAMPLES = {
    "/v1/descriptors/samples": {
        400: {"values": [251.2, 249.8, 250.4], "options": {"skewness_estimator": "G3"}},
        422: {"values": [251.2, None, 250.4]},
    },
    "/v1/descriptors/groups": {
        400: {"groups": [{"key": "head-1", "values": [500.8, 501.2]}, {"key": "head-2", "values": []}]},
        422: {
            "groups": [{"key": "head-1", "values": [500.8, 501.2]}, {"key": "head-2", "values": [501.9, 502.4]}],
            "options": {"baseline": "head-9"},
        },
    },
    "/v1/descriptors/table": {
        400: {"outcomes": [{"value": 0, "weight": 412}, {"value": 1, "weight": -3}], "weight_kind": "counts"},
        422: {"outcomes": [{"value": 0, "weight": 0.5}, {"value": 1, "weight": 0.25}], "weight_kind": "probabilities"},
    },
    "/v1/descriptors/bins": {
        400: {"edges": [0, 15, 30], "counts": [18, 64], "options": {"sheppard": True}},
        422: {"edges": [0, 30, 15], "counts": [18, 64]},
    },
    "/v1/descriptors/histogram": {
        400: {"layout": "exponential", "scale": 24, "zero_count": 0, "positive": {"offset": 0, "bucket_counts": [3, 5]}},
        422: {"layout": "cumulative", "upper_bounds": [0.1, 0.3, None], "cumulative_counts": [40, 35, 50]},
    },
    "/v1/descriptors/merge": {
        400: {"states": [{"count": 4, "central_sums": [5.0, 0.0, 10.25], "minimum": 1, "maximum": 4}]},
        422: {
            "states": [
                {"count": 4, "mean": 2.5, "central_sums": [5.0, 0.0, 10.25], "minimum": 1, "maximum": 4},
                {"count": 2, "mean": 15.0, "central_sums": [50.0, 0.0, 1250.0], "minimum": 20, "maximum": 10},
            ]
        },
    },
    "/v1/comparisons": {
        400: {
            "first": {"kind": "sketch", "values": [34, 41, 38]},
            "second": {"kind": "samples", "values": [31, 35, 33]},
        },
        422: {
            "first": {"kind": "samples", "values": [34, 41, 38, 45]},
            "second": {"kind": "samples", "values": [31, None, 33, 40]},
        },
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
            "Undefined results are null with a warning saying why. Accept: image/svg+xml or image/png "
            "answers a figure: the histogram with the mean, median, quartiles, a one-sd band and the "
            "requested quantiles, and each value's share of the third and fourth moments."
        ),
        request=schemas.SamplesRequest,
        response=schemas.DescriptionResponse,
        problems=COMPUTE_PROBLEMS,
        answers=WITH_FIGURES,
        example=_EXAMPLES["/v1/descriptors/samples"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/samples"],
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/descriptors/groups",
        operation_id="describeGroups",
        summary="Describe many raw samples at once, one per key",
        description=(
            "Each group's answer is the samples endpoint's answer for that group alone, bit for bit, "
            "by the same options (intervals with a seed per group, derived from the one seed and the "
            "key, and reported in resampling.seed). Groups come as a list (key, values, weights) or "
            "in columns (values with one key per value). options.group_order sorts them by key; "
            "options.baseline contrasts every group with one of them. The basic descriptors (mean, "
            "variance, standard deviation, median, extremes, range, IQR, quantiles) of all groups are "
            "computed together."
        ),
        request=schemas.GroupsRequest,
        response=schemas.GroupsResponse,
        problems=COMPUTE_PROBLEMS,
        example=_EXAMPLES["/v1/descriptors/groups"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/groups"],
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
        problems=COMPUTE_PROBLEMS,
        answers=WITH_FIGURES,
        example=_EXAMPLES["/v1/descriptors/table"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/table"],
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
        problems=COMPUTE_PROBLEMS,
        answers=WITH_FIGURES,
        example=_EXAMPLES["/v1/descriptors/bins"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/bins"],
        tag="descriptors",
    ),
    Operation(
        method="post",
        path="/v1/descriptors/histogram",
        operation_id="describeHistogram",
        summary="Describe a histogram as a metrics system exports it",
        description=(
            "A histogram tagged by layout: cumulative (le upper bounds with cumulative counts, the last "
            "bound null for +infinity), explicit (bounds with one more bucket count) or exponential "
            "(base 2^(2^-scale) buckets on both sides of a zero bucket). It is described as bins (every "
            "bins descriptor, option and interval applies; kind histogram); a known sum makes the mean "
            "exact (sum / count), known min and max the extremes, and close the outer buckets; "
            "grouping.known_summary says which descriptors they made exact. Accept: image/svg+xml or "
            "image/png answers a figure of the bins it became."
        ),
        request=schemas.HistogramRequest,
        response=schemas.DescriptionResponse,
        problems=COMPUTE_PROBLEMS,
        answers=WITH_FIGURES,
        example=_EXAMPLES["/v1/descriptors/histogram"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/histogram"],
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
        problems=COMPUTE_PROBLEMS,
        example=_EXAMPLES["/v1/descriptors/merge"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/descriptors/merge"],
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
            "and a two-sample test (Kolmogorov-Smirnov, or chi-square homogeneity of binned data on the "
            "edges both inputs share). With options.interval every contrast gets a bootstrap interval from "
            "independent resampling of the two inputs. Accept: image/svg+xml or image/png answers a figure: "
            "both empirical distribution functions and the quantile shifts with their intervals."
        ),
        request=schemas.ComparisonRequest,
        response=schemas.ComparisonResponse,
        problems=COMPUTE_PROBLEMS,
        answers=WITH_FIGURES,
        example=_EXAMPLES["/v1/comparisons"],
        problem_examples=_PROBLEM_EXAMPLES["/v1/comparisons"],
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
        problems=(400, 401, 406),
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
        answers=(TEXT,),
        problems=(400, 401),
        tag="operations",
        protected=False,
        protected_when="metrics_require_token",
    ),
    Operation(
        method="get",
        path="/health/live",
        operation_id="live",
        summary="Liveness",
        description="200 while the process serves requests.",
        request=None,
        response=schemas.Health,
        answers=(JSON,),
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
        answers=(JSON,),
        other_answers={503: "This worker is draining (stopping); send new work elsewhere."},
        tag="health",
        protected=False,
    ),
)

OPERATION_IDS = {op.operation_id: op for op in OPERATIONS}

__all__ = ["BODY_MEDIA_TYPES", "OPERATIONS", "OPERATION_IDS", "Operation"]
