"""msgspec's error texts in plain words (service/tailgauge/api/wording.py).

Each kind of text msgspec produces is triggered by decoding a real body against a small Struct
written here (so the texts are msgspec's own, not copies), and its rewording is checked: what
it must say, and that nothing of msgspec's type syntax is left. An enum.Enum field is read like
a Literal one, so the messages keep listing values when options become named enum types.
"""

from __future__ import annotations

import enum
import json
from typing import Annotated, Literal

import msgspec
import pytest
from msgspec import Meta

from tailgauge.api import wording
from tailgauge.api.media import JSON_CODEC, MSGPACK_CODEC
from tailgauge.api.problems import invalid_body
from tailgauge.api.schemas import ComparisonRequest, SamplesRequest
from tailgauge.api.schemas.common import Finite, Float64Bytes, Message, NonNegative, Observation


class Method(str, enum.Enum):
    PERCENTILE = "percentile"
    BASIC = "basic"
    BCA = "bca"


class Inner(Message):
    method: Method = Method.BCA
    family: Literal["g1", "G1", "b1"] | None = None
    level: Annotated[float, Meta(gt=0.0, lt=1.0)] = 0.95
    order: Annotated[int, Meta(ge=1, le=12)] = 4


class Body(Message):
    values: Annotated[list[Observation], Meta(min_length=1)] | Float64Bytes
    weights: list[NonNegative] | Float64Bytes | None = None
    shift: Finite = 0.0
    flag: bool = False
    label: str = ""
    inner: Inner = msgspec.field(default_factory=Inner)
    inners: Annotated[list[Inner], Meta(max_length=2)] = msgspec.field(default_factory=list)


def problem_of(body, codec=JSON_CODEC, kind=Body):
    raw = json.dumps(body).encode() if codec is JSON_CODEC else msgspec.msgpack.encode(body)
    try:
        codec.decode(raw, kind)
    except msgspec.MsgspecError as error:
        problem = invalid_body(error, raw, codec, kind)
        (location,) = problem.errors
        return location.path, location.message, problem.detail, str(error)
    raise AssertionError(f"{body!r} decoded")


def assert_plain(*texts: str) -> None:
    for text in texts:
        assert "`" not in text and "Expected" not in text and "NoneType" not in text, text


@pytest.mark.parametrize("codec", [JSON_CODEC, MSGPACK_CODEC], ids=["json", "msgpack"])
def test_an_enum_type_lists_its_values_like_a_literal(codec):
    path, message, detail, raw = problem_of({"values": [1], "inner": {"method": "BCa"}}, codec)
    assert raw.startswith("Invalid enum value 'BCa'")
    assert path == "$.inner.method"
    assert message == "'BCa' is not one of: percentile, basic, bca (values are case-sensitive: did you mean 'bca'?)"
    path, message, _, _ = problem_of({"values": [1], "inner": {"family": "g3"}}, codec)
    assert message == "'g3' is not one of: g1, G1, b1, or null"
    # A value in the wrong case is pointed to the one it matches, also beside values differing only in case.
    _, message, _, _ = problem_of({"values": [1], "inner": {"family": "B1"}}, codec)
    assert "did you mean 'b1'" in message
    _, message, _, _ = problem_of({"values": [1], "inner": {"method": 3}}, codec)
    assert message == "expected one of: percentile, basic, bca; got a whole number"
    assert_plain(message, detail)


def test_type_errors_say_what_the_field_takes():
    cases = [
        ("values", "1,2,3", "$.values", "a string here must be base64 of little-endian float64 bytes"),
        ("values", 3, "$.values", "expected an array of numbers, or base64 of little-endian float64 bytes"
                                  " (8 per value); got a whole number"),
        ("values", ["a"], "$.values[0]", "expected a number or null; got a string"),
        ("weights", {"a": 1}, "$.weights", "expected an array of numbers, or base64 of little-endian float64"
                                           " bytes (8 per value), or null; got an object"),
        ("shift", "x", "$.shift", "expected a number; got a string"),
        ("flag", 1, "$.flag", "expected true or false; got a whole number"),
        ("label", 1.5, "$.label", "expected a string; got a number"),
        ("inner", [1], "$.inner", "expected an object; got an array"),
        ("inners", {}, "$.inners", "expected an array of objects; got an object"),
    ]
    for name, value, where, says in cases:
        body = {"values": [1.0], name: value}
        path, message, detail, raw = problem_of(body)
        assert path == where, (name, raw)
        assert message.startswith(says), (name, message)
        assert_plain(message, detail)
    _, message, _, _ = problem_of({"values": [1.0], "inner": {"order": 2.5}})
    assert message == "expected a whole number, written without a decimal point; got a number with a decimal point"
    _, message, _, _ = problem_of({"values": "1,2,3"}, MSGPACK_CODEC)
    assert message == ("expected an array of numbers, or a MessagePack bin of little-endian float64 bytes "
                       "(8 per value); got a string")


