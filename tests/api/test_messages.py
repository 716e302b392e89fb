"""Every 400 the edge gives for a bad body says, in plain words, what the field accepts.

For each compute operation of the endpoint table, bad bodies are made from its own request
example by walking its request Struct's type hints (written here, independently of
``tailgauge.api.wording``, which reads the same hints its own way): every enum option gets a
value it does not accept, every field a value of the wrong kind, every bound a value past it,
every object an unknown field and each of its required fields left out, and float64-bytes
fields a base64 string that is not base64. Each body is sent as JSON and as MessagePack. Each
answer must name the path where the bad value was put, list the accepted values of an enum
exactly as the Struct's type declares them, and carry no library or internal names.
"""

from __future__ import annotations

import copy
import enum
import json
import re
import types
import typing
from dataclasses import dataclass, field, replace
from typing import Annotated, Any, Literal, Union

import msgspec
import pytest
from litestar.testing import TestClient

from tailgauge.api import create_app
from tailgauge.api.operations import OPERATIONS
from tailgauge.settings import Settings

COMPUTE = [op for op in OPERATIONS if op.method == "post" and op.request is not None]
BY_ID = {op.operation_id: op for op in COMPUTE}
# Texts that belong to the implementation, never to a message: msgspec's type syntax, Python's
# type names, our underscore-prefixed identifiers.
BANNED = ("`", "Expected `", "msgspec", "Struct", "NoneType", "float |", "int |", "| None", "typing.", "Annotated",
          "Literal[", "<class", "Traceback", "tailgauge.")
PRIVATE_NAME = re.compile(r"(?<![\w$.\[])_[A-Za-z]\w*")
MISSING = object()


@dataclass(frozen=True)
class Case:
    operation: str
    name: str
    segments: tuple  # where the change is made in the body
    value: Any  # the value put there (MISSING: the field is removed)
    path: str  # the path the problem must name
    allowed: tuple | None = None  # an enum's accepted values, from the Struct's type
    says: tuple[str, ...] = ()  # fragments the message must hold
    # A case inside a tagged union: the valid input of its tag put first at ``within``.
    within: tuple = ()
    input_body: Any = field(default=None, compare=False)

    @property
    def id(self) -> str:
        return f"{self.operation}:{self.path}:{self.name}"

    def __hash__(self) -> int:
        return hash(self.id)


# ---- the Struct's own type hints, read here -----------------------------------------------


def members_of(tp, bounds: dict | None = None) -> list[tuple[Any, dict]]:
    """(type, Meta constraints met on the way) of each member of a union, else of ``tp`` itself."""
    bounds = dict(bounds or {})
    while typing.get_origin(tp) is Annotated:
        tp, *metadata = typing.get_args(tp)
        for meta in metadata:
            if isinstance(meta, msgspec.Meta):
                bounds.update({k: getattr(meta, k) for k in ("ge", "gt", "le", "lt", "min_length", "max_length")
                               if getattr(meta, k) is not None})
    if typing.get_origin(tp) in (Union, types.UnionType):
        return [pair for member in typing.get_args(tp) for pair in members_of(member, bounds)]
    return [(tp, bounds)]


def enum_values(tp) -> tuple | None:
    if typing.get_origin(tp) is Literal:
        return typing.get_args(tp)
    if isinstance(tp, type) and issubclass(tp, enum.Enum):
        return tuple(member.value for member in tp)
    return None


def hints(cls) -> dict[str, Any]:
    return typing.get_type_hints(cls, include_extras=True)


def required(cls) -> list[str]:
    return [f.name for f in msgspec.structs.fields(cls) if f.required]


def path_of(segments) -> str:
    return "$" + "".join(f"[{s}]" if isinstance(s, int) else f".{s}" for s in segments)


def is_struct(tp) -> bool:
    return isinstance(tp, type) and issubclass(tp, msgspec.Struct)


def tagged_inputs() -> dict[str, dict]:
    """A valid comparison input of each kind, from the kinds' own endpoint examples."""
    inputs = {}
    for operation, kind in (("describeSamples", "samples"), ("describeTable", "table"), ("describeBins", "bins"),
                              ("describeHistogram", "histogram")):
        body = {k: v for k, v in copy.deepcopy(BY_ID[operation].example).items() if k != "options"}
        inputs[kind] = {"kind": kind, **body}
    return inputs


