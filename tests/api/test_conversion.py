"""Core results become response Structs field for field, and a field missing on either side fails.

The fake result types below are module-level dataclasses (their type hints must resolve); each
differs from a real core result in one way that ``msgspec.convert(from_attributes=True)`` alone
would let through silently.
"""

from __future__ import annotations

import dataclasses
import typing
from dataclasses import dataclass

import msgspec
import numpy as np
import pytest

from tailgauge.api import conversion, schemas
from tailgauge.api.conversion import ConversionMismatch, check, to_message
from tailgauge.core import (
    DescribeOptions,
    IntervalOptions,
    compare,
    describe,
    from_samples,
    partial_state,
    standardize,
)


# The core's own result types, found through the checked pairs (not by their module paths).
CoreInterval = next(result for result, struct in conversion.PAIRS if struct is schemas.Interval)
CoreClassicalInterval = next(result for result, struct in conversion.PAIRS if struct is schemas.ClassicalInterval)


@dataclass
class RenamedStandardError:
    """A DescriptorValue's core result with ``standard_error`` renamed."""

    value: float | None
    estimator: str
    standard_error_under_normality: float | None = None
    interval: None = None
    bootstrap_standard_error: float | None = None
    classical_interval: None = None


@dataclass
class IntervalWithoutMethod:
    low: float | None
    high: float | None
    level: float


@dataclass
class IntervalWithWidth:
    low: float | None
    high: float | None
    level: float
    method: str
    width: float


@dataclass
class QuantileWithBrokenInterval:
    """A Quantile whose nested interval type lacks a field: found by walking, not at the top."""

    probability: float
    value: float | None
    interval: IntervalWithoutMethod | None = None
    standard_error: float | None = None
    classical_interval: CoreClassicalInterval | None = None


@dataclass
class QuantileWithPlainInterval:
    probability: float
    value: float | None
    interval: tuple[float, float] | None = None
    standard_error: float | None = None
    classical_interval: CoreClassicalInterval | None = None


@dataclass
class Values:
    a: float


@dataclass
class RecordHolder:
    members: dict[str, Values]


class Member(schemas.Message):
    a: float


class RecordWithDefault(schemas.Message):
    first: Member
    second: Member | None = None


class Holder(schemas.Message):
    members: RecordWithDefault


def _struct_types_reachable_from(roots: list[type]) -> set[type]:
    found: set[type] = set()
    pending = list(roots)
    while pending:
        struct = pending.pop()
        if struct in found:
            continue
        found.add(struct)
        for hint in typing.get_type_hints(struct).values():
            pending.extend(conversion.structs_in(hint))
    return found


def test_every_response_struct_is_paired_with_a_checked_core_result():
    paired = {struct for _, struct in conversion.PAIRS}
    responses = [struct for _, struct in conversion.ROOTS]
    reachable = _struct_types_reachable_from(responses)
    # Every Struct inside a converted response is itself converted from a checked core type.
    assert reachable - paired == {schemas.Descriptors}  # the record read from the core's mapping
    assert len(conversion.PAIRS) >= 30


def test_every_pair_has_the_same_fields_on_both_sides_but_the_declared_exceptions():
    for result, struct in conversion.PAIRS:
        result_fields = {f.name for f in dataclasses.fields(result)}
        struct_fields = {f.name for f in msgspec.structs.fields(struct)}
        assert struct_fields - result_fields == set(conversion.FILLED_BY_EDGE.get(struct, {})), struct
        assert result_fields - struct_fields == set(conversion.NOT_SENT.get(struct, {})), struct


def test_a_renamed_field_with_a_default_would_pass_silently_without_the_check():
    renamed = RenamedStandardError(value=1.0, estimator="x", bootstrap_standard_error=0.25)
    silent = msgspec.convert(renamed, schemas.DescriptorValue, from_attributes=True)
    assert silent.standard_error is None  # the hazard: the value is lost, and nothing says so
    with pytest.raises(ConversionMismatch, match=r"\['standard_error'\].*\['bootstrap_standard_error'\]"):
        to_message(renamed, schemas.DescriptorValue)