def test_bounds_and_lengths_say_both_ends_when_the_type_has_both():
    expectations = [
        ({"inner": {"order": 13}}, "$.inner.order", "must be a whole number from 1 to 12"),
        ({"inner": {"level": 1.0}}, "$.inner.level", "must be a number above 0 and below 1"),
        ({"weights": [-1.0]}, "$.weights[0]", "must be a finite number, at least 0"),
        ({"values": []}, "$.values", "must hold at least 1 entry"),
        ({"inners": [{}, {}, {}]}, "$.inners", "must hold at most 2 entries"),
        ({"values": "AAAA"}, "$.values", "the base64 string must decode to at least 8 bytes (8 bytes per float64 value)"),
    ]
    for changes, where, says in expectations:
        path, message, detail, _ = problem_of({"values": [1.0], **changes})
        assert (path, message) == (where, says)
        assert detail == f"The request body does not match the schema at {where}: {says}"


def test_nan_and_infinity_in_messagepack_are_refused_as_not_finite():
    path, message, _, raw = problem_of({"values": [1.0, float("nan")]}, MSGPACK_CODEC)
    assert raw.startswith("Expected `float` >= -1.79")
    assert (path, message) == ("$.values[1]", "must be a finite number (NaN and Infinity are not accepted); "
                                              "null marks a missing value")
    _, message, _, _ = problem_of({"values": [1.0], "shift": float("inf")}, MSGPACK_CODEC)
    assert message == "must be a finite number (NaN and Infinity are not accepted)"


def test_unknown_and_missing_fields_name_the_field_and_what_is_accepted():
    path, message, _, _ = problem_of({"values": [1.0], "wieghts": [1.0]})
    assert path == "$.wieghts"
    assert message == ("unknown field 'wieghts' (did you mean 'weights'?); the fields accepted here are: "
                       "values, weights, shift, flag, label, inner, inners")
    path, message, _, _ = problem_of({})
    assert path == "$.values"
    assert message.startswith("required field 'values' is missing; it takes an array of numbers")


def test_a_comparison_input_is_read_as_the_kind_it_says():
    body = {"first": {"kind": "table", "outcomes": [{"value": 1, "weight": 1}], "weight_kind": "counts",
                      "options": {"missing": "omit"}},
            "second": {"kind": "samples", "values": [1.0]}}
    for codec in (JSON_CODEC, MSGPACK_CODEC):
        path, message, _, _ = problem_of(body, codec, ComparisonRequest)
        assert path == "$.first.options.missing"
        assert message == "unknown field 'missing'; the fields accepted here are: normalize"
    body["first"] = {"kind": "quantile_sketch"}
    path, message, _, _ = problem_of(body, JSON_CODEC, ComparisonRequest)
    assert (path, message) == ("$.first.kind", "'quantile_sketch' is not one of: samples, table, bins, histogram")
    # A histogram input is read as its layout says (the layout is the histogram's own tag).
    body["first"] = {"kind": "histogram"}
    path, _, _, _ = problem_of(body, JSON_CODEC, ComparisonRequest)
    assert path == "$.first.layout"
    # The type at a path through a union, without the body: the members' answers pooled.
    pooled = wording.fields_at(ComparisonRequest, "$.first")
    assert {"kind", "values", "outcomes", "edges", "counts"} <= set(pooled)


def test_syntax_errors_keep_their_byte_and_name_json_tokens():
    for text, says in [
        (b'{"values": [1, NaN]}', "NaN and Infinity are not JSON numbers; send finite numbers (byte 15)"),
        (b'{"values": [1, -Infinity]}', "NaN and Infinity are not JSON numbers"),
        (b'{"values": [1 2]}', "expected ',' or ']' (byte 14)"),
        (b'{"values": [1]} x', "unexpected characters after the complete JSON value (byte 17)"),
        (b"", "the body is empty; send one JSON object"),
        (b'{"values": [1', "the body ends before its value is complete"),
    ]:
        with pytest.raises(msgspec.DecodeError) as caught:
            JSON_CODEC.decode(text, SamplesRequest)
        problem = invalid_body(caught.value, text, JSON_CODEC, SamplesRequest)
        assert says in problem.errors[0].message, (text, problem.errors[0].message)
        assert_plain(problem.errors[0].message, problem.detail)
    packed = b"\x81\xa6values\xc1"
    with pytest.raises(msgspec.DecodeError) as caught:
        MSGPACK_CODEC.decode(packed, SamplesRequest)
    problem = invalid_body(caught.value, packed, MSGPACK_CODEC, SamplesRequest)
    assert problem.errors[0].message == "0xc1 begins no MessagePack value (byte 8)"


def test_a_text_outside_the_table_loses_its_type_syntax():
    assert wording.plain("Expected `int | null` somewhere new", "$") == "expected a whole number or null somewhere new"
    assert wording.plain("Odd `thing` here", "$", None, None, "MessagePack") == "odd thing here"
    assert wording.plain("value must be positive", "$") == "value must be positive"