def wrong_kind_cases(operation, segments, tp, bounds) -> list[Case]:
    """A value of the wrong kind for a field of type ``tp``, and values past its bounds."""
    path = path_of(segments)
    members = members_of(tp)
    bases = [m for m, _ in members if m is not type(None)]
    cases = []
    allowed = tuple(v for m in bases for v in (enum_values(m) or ()))
    if allowed:
        cases.append(Case(operation, "enum", segments, "Not-An-Option", path, allowed=allowed))
        cases.append(Case(operation, "enum-wrong-type", segments, 7, path, says=("one of:",)))
        return cases
    if any(is_struct(m) for m in bases):
        cases.append(Case(operation, "object-wrong-type", segments, [1, 2], path, says=("an object",)))
        return cases
    lists = [(m, b) for m, b in members if typing.get_origin(m) is list]
    if lists:
        says = ["an array"]
        if any(m is bytes for m in bases):
            says.append("float64 bytes")
        cases.append(Case(operation, "array-wrong-type", segments, 17, path, says=tuple(says)))
        item_type = typing.get_args(lists[0][0])[0]
        list_bounds = lists[0][1]
        item_members = [m for m, _ in members_of(item_type)]
        example = 0.5 if any(m in (float, int) for m in item_members) else None
        if "min_length" in list_bounds and list_bounds["min_length"] > 0:
            cases.append(Case(operation, "too-short", segments, [], path,
                              says=(str(list_bounds['min_length']), "entr")))
        if "max_length" in list_bounds and list_bounds["max_length"] <= 20_000 and example is not None:
            high = list_bounds["max_length"]
            cases.append(Case(operation, "too-long", segments, [example] * (high + 1), path,
                              says=(f"{high} entries",)))
        if not any(is_struct(m) for m in item_members):
            cases += wrong_kind_cases(operation, segments + (0,), item_type, {})
        return cases
    if any(m is bool for m in bases):
        cases.append(Case(operation, "bool-wrong-type", segments, "yes", path, says=("true or false", "a string")))
        return cases
    numbers = [(m, b) for m, b in members if m in (int, float)]
    if numbers:
        base, number_bounds = numbers[0]
        words = "a whole number" if base is int else "a number"
        if not any(m is str for m in bases):  # where a string is also allowed (a group key) "12" is right
            cases.append(Case(operation, "number-wrong-type", segments, "12", path, says=(words, "got a string")))
        if base is int:
            cases.append(Case(operation, "fraction-for-integer", segments, 2.5, path, says=("a whole number",)))
        low = number_bounds.get("ge", number_bounds.get("gt"))
        high = number_bounds.get("le", number_bounds.get("lt"))
        if low is not None and low > -1e308:
            shown = str(int(low)) if float(low).is_integer() else str(low)
            below = low - 1 if "ge" in number_bounds else low
            cases.append(Case(operation, "below-bound", segments, below, path, says=(shown,)))
        if high is not None and high < 1e308:
            shown = str(int(high)) if float(high).is_integer() else str(high)
            above = high + 1 if "le" in number_bounds else high
            cases.append(Case(operation, "above-bound", segments, above, path, says=(shown,)))
        return cases
    if any(m is str for m in bases):
        cases.append(Case(operation, "string-wrong-type", segments, 5, path, says=("a string",)))
    return cases


def struct_cases(operation: str, cls, segments: tuple, present: dict) -> list[Case]:
    """Cases for the Struct ``cls`` sent at ``segments`` (``present``: the valid value sent there)."""
    cases = []
    fields = hints(cls)
    config = cls.__struct_config__
    accepted = ([config.tag_field] if config.tag_field else []) + [f.encode_name for f in msgspec.structs.fields(cls)]
    cases.append(Case(operation, "unknown-field", segments + ("bogus_field",), 1, path_of(segments + ("bogus_field",)),
                      says=("unknown field 'bogus_field'", *accepted)))
    for name in required(cls):
        cases.append(Case(operation, "missing", segments + (name,), MISSING, path_of(segments + (name,)),
                          says=(f"'{name}'", "missing")))
    for name, tp in fields.items():
        where = segments + (name,)
        members = [m for m, _ in members_of(tp) if m is not type(None)]
        structs = [m for m in members if is_struct(m)]
        tagged = [m for m in structs if m.__struct_config__.tag_field is not None]
        if tagged:
            inputs = tagged_inputs()
            tag_field = tagged[0].__struct_config__.tag_field
            cases.append(Case(operation, "tag", where + (tag_field,), "sketch", path_of(where + (tag_field,)),
                              allowed=tuple(m.__struct_config__.tag for m in tagged)))
            for member in tagged:
                tag = member.__struct_config__.tag
                cases += [replace(case, name=f"{tag}-{case.name}", within=where, input_body=inputs[tag])
                          for case in struct_cases(operation, member, where, inputs[tag])]
            continue
        if structs:
            cases += wrong_kind_cases(operation, where, tp, {})
            inner = present.get(name) if isinstance(present, dict) else None
            cases += struct_cases(operation, structs[0], where, inner if isinstance(inner, dict) else {})
            continue
        list_members = [m for m in members if typing.get_origin(m) is list]
        item_structs = [m for lst in list_members for m, _ in members_of(typing.get_args(lst)[0]) if is_struct(m)]
        if item_structs:
            cases += wrong_kind_cases(operation, where, tp, {})
            sent = present.get(name) if isinstance(present, dict) else None
            first = sent[0] if isinstance(sent, list) and sent else {}
            cases += struct_cases(operation, item_structs[0], where + (0,), first)
            continue
        cases += wrong_kind_cases(operation, where, tp, {})
    return cases