@pytest.mark.parametrize(
    ("result", "message"),
    [
        (IntervalWithoutMethod, r"Interval fields \['method'\] are not fields of the core's IntervalWithoutMethod"),
        (IntervalWithWidth, r"IntervalWithWidth fields \['width'\] are not sent"),
    ],
)
def test_a_field_missing_on_either_side_fails(result, message):
    with pytest.raises(ConversionMismatch, match=message):
        check(((result, schemas.Interval),))


def test_a_mismatch_in_a_nested_result_fails():
    with pytest.raises(ConversionMismatch, match=r"Interval fields \['method'\] are not fields of the core's IntervalWithoutMethod"):
        check(((QuantileWithBrokenInterval, schemas.Quantile),))


def test_a_record_from_a_mapping_must_have_only_required_members():
    with pytest.raises(ConversionMismatch, match="RecordWithDefault.second has a default"):
        check(((RecordHolder, Holder),))


def test_a_stale_exception_fails(monkeypatch):
    monkeypatch.setitem(conversion.NOT_SENT, schemas.Interval, {"width": "no longer computed"})
    with pytest.raises(ConversionMismatch, match=r"exceptions declared for Interval no longer hold for \['width'\]"):
        check(((CoreInterval, schemas.Interval),))
    monkeypatch.undo()
    assert check(((CoreInterval, schemas.Interval),)) == {(CoreInterval, schemas.Interval)}


def test_a_nested_result_sent_as_a_plain_value_fails():
    # A (low, high) pair where the Struct expects an Interval: msgspec would reject it only when one is sent.
    with pytest.raises(ConversionMismatch, match="one side is a nested result, the other is not"):
        check(((QuantileWithPlainInterval, schemas.Quantile),))


def _description(**options):
    data = from_samples(np.array([3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0]), omit_missing=False)
    return describe(data, DescribeOptions(**options), kind="samples")


def test_a_description_missing_a_descriptor_fails_at_conversion():
    description = _description()
    del description.descriptors["medcouple"]
    with pytest.raises(ConversionMismatch, match="lacks \\['medcouple'\\], which it does not list as absent"):
        to_message(description, schemas.DescriptionResponse)
    description.descriptors["medcouple"] = description.descriptors["median"]
    description.descriptors["unheard_of"] = description.descriptors["median"]
    with pytest.raises(msgspec.ValidationError, match="unknown field `unheard_of`"):
        to_message(description, schemas.DescriptionResponse)


def test_converted_results_carry_the_cores_values():
    description = _description(interval=IntervalOptions(resamples=200, seed=7))
    message = to_message(description, schemas.DescriptionResponse)
    assert message.descriptors.mean.value == description.descriptors["mean"].value
    assert message.descriptors.mean.standard_error == description.descriptors["mean"].standard_error
    assert message.descriptors.mean.standard_error is not None
    assert message.descriptors.mean.interval.low == description.descriptors["mean"].interval.low
    assert [q.value for q in message.quantiles] == [q.value for q in description.quantiles]
    assert message.resampling.seed == 7
    assert message.scores is None and message.partial_state is None  # filled by the edge, not here

    scores = standardize(description, [2.0, 8.0])
    converted = to_message(scores, schemas.Scores)
    assert [p.z for p in converted.points] == [p.z for p in scores.points]

    state = partial_state(np.array([1.0, 2.0, 4.0]))
    sent = to_message(state, schemas.PartialState)
    assert sent.central_sums == list(state.central_sums) and sent.count == state.count

    data = from_samples(np.array([1.0, 2.0, 2.0, 5.0]), omit_missing=False)
    comparison = compare(data, data, DescribeOptions(), kinds=("samples", "samples"))
    answer = to_message(comparison, schemas.ComparisonResponse)
    assert answer.differences["mean"].value == comparison.differences["mean"].value == 0.0
