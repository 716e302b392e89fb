"""From request bytes to response bytes for each compute endpoint: decode, check limits, call the core.

Runs in a worker thread (see ``routes``), or on the event loop for a small body without
intervals (:func:`runs_inline`), so nothing here may touch the event loop or wait for anything.
"""

from __future__ import annotations

import dataclasses
import secrets
import time
from dataclasses import dataclass
from typing import TypeVar

import msgspec
import numpy as np

from tailgauge.api import admission, pictures, schemas
from tailgauge.api.conversion import to_message
from tailgauge.api.media import Codec
from tailgauge.api.problems import ApiProblem, invalid_body, json_path
from tailgauge.api.schemas import (
    BinsData,
    BinsRequest,
    ComparisonRequest,
    ComparisonResponse,
    ComparisonWarning,
    CoreChoices,
    HISTOGRAM_LAYOUT_FIELDS,
    HistogramData,
    HistogramInput,
    HistogramRequest,
    DescriptionResponse,
    MergedDescriptionResponse,
    MergeRequest,
    ProblemLocation,
    ResultWarning,
    SamplesData,
    SamplesInput,
    SamplesRequest,
    TableData,
    TableInput,
    TableRequest,
)
from tailgauge.core import (
    DescribeOptions,
    DescriptorError,
    IntervalOptions,
    LimitExceeded,
    Location,
    WeightMeaning,
    Selection,
    admit,
    choose,
    compare,
    describe,
    from_bins,
    from_samples,
    from_table,
    restricted,
    restricted_comparison,
    standardize,
)
from tailgauge.core import histograms
from tailgauge.core.scoring import READ_BY_SCORES
from tailgauge.core.partial import MIN_ORDER, PartialState, describe_state, merge_states, state_of
from tailgauge.core.sketches import combine_sketches
from tailgauge import figures
from tailgauge.settings import Settings

# A body this small (about 2,000 values as JSON) and without intervals computes in about the time of
# 100 values (the fixed cost dominates), a few milliseconds: on the event loop it costs less than
# the hop to a worker thread and back. Worker CPU per 100-value request, 2 workers, 8 connections,
# alternating runs on the 2-core machine: 2.06 ms via the thread, 1.82 ms inline (medians of 9).
INLINE_BODY_BYTES = 16 * 1024


def runs_inline(body: bytes) -> bool:
    """Whether a request is computed on the event loop instead of in a worker thread.

    Intervals resample (a small body may ask for a million resamples), so any body naming
    ``interval`` goes to a thread; every other option is bounded in cost by the body's size.
    """
    return len(body) <= INLINE_BODY_BYTES and b"interval" not in body


Request = TypeVar("Request", SamplesRequest, TableRequest, BinsRequest, HistogramRequest, ComparisonRequest)


@dataclass(frozen=True)
class Computed:
    """An encoded answer, with what the metrics and the request log record of it."""

    body: bytes
    values: int
    resamples: int


def decode_request(body: bytes, kind: type[Request], codec: Codec) -> Request:
    try:
        return codec.decode(body, kind)
    except msgspec.MsgspecError as error:
        raise invalid_body(error, body, codec, kind) from None


def float64s(raw: list | bytes, path: str, *, missing: bool) -> np.ndarray | list:
    """A list as sent, or float64 bytes as an array checked like the list form would be.

    In bytes, NaN marks a missing value where nulls are allowed (``missing``); infinities,
    and NaN or negative numbers where only weights >= 0 are allowed, are located errors.
    """
    if not isinstance(raw, bytes):
        return raw
    if len(raw) % 8:
        raise ApiProblem(
            "invalid-body",
            f"{path} holds {len(raw)} bytes, not a whole number of 8-byte float64 values",
            [ProblemLocation(path=path, message="must be whole 8-byte float64 values (a multiple of 8 bytes)")],
        )
    array = np.frombuffer(raw, dtype="<f8").astype(np.float64, copy=False)
    if missing:
        bad = np.flatnonzero(np.isinf(array))
        why = "is infinite; send finite numbers (in float64 bytes, NaN marks a missing value)"
    else:
        bad = np.flatnonzero(~(np.isfinite(array) & (array >= 0.0)))
        why = "must be a finite number, at least 0"
    if bad.size:
        first = int(bad[0])
        raise ApiProblem(
            "invalid-body",
            f"{bad.size} of the {array.size} float64 values in {path} are not accepted; the first is "
            f"{path}[{first}] = {_shown(float(array[first]))}",
            [ProblemLocation(path=f"{path}[{int(i)}]", message=why) for i in bad[:10]],
        )
    return array


