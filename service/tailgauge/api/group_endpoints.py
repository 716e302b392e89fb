"""The groups endpoint: many samples in one request (``POST /v1/descriptors/groups``), from bytes to
bytes as the other compute endpoints (``endpoints``), whose decoding, limits and options it shares.
"""

from __future__ import annotations

import dataclasses

import msgspec
import numpy as np

from tailgauge.api import admission, schemas
from tailgauge.api.conversion import group_messages
from tailgauge.api.endpoints import (
    Computed,
    check_count,
    decode_request,
    describe_options,
    float64s,
    plot_data_of,
    samples_data,
)
from tailgauge.api.media import Codec
from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation
from tailgauge.core import (
    Group,
    LimitExceeded,
    Location,
    UncomputableInput,
    WeightMeaning,
    admit_groups,
    describe_groups,
    from_complete_samples,
)
from tailgauge.core.groups import from_columns
from tailgauge.core.partial import MIN_ORDER
from tailgauge.runtime.memory import collection_paused
from tailgauge.settings import Settings


@admission.giving_back
def describe_groups_request(
    body: bytes, codec: Codec, answer: Codec, settings: Settings, figure: str | None = None
) -> Computed:
    """Many samples in one request. No figure types are offered for groups (one picture of many
    inputs has no layout yet), so ``figure`` is always None here; plot_data is per group."""
    with admission.admitted(body, codec, settings) as ticket, collection_paused():
        request = decode_request(body, schemas.GroupsRequest, codec)
        chosen = request.options
        groups, count = _groups(request, chosen.missing, settings)
        options = describe_options(chosen, settings, ticket.decoding)
        estimate = admit_groups(groups, options)
        ticket.resize(ticket.decoding + estimate.peak_bytes, estimate.seconds)
        described = describe_groups(
            groups,
            dataclasses.replace(options, admitted=True),
            order=chosen.group_order.value,
            baseline=chosen.baseline,
            score=chosen.score,
            partial_state_order=max(MIN_ORDER, chosen.moment_order) if chosen.partial_state else None,
        )
        seed = None if options.interval is None else options.interval.seed
        messages = group_messages(described)
        if chosen.plot_data:  # each group's own values, as the samples endpoint plots them alone
            data = {(type(g.key), g.key): g.data for g in groups}
            messages = [
                msgspec.structs.replace(m, plot_data=plot_data_of(data[(type(m.key), m.key)], "samples", chosen)) for m in messages
            ]
        message = schemas.GroupsResponse(groups=messages, seed=seed, warnings=[])
        resamples = sum(g.resampling.resamples for g in message.groups if g.resampling is not None)
        return Computed(answer.encode(message), count, resamples)


def _groups(request: schemas.GroupsRequest, missing: str, settings: Settings) -> tuple[list[Group], int]:
    """The request's groups in the core's form, from either form, within this server's limits."""
    columnar = request.values is not None or request.keys is not None
    if (request.groups is not None) == columnar:
        path = "$.groups" if request.groups is None else "$.values"
        raise ApiProblem(
            "invalid-body",
            "send either groups, or values with keys (the columnar form), not both and not neither",
            [ProblemLocation(path=path, message="either groups, or values with keys")],
        )
    if not columnar:
        for field in ("weights", "weight_kind"):
            if getattr(request, field) is not None:
                raise ApiProblem(
                    "invalid-body",
                    f"{field} at the top level belongs to the columnar form; give each group its own {field}",
                    [ProblemLocation(path=f"$.{field}", message="only with values and keys")],
                )
        return _listed_groups(request.groups, missing, settings)
    for field, given in (("values", request.values), ("keys", request.keys)):
        if given is None:
            raise ApiProblem(
                "invalid-body",
                "the columnar form needs both values and keys",
                [ProblemLocation(path=f"$.{field}", message="required with the columnar form")],
            )
    values = float64s(request.values, "$.values", missing=True)
    check_count(len(values), "$.values", settings)
    weights = None if request.weights is None else float64s(request.weights, "$.weights", missing=False)
    groups = from_columns(
        values,
        request.keys,
        weights,
        omit_missing=missing == "omit",
        meaning=WeightMeaning.RELIABILITY if request.weight_kind == "reliability" else WeightMeaning.FREQUENCY,
        max_groups=settings.max_groups,
    )
    return groups, len(values)


def _listed_groups(listed: list[schemas.Group], missing: str, settings: Settings) -> tuple[list[Group], int]:
    """Listed groups: at most ``max_groups``, their values together within ``max_values``, keys
    unique (all checked before any group's data are read), then each group's data by the samples
    endpoint's own rules, located under ``$.groups[i]``."""
    if len(listed) > settings.max_groups:
        raise LimitExceeded(
            detail=f"{len(listed)} groups sent; this server describes at most {settings.max_groups} groups per request",
            locations=[Location("groups", f"at most {settings.max_groups} groups")],
        )
    count = sum(len(g.values) // 8 if isinstance(g.values, bytes) else len(g.values) for g in listed)
    check_count(count, "$.groups", settings, "all groups together")
    first_at: dict = {}
    for index, group in enumerate(listed):
        earlier = first_at.setdefault(group.key, index)
        if earlier != index:
            raise UncomputableInput.at(
                f"groups[{index}].key", f"repeats the key of groups[{earlier}]; keys must be unique"
            )
    if all(group.weights is None for group in listed):
        # Unweighted groups with nothing missing: checked together (each group alone below
        # otherwise, whose errors and omissions are located in it).
        samples = [
            float64s(group.values, f"$.groups[{index}].values", missing=True) if isinstance(group.values, bytes)
            else np.asarray(group.values, dtype=np.float64)
            for index, group in enumerate(listed)
        ]
        complete = from_complete_samples(samples)
        if complete is not None:
            return [Group(g.key, data, field=f"groups[{i}]") for i, (g, data) in enumerate(zip(listed, complete))], count
    groups = []
    for index, group in enumerate(listed):
        data, _ = samples_data(group, missing, settings, f"$.groups[{index}]")
        groups.append(Group(group.key, data, field=f"groups[{index}]"))
    return groups, count