def float64_bytes_cases(operation: str) -> list[Case]:
    """A string where float64 bytes or numbers belong, which is not base64 (the issue's "1,2,3")."""
    cases = []
    for name, tp in hints(BY_ID[operation].request).items():
        members = [m for m, _ in members_of(tp)]
        if bytes in members and any(typing.get_origin(m) is list for m in members):
            cases.append(Case(operation, "not-base64", (name,), "1,2,3", f"$.{name}",
                              says=("base64", "little-endian float64", "an array of numbers")))
            cases.append(Case(operation, "base64-too-short", (name,), "AAAA", f"$.{name}", says=("8 bytes",)))
    return cases


def all_cases() -> list[Case]:
    cases = []
    for op in COMPUTE:
        cases += struct_cases(op.operation_id, op.request, (), op.example)
        cases += float64_bytes_cases(op.operation_id)
    unique = {case.id: case for case in cases}
    return list(unique.values())


CASES = all_cases()


def build(case: Case) -> dict:
    body = copy.deepcopy(BY_ID[case.operation].example)
    if case.within:
        place(body, case.within, copy.deepcopy(case.input_body))
    place(body, case.segments, case.value)
    return body


def place(body, segments, value) -> None:
    """Put ``value`` at ``segments`` of ``body``, making the containers on the way (an index appends)."""
    node = body
    for segment, following in zip(segments, segments[1:]):
        empty = [] if isinstance(following, int) else {}
        if isinstance(segment, int):
            if segment >= len(node):
                node.append(empty)
        elif not isinstance(node.get(segment), type(empty)):
            node[segment] = empty
        node = node[segment]
    last = segments[-1]
    if value is MISSING:
        node.pop(last, None)
    elif isinstance(last, int) and last >= len(node):
        node.append(value)
    else:
        node[last] = value


@pytest.fixture(scope="module")
def client():
    with TestClient(create_app(Settings(request_log=False))) as client:
        yield client


def send(client, case: Case, media: str):
    body = build(case)
    content = json.dumps(body).encode() if media == "application/json" else msgspec.msgpack.encode(body)
    response = client.post(BY_ID[case.operation].path, content=content, headers={"Content-Type": media})
    return response, response.json()


def jargon(text: str) -> list[str]:
    found = [word for word in BANNED if word in text]
    return found + PRIVATE_NAME.findall(text)


def listed(message: str) -> list[str]:
    """The values an enum message lists after "one of: "."""
    match = re.search(r"one of: ([^;()]*)", message)
    assert match, message
    return [item.strip() for item in match[1].split(",") if item.strip() and not item.strip().startswith("or ")]


def test_the_cases_cover_every_compute_operation_and_kind_of_mistake():
    assert {case.operation for case in CASES} == set(BY_ID)
    names = {case.name.split("-", 1)[-1] if case.name.startswith(("samples-", "table-", "bins-")) else case.name
             for case in CASES}
    assert {"enum", "tag", "unknown-field", "missing", "number-wrong-type", "array-wrong-type", "bool-wrong-type",
            "object-wrong-type", "below-bound", "above-bound", "too-short", "not-base64"} <= names, names
    assert sum(case.allowed is not None for case in CASES) >= 20
    assert len(CASES) > 200


@pytest.mark.parametrize("media", ["application/json", "application/msgpack"])
def test_every_bad_body_is_answered_at_its_path_in_plain_words(client, media):
    wrong = {}
    for case in CASES:
        response, problem = send(client, case, media)
        errors = problem.get("errors") or []
        messages = [e["message"] for e in errors]
        faults = []
        if response.status_code != 400 or problem.get("type") != "urn:tailgauge:problem:invalid-body":
            faults.append(f"status {response.status_code} {problem.get('type')}")
        if [e["path"] for e in errors] != [case.path]:
            faults.append(f"paths {[e['path'] for e in errors]}")
        for text in [problem.get("detail", ""), *messages]:
            if jargon(text):
                faults.append(f"jargon {jargon(text)} in {text!r}")
        if messages and case.allowed is not None:
            if sorted(map(str, listed(messages[0]))) != sorted(map(str, case.allowed)):
                faults.append(f"lists {listed(messages[0])}, the type allows {case.allowed}")
        says = case.says
        if case.name.endswith("not-base64") and media != "application/json":
            says = ("an array of numbers", "MessagePack bin of little-endian float64")
        if case.name.endswith("base64-too-short") and media != "application/json":
            says = ("an array of numbers", "got a string")
        for fragment in says:
            if messages and fragment not in messages[0]:
                faults.append(f"{fragment!r} not in {messages[0]!r}")
        if faults:
            wrong[case.id] = faults
    assert wrong == {}, json.dumps(wrong, indent=1)


def test_an_enum_value_in_the_wrong_case_is_pointed_to_the_right_one(client):
    body = {"values": [1.0, 2.0, 3.0, 4.0], "options": {"interval": {"method": "BCa"}}}
    problem = client.post("/v1/descriptors/samples", json=body).json()
    (error,) = problem["errors"]
    assert error["path"] == "$.options.interval.method"
    assert error["message"].startswith("'BCa' is not one of: ")
    assert "did you mean 'bca'?" in error["message"]
    assert "$.options.interval.method" in problem["detail"]