def _shown(value: float) -> str:
    """A float64 as a caller would write it: NaN and Infinity by their IEEE names."""
    if np.isnan(value):
        return "NaN"
    if np.isinf(value):
        return "Infinity" if value > 0 else "-Infinity"
    return repr(value)


def check_count(count: int, path: str, settings: Settings, what: str | None = None) -> None:
    if count > settings.max_values:
        raise ApiProblem(
            "body-too-large",
            f"{count} entries sent in {what or path}; this server accepts at most {settings.max_values}",
            [ProblemLocation(path=path, message=f"at most {settings.max_values} entries")],
        )


def _admitted(inputs, options: DescribeOptions, ticket, figure: str | None = None) -> DescribeOptions:
    """Plan the computation (422 with what would fit), then hold its memory in the worker's gate
    (and, for a figure, what drawing it takes: a bounded canvas, whatever the input's size)."""
    estimate = admit(inputs, options)
    drawing = (figures.RENDER_BYTES, figures.RENDER_SECONDS) if figure else (0.0, 0.0)
    ticket.resize(ticket.decoding + estimate.peak_bytes + drawing[0], estimate.seconds + drawing[1])
    return dataclasses.replace(options, admitted=True)


def describe_options(
    options: CoreChoices, settings: Settings, decoding: float = 0.0, figure: str | None = None, *, quartiles: bool = True
) -> DescribeOptions:
    """The core's options for a request's option set, within this server's limits.

    Every option set answers the same typed questions (an option an endpoint does not offer is
    a property holding the core's default), so this is the one place a request's options become
    the core's. ``decoding``: bytes already held for the decoded body, taken from the memory the
    computation may use. ``figure``: a figure is asked for, so what it reads (``figures.READS``) is
    computed whether shown or not, and with ``quartiles`` the quartiles it marks are added to the
    probabilities (after the requested ones; the figure marks only the requested ones as quantiles).
    """
    if options.moment_order > settings.max_moment_order:
        raise LimitExceeded(
            detail=f"moment_order may be at most {settings.max_moment_order} on this server",
            locations=[Location("options.moment_order", f"at most {settings.max_moment_order}; lower it")],
        )
    if len(options.probabilities) > settings.max_probabilities:
        raise LimitExceeded(
            detail=f"at most {settings.max_probabilities} probabilities per request on this server",
            locations=[
                Location("options.probabilities", f"at most {settings.max_probabilities} on this server; send fewer")
            ],
        )
    interval = None
    requested = options.interval
    if requested is not None:
        seed = requested.seed
        interval = IntervalOptions(
            method=requested.method,
            level=requested.level,
            resamples=requested.resamples,
            seed=secrets.randbelow(2**53) if seed is None else seed,
        )
    return DescribeOptions(
        interval=interval,
        max_resample_work=float(settings.max_resample_work),
        subset_rows=settings.bootstrap_subset_rows,
        resample_threads=settings.resample_threads,
        deadline=time.monotonic() + settings.max_request_seconds,
        max_memory_bytes=float(settings.max_request_memory_bytes) - decoding,
        convention=options.convention,
        skewness_estimator=options.skewness_estimator,
        kurtosis_estimator=options.kurtosis_estimator,
        probabilities=_probabilities(options.probabilities, figure is not None and quartiles),
        quantile_type=options.quantile_type,
        moment_order=options.moment_order,
        modes_limit=settings.max_modes_listed,
        sheppard_correction=options.sheppard_correction,
        order=str(options.order),
        block_scheme=None if options.block_scheme is None else str(options.block_scheme),
        block_length=options.block_length,
        contributions_limit=settings.max_contributions_listed,
        # The schema admits only known names; scores read four descriptors whether shown or not.
        descriptors=choose(
            options.descriptors, also=(READ_BY_SCORES if options.score else ()) + (figures.READS if figure else ())
        ),
        thresholds=tuple(options.thresholds),
        tail_levels=tuple(options.tail_levels),
        trim_proportion=options.trim_proportion,
        tail_count=options.tail_count,
    )


