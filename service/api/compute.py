"""From request bytes to response bytes for each compute endpoint: decode, check limits, call the core.

Runs in a worker thread (see ``routes``), so nothing here may touch the event loop.
"""

from __future__ import annotations

import secrets
import time
from dataclasses import dataclass
from typing import TypeVar

import msgspec
import numpy as np

from service.api.media import Codec
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


@dataclass(frozen=True)
class Computed:
    """An encoded answer, with what the metrics and the request log record of it."""

    body: bytes
    values: int
    resamples: int


def _decode(body: bytes, kind: type[Request], codec: Codec) -> Request:
    try:
        return codec.decode(body, kind)
    except msgspec.MsgspecError as error:
        raise invalid_body(error, body, codec) from None


def _float64s(raw: list | bytes, path: str, *, missing: bool) -> np.ndarray | list:
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
            [ProblemLocation(path=path, message="length must be a multiple of 8 bytes")],
        )
    array = np.frombuffer(raw, dtype="<f8").astype(np.float64, copy=False)
    if missing:
        bad = np.flatnonzero(np.isinf(array))
        why = "infinite; only finite numbers (or NaN for a missing value) are accepted"
    else:
        bad = np.flatnonzero(~(np.isfinite(array) & (array >= 0.0)))
        why = "must be a finite number >= 0"
    if bad.size:
        first = int(bad[0])
        raise ApiProblem(
            "invalid-body",
            f"{bad.size} of the {array.size} float64 values in {path} are not accepted; the first is "
            f"{path}[{first}] = {float(array[first])!r}",
            [ProblemLocation(path=f"{path}[{int(i)}]", message=why) for i in bad[:10]],
        )
    return array


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


def _answer(description, count: int, codec: Codec) -> Computed:
    message = msgspec.convert(description, DescriptionResponse, from_attributes=True)
    resamples = description.resampling.resamples if description.resampling is not None else 0
    return Computed(codec.encode(message), count, resamples)


def describe_samples(body: bytes, codec: Codec, answer: Codec, settings: Settings) -> Computed:
    request = _decode(body, SamplesRequest, codec)
    values = _float64s(request.values, "$.values", missing=True)
    _check_count(len(values), "$.values", settings)
    weights = None if request.weights is None else _float64s(request.weights, "$.weights", missing=False)
    options = _describe_options(request.options, settings)
    data = from_samples(
        values,
        omit_missing=request.options.missing == "omit",
        weights=weights,
        meaning=WeightMeaning.RELIABILITY if request.weight_kind == "reliability" else WeightMeaning.FREQUENCY,
    )
    return _answer(describe(data, options, kind="samples"), len(values), answer)


def describe_table(body: bytes, codec: Codec, answer: Codec, settings: Settings) -> Computed:
    request = _decode(body, TableRequest, codec)
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
    return _answer(describe(data, options, kind="table"), len(request.outcomes), answer)


def describe_bins(body: bytes, codec: Codec, answer: Codec, settings: Settings) -> Computed:
    request = _decode(body, BinsRequest, codec)
    counts = _float64s(request.counts, "$.counts", missing=False)
    _check_count(len(counts), "$.counts", settings)
    options = _describe_options(request.options, settings)
    data = from_bins(request.edges, counts)
    return _answer(describe(data, options, kind="bins"), len(counts), answer)
