"""From request bytes to response bytes for each compute endpoint: decode, check limits, call the core.

Runs in a worker thread (see ``routes``), so nothing here may touch the event loop.
"""

from __future__ import annotations

import msgspec

from service.api.problems import ApiProblem, invalid_body
from service.api.schemas import DescriptionResponse, ProblemLocation, SampleOptions, SamplesRequest
from service.core import DescribeOptions, LimitExceeded, Location, describe, from_samples
from service.settings import Settings

_samples_decoder = msgspec.json.Decoder(SamplesRequest)
_encoder = msgspec.json.Encoder()


def _check_options(options: SampleOptions, settings: Settings) -> None:
    if options.moment_order > settings.max_moment_order:
        raise LimitExceeded(
            detail=f"moment_order may be at most {settings.max_moment_order} on this server",
            locations=[
                Location("$.options.moment_order", f"at most {settings.max_moment_order}; lower it")
            ],
        )
    if len(options.probabilities) > settings.max_probabilities:
        raise LimitExceeded(
            detail=f"at most {settings.max_probabilities} probabilities per request on this server",
            locations=[Location("$.options.probabilities", "too many probabilities; send fewer")],
        )


def _describe_options(options: SampleOptions, settings: Settings) -> DescribeOptions:
    return DescribeOptions(
        convention=options.convention,
        skewness_estimator=options.skewness_estimator,
        kurtosis_estimator=options.kurtosis_estimator,
        probabilities=tuple(options.probabilities),
        quantile_type=options.quantile_type,
        moment_order=options.moment_order,
        modes_limit=settings.max_modes_listed,
    )


def describe_samples(body: bytes, settings: Settings) -> bytes:
    try:
        request = _samples_decoder.decode(body)
    except msgspec.MsgspecError as error:
        raise invalid_body(error) from None
    if len(request.values) > settings.max_values:
        raise ApiProblem(
            "body-too-large",
            f"{len(request.values)} values sent; this server accepts at most {settings.max_values}",
            [ProblemLocation(path="$.values", message=f"at most {settings.max_values} values")],
        )
    _check_options(request.options, settings)
    data = from_samples(request.values, omit_missing=request.options.missing == "omit")
    description = describe(data, _describe_options(request.options, settings), kind="samples")
    response = msgspec.convert(description, DescriptionResponse, from_attributes=True)
    return _encoder.encode(response)