def _probabilities(requested: list[float], quartiles: bool) -> tuple[float, ...]:
    if not quartiles:
        return tuple(requested)
    return (*requested, *(p for p in figures.QUARTILES if p not in requested))


def _with_scores(message: DescriptionResponse | ComparisonResponse, description, points: list[float]):
    """Add ``scores`` (and their warnings) for ``options.score`` relative to ``description``."""
    if not points:
        return message
    scores = standardize(description, points)
    message.scores = to_message(scores, schemas.Scores)
    if isinstance(message, ComparisonResponse):
        message.warnings.extend(
            ComparisonWarning(side="comparison", code=n.code, message=n.message, descriptors=list(n.descriptors))
            for n in scores.warnings
        )
    else:
        message.warnings.extend(
            ResultWarning(code=n.code, message=n.message, descriptors=list(n.descriptors)) for n in scores.warnings
        )
    return message


def _answer(
    description, count: int, codec: Codec, points: list[float], state: PartialState | None = None,
    selection: Selection | None = None, plot: schemas.PlotData | None = None,
) -> Computed:
    message = to_message(restricted(description, selection), DescriptionResponse)
    message = _with_scores(message, description, points)
    if state is not None:
        message.partial_state = to_message(state, schemas.PartialState)
    message.plot_data = plot
    resamples = description.resampling.resamples if description.resampling is not None else 0
    return Computed(codec.encode(message), count, resamples)


def _relocated(error: DescriptorError, prefix: str) -> DescriptorError:
    """The same error with its fields placed under ``prefix`` (``values`` -> ``$.first.values``)."""
    if prefix == "$":
        return error
    return type(error)(
        detail=error.detail,
        locations=[Location(json_path(loc.path, prefix), loc.message) for loc in error.locations],
    )


def samples_data(message: SamplesData, missing: str, settings: Settings, prefix: str = "$"):
    values = float64s(message.values, f"{prefix}.values", missing=True)
    check_count(len(values), f"{prefix}.values", settings)
    weights = None if message.weights is None else float64s(message.weights, f"{prefix}.weights", missing=False)
    try:
        data = from_samples(
            values,
            omit_missing=missing == "omit",
            weights=weights,
            meaning=WeightMeaning.RELIABILITY if message.weight_kind == "reliability" else WeightMeaning.FREQUENCY,
        )
    except DescriptorError as error:
        raise _relocated(error, prefix) from None
    return data, len(values)


def _table_data(message: TableData, normalize: bool, settings: Settings, prefix: str = "$"):
    check_count(len(message.outcomes), f"{prefix}.outcomes", settings)
    count = len(message.outcomes)
    values = np.fromiter((o.value for o in message.outcomes), dtype=np.float64, count=count)
    weights = np.fromiter((o.weight for o in message.outcomes), dtype=np.float64, count=count)
    try:
        data = from_table(
            values, weights, probabilities=message.weight_kind == "probabilities", normalise=normalize
        )
    except DescriptorError as error:
        raise _relocated(error, prefix) from None
    return data, count


def _bins_data(message: BinsData, settings: Settings, prefix: str = "$"):
    counts = float64s(message.counts, f"{prefix}.counts", missing=False)
    check_count(len(counts), f"{prefix}.counts", settings)
    try:
        data = from_bins(message.edges, counts)
    except DescriptorError as error:
        raise _relocated(error, prefix) from None
    return data, len(counts)


