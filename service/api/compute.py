"""From request bytes to response bytes for each compute endpoint: decode, check limits, call the core.

Runs in a worker thread (see ``routes``), so nothing here may touch the event loop.
"""

from __future__ import annotations

import secrets
import time
from typing import TypeVar

import msgspec
import numpy as np

from service.api.problems import ApiProblem, invalid_body
from service.api.schemas import (
    BinsRequest,
    DescriptionResponse,
    DescriptorOptions,
    ProblemLocation,
    SamplesRequest,
    TableRequest,
)
from service.core import (
    DescribeOptions,
    IntervalOptions,
    LimitExceeded,
    Location,
    WeightMeaning,
    describe,
    from_bins,
    from_samples,
    from_table,
)
from service.settings import Settings

Request = TypeVar("Request", SamplesRequest, TableRequest, BinsRequest)

_decoders = {kind: msgspec.json.Decoder(kind) for kind in (SamplesRequest, TableRequest, BinsRequest)}
_encoder = msgspec.json.Encoder()


def _decode(body: bytes, kind: type[Request]) -> Request:
    try:
        return _decoders[kind].decode(body)
    except msgspec.MsgspecError as error:
        raise invalid_body(error, body) from None


def _check_count(count: int, path: str, settings: Settings) -> None:
    if count > settings.max_values:
        raise ApiProblem(
            "body-too-large",
            f"{count} entries sent in {path}; this server accepts at most {settings.max_values}",
            [ProblemLocation(path=path, message=f"at most {settings.max_values} entries")],
        )


def _describe_options(options: DescriptorOptions, settings: Settings) -> DescribeOptions:
    if options.moment_order > settings.max_moment_order:
        raise LimitExceeded(
            detail=f"moment_order may be at most {settings.max_moment_order} on this server",
            locations=[Location("$.options.moment_order", f"at most {settings.max_moment_order}; lower it")],
        )
    if len(options.probabilities) > settings.max_probabilities:
        raise LimitExceeded(
            detail=f"at most {settings.max_probabilities} probabilities per request on this server",
            locations=[Location("$.options.probabilities", "too many probabilities; send fewer")],
        )
    interval = None
    if options.interval is not None:
        seed = options.interval.seed
        interval = IntervalOptions(
            method=options.interval.method,
            level=options.interval.level,
            resamples=options.interval.resamples,
            seed=secrets.randbelow(2**53) if seed is None else seed,
        )
    return DescribeOptions(
        interval=interval,
        max_resample_work=float(settings.max_resample_work),
        subset_rows=settings.bootstrap_subset_rows,
        resample_threads=settings.resample_threads,
        deadline=time.monotonic() + settings.max_request_seconds,
        convention=options.convention,
        skewness_estimator=options.skewness_estimator,
        kurtosis_estimator=options.kurtosis_estimator,
        probabilities=tuple(options.probabilities),
        quantile_type=getattr(options, "quantile_type", None),
        moment_order=options.moment_order,
        modes_limit=settings.max_modes_listed,
        sheppard_correction=getattr(options, "sheppard_correction", False),
        contributions_limit=settings.max_contributions_listed,
    )


def _encode(description) -> bytes:
    return _encoder.encode(msgspec.convert(description, DescriptionResponse, from_attributes=True))


def describe_samples(body: bytes, settings: Settings) -> bytes:
    request = _decode(body, SamplesRequest)
    _check_count(len(request.values), "$.values", settings)
    options = _describe_options(request.options, settings)
    data = from_samples(
        request.values,
        omit_missing=request.options.missing == "omit",
        weights=request.weights,
        meaning=WeightMeaning.RELIABILITY if request.weight_kind == "reliability" else WeightMeaning.FREQUENCY,
    )
    return _encode(describe(data, options, kind="samples"))


def describe_table(body: bytes, settings: Settings) -> bytes:
    request = _decode(body, TableRequest)
    _check_count(len(request.outcomes), "$.outcomes", settings)
    options = _describe_options(request.options, settings)
    values = np.fromiter((o.value for o in request.outcomes), dtype=np.float64, count=len(request.outcomes))
    weights = np.fromiter((o.weight for o in request.outcomes), dtype=np.float64, count=len(request.outcomes))
    data = from_table(
        values,
        weights,
        probabilities=request.weight_kind == "probabilities",
        normalise=request.options.normalize,
    )
    return _encode(describe(data, options, kind="table"))


def describe_bins(body: bytes, settings: Settings) -> bytes:
    request = _decode(body, BinsRequest)
    _check_count(len(request.counts), "$.counts", settings)
    options = _describe_options(request.options, settings)
    data = from_bins(request.edges, request.counts)
    return _encode(describe(data, options, kind="bins"))