def _histogram_data(message: HistogramData, settings: Settings, prefix: str = "$"):
    """The bins form of a histogram: its layout's fields checked (a field of another layout, or
    one the layout requires missing, is a 400 naming it), its buckets counted against the limit,
    then the core's rules (422, located)."""
    required, optional = HISTOGRAM_LAYOUT_FIELDS[message.layout]
    layout = message.layout.value
    wrong = [
        ProblemLocation(path=f"{prefix}.{name}", message=f"not a field of the {layout} layout")
        for name in HistogramData.__struct_fields__
        if name != "layout" and name not in required + optional and getattr(message, name) is not None
    ] + [
        ProblemLocation(path=f"{prefix}.{name}", message=f"required by the {layout} layout")
        for name in required
        if getattr(message, name) is None
    ]
    if wrong:
        raise ApiProblem(
            "invalid-body",
            f"the {layout} layout takes {', '.join(required)} and optionally {', '.join(optional)}",
            wrong,
        )
    try:
        if layout == "cumulative":
            count = len(message.cumulative_counts)
            check_count(count, f"{prefix}.cumulative_counts", settings)
            data = histograms.from_cumulative(
                message.upper_bounds, message.cumulative_counts, lower_bound=message.lower_bound,
                total=message.sum, count=message.count,
            )
        elif layout == "explicit":
            count = len(message.bucket_counts)
            check_count(count, f"{prefix}.bucket_counts", settings)
            data = histograms.from_explicit(
                message.explicit_bounds, message.bucket_counts, total=message.sum, minimum=message.min,
                maximum=message.max,
            )
        else:
            sides = {
                name: histograms.Buckets(side.offset, side.bucket_counts)
                for name, side in (("positive", message.positive), ("negative", message.negative))
                if side is not None
            }
            count = 1 + sum(len(side.counts) for side in sides.values())
            longest = max(sides, key=lambda name: len(sides[name].counts), default="positive")
            check_count(count, f"{prefix}.{longest}.bucket_counts", settings, "the zero, positive and negative buckets")
            data = histograms.from_exponential(
                message.scale, message.zero_count,
                zero_threshold=message.zero_threshold or 0.0, total=message.sum, minimum=message.min,
                maximum=message.max, **sides,
            )
    except DescriptorError as error:
        raise _relocated(error, prefix) from None
    return data, count


@admission.giving_back
def describe_samples(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    with admission.admitted(body, codec, settings) as ticket:
        request = decode_request(body, SamplesRequest, codec)
        data, count = samples_data(request, request.options.missing, settings)
        options = _admitted([data], describe_options(request.options, settings, ticket.decoding, figure), ticket, figure)
        description = describe(data, options, kind="samples")
        if figure:
            return _drawn(description, data, "samples", request.options, figure, count)
        state = None
        if request.options.partial_state:
            state = state_of(data, order=max(MIN_ORDER, request.options.moment_order))
        return _answer(
            description, count, answer, request.options.score, state, options.descriptors,
            plot_data_of(data, "samples", request.options),
        )


def _drawn(description, data, kind: str, request_options, figure: str, count: int) -> Computed:
    """A figure of ``description`` as the answer's bytes."""
    resamples = description.resampling.resamples if description.resampling is not None else 0
    return Computed(pictures.description_figure(description, data, kind, request_options, figure), count, resamples)


def plot_data_of(data, kind: str, request_options) -> schemas.PlotData | None:
    return pictures.plot_data_message(data, kind) if request_options.plot_data else None


@admission.giving_back
def merge_states_request(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    # Merged states carry no values to draw: the operation declares no figure media types.
    # States and sketches cost what their bytes do: the decoding bound covers them.
    with admission.admitted(body, codec, settings):
        return _merge_states(body, codec, answer, settings)


def _merge_states(body: bytes, codec: Codec, answer: Codec, settings: Settings) -> Computed:
    request = decode_request(body, MergeRequest, codec)
    states = [
        PartialState(
            count=s.count, mean=s.mean, central_sums=tuple(s.central_sums), minimum=s.minimum, maximum=s.maximum
        )
        for s in request.states
    ]
    sketches = None
    if request.sketches:
        sketches = combine_sketches(request.sketches, path="sketches")
    merged = merge_states(states, path="states")
    options = describe_options(request.options, settings)
    description = describe_state(merged, options, quantiles_from=sketches)
    message = to_message(restricted(description, options.descriptors), MergedDescriptionResponse)
    message = _with_scores(message, description, request.options.score)
    message.partial_state = to_message(merged, schemas.PartialState)
    return Computed(answer.encode(message), len(states), 0)


@admission.giving_back
def describe_table(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    with admission.admitted(body, codec, settings) as ticket:
        request = decode_request(body, TableRequest, codec)
        data, count = _table_data(request, request.options.normalize, settings)
        return _described(data, count, request.options, "table", "table", answer, settings, ticket, figure)


@admission.giving_back
def describe_bins(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    with admission.admitted(body, codec, settings) as ticket:
        request = decode_request(body, BinsRequest, codec)
        data, count = _bins_data(request, settings)
        return _described(data, count, request.options, "bins", "bins", answer, settings, ticket, figure)


@admission.giving_back
def describe_histogram(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    with admission.admitted(body, codec, settings) as ticket:
        request = decode_request(body, HistogramRequest, codec)
        data, count = _histogram_data(request, settings)
        # A histogram is drawn and plotted as the bins it became.
        return _described(data, count, request.options, "histogram", "bins", answer, settings, ticket, figure)


def _described(data, count: int, request_options, kind: str, drawn_as: str, answer: Codec, settings: Settings,
               ticket, figure: str | None) -> Computed:
    """One input of ``kind`` described, answered as a figure (drawn as ``drawn_as``) or as a message."""
    options = _admitted([data], describe_options(request_options, settings, ticket.decoding, figure), ticket, figure)
    description = describe(data, options, kind=kind)
    if figure:
        return _drawn(description, data, drawn_as, request_options, figure, count)
    return _answer(
        description, count, answer, request_options.score, selection=options.descriptors,
        plot=plot_data_of(data, drawn_as, request_options),
    )


def _input_data(message, settings: Settings, prefix: str):
    if isinstance(message, SamplesInput):
        return (*samples_data(message, message.options.missing, settings, prefix), "samples")
    if isinstance(message, TableInput):
        return (*_table_data(message, message.options.normalize, settings, prefix), "table")
    if isinstance(message, HistogramInput):
        return (*_histogram_data(message, settings, prefix), "histogram")
    return (*_bins_data(message, settings, prefix), "bins")


@admission.giving_back
def compare_inputs(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    with admission.admitted(body, codec, settings) as ticket:
        return _compare(body, codec, answer, settings, ticket, figure)


def _compare(body: bytes, codec: Codec, answer: Codec, settings: Settings, ticket, figure: str | None) -> Computed:
    request = decode_request(body, ComparisonRequest, codec)
    first, first_count, first_kind = _input_data(request.first, settings, "$.first")
    second, second_count, second_kind = _input_data(request.second, settings, "$.second")
    check_count(first_count + second_count, "$.second", settings, "$.first and $.second together")
    options = describe_options(request.options, settings, ticket.decoding, figure, quartiles=False)
    options = _admitted([first, second], options, ticket, figure)
    comparison = compare(first, second, options, kinds=(first_kind, second_kind))
    resamples = 0 if comparison.resampling is None else 2 * comparison.resampling.resamples
    if figure:
        kinds = (first_kind, second_kind)
        drawn = pictures.comparison_figure(comparison, first, second, kinds, request.options, figure)
        return Computed(drawn, first_count + second_count, resamples)
    message = to_message(restricted_comparison(comparison, options.descriptors), ComparisonResponse)
    message = _with_scores(message, comparison.first, request.options.score)
    message.first.plot_data = plot_data_of(first, first_kind, request.options)
    message.second.plot_data = plot_data_of(second, second_kind, request.options)
    return Computed(answer.encode(message), first_count + second_count, resamples)
