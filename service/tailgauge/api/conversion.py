"""From core results to response Structs, field for field, failing loudly on any mismatch.

``msgspec.convert(result, Struct, from_attributes=True)`` reads each Struct field from the
result's attribute of the same name; but a Struct field with a default that the result lacks
silently takes the default, and a result field the Struct lacks is silently dropped. So a core
field renamed would turn into a ``null`` on the wire. Here every (core result type, response
Struct) pair reachable from :data:`ROOTS` is checked once, at import, by walking the type hints
of both sides: every Struct field must be a field of the result type, and every field of the
result type must be read, except the exceptions declared below with their reasons (and those
must still be true). A mismatch is a :class:`ConversionMismatch` naming both types and fields.

A core mapping (``dict[str, Descriptor]``) sent as a Struct of named members (``Descriptors``)
is checked at each conversion: an unknown key is msgspec's error. Its members may only default
to UNSET (absent from the answer), for what ``options.descriptors`` leaves out, so a missing key
is checked here instead: every descriptor the result does not list in ``absent`` must be in its
mapping (:func:`_leave_out`).

Members a result lists in ``absent`` (left out by ``options.descriptors``) are sent as UNSET,
so they are absent from the answer, not null.
"""

from __future__ import annotations

import dataclasses
import types
import typing
from typing import Any, TypeVar

import msgspec

from tailgauge.api import schemas
from tailgauge.core import Comparison, Description, GroupDescription, PartialState, Scores
from tailgauge.core.compare import Contrasts
from tailgauge.core.groups import Described, Shared
from tailgauge.core.registry import SCALAR_DESCRIPTORS
from tailgauge.figures import PlotData

Message = TypeVar("Message", bound=msgspec.Struct)

# Response Struct -> {field: why the edge fills it itself after converting}. Such a field has a
# default and no counterpart in the core result.
FILLED_BY_EDGE: dict[type, dict[str, str]] = {
    schemas.DescriptionResponse: {
        "scores": "standardize() scores options.score against the description afterwards",
        "partial_state": "state_of() is computed beside the description when options.partial_state asks",
        "plot_data": "tailgauge.figures.plot_data() reads the input beside the description when options.plot_data asks",
    },
    schemas.MergedDescriptionResponse: {
        "scores": "standardize() scores options.score against the description afterwards",
        "partial_state": "the merged state itself, returned so merges can be merged again",
        "plot_data": "merged states carry no values to draw: always null",
    },
    schemas.ComparisonResponse: {"scores": "standardize() scores options.score against the first input"},
    schemas.GroupDescription: {
        "plot_data": "tailgauge.figures.plot_data() reads each group's values beside its description when options.plot_data asks",
    },
}
# Response Struct -> {core field: why it is not sent}.
_ABSENT = "names the members options.descriptors leaves out: they are sent as absent (UNSET)"
NOT_SENT: dict[type, dict[str, str]] = {
    schemas.DescriptionResponse: {
        "sketches": "only merged states read quantiles from sketches (MergedDescriptionResponse.sketches)",
        "absent": _ABSENT,
    },
    schemas.MergedDescriptionResponse: {"absent": _ABSENT},
    schemas.ComparisonResponse: {"absent": _ABSENT},
    schemas.GroupDescription: {
        "sketches": "only merged states read quantiles from sketches (MergedDescriptionResponse.sketches)",
        "absent": _ABSENT,
    },
    schemas.Resampling: {"replicates": "the bootstrap replicates, kept in process for contrasts"},
    schemas.Scores: {"warnings": "added to the response's own warnings list"},
}
# Every core result the edge converts, with the Struct it becomes.
ROOTS: tuple[tuple[type, type], ...] = (
    (Description, schemas.DescriptionResponse),
    (Description, schemas.MergedDescriptionResponse),
    (Comparison, schemas.ComparisonResponse),
    (GroupDescription, schemas.GroupDescription),
    (Contrasts, schemas.BaselineContrasts),
    (Scores, schemas.Scores),
    (PartialState, schemas.PartialState),
    (PlotData, schemas.PlotData),
)


class ConversionMismatch(TypeError):
    """A core result type and its response Struct do not have the same fields."""


def _is_struct(kind: Any) -> bool:
    return isinstance(kind, type) and issubclass(kind, msgspec.Struct)


def _is_result(kind: Any) -> bool:
    return isinstance(kind, type) and dataclasses.is_dataclass(kind)


def _named(hint: Any, accept) -> set[type]:
    """The classes ``accept`` recognises anywhere inside ``hint`` (unions, lists, tuples, dict values)."""
    if accept(hint):
        return {hint}
    found: set[type] = set()
    for argument in typing.get_args(hint):
        found |= _named(argument, accept)
    return found


def structs_in(hint: Any) -> set[type]:
    """The Struct types anywhere inside a type hint (``list[Quantile] | None`` -> ``{Quantile}``)."""
    return _named(hint, _is_struct)


def _is_mapping(hint: Any) -> bool:
    if isinstance(hint, types.UnionType) or typing.get_origin(hint) is typing.Union:
        return any(_is_mapping(argument) for argument in typing.get_args(hint))
    return typing.get_origin(hint) is dict


def _hints(kind: type) -> dict[str, Any]:
    try:
        return typing.get_type_hints(kind)
    except NameError as error:  # an annotation naming a type its module does not import at run time
        raise ConversionMismatch(f"cannot read the field types of {kind.__qualname__}: {error}") from error


def _one(classes: set[type], where: str) -> type:
    if len(classes) != 1:
        names = sorted(c.__name__ for c in classes) or ["no result or Struct type"]
        raise ConversionMismatch(f"{where}: expected one nested type, found {names}")
    return next(iter(classes))


def _record_members(record: type, result: type, field: str) -> list[msgspec.structs.FieldInfo]:
    """A Struct of named members read from a core mapping: each member pairs with the mapping's values."""
    members = []
    for member in msgspec.structs.fields(record):
        if member.required is False and member.default is not msgspec.UNSET:
            raise ConversionMismatch(
                f"{record.__name__}.{member.name} has a default, so a key missing from the core's "
                f"{result.__name__}.{field} mapping would be sent as that default instead of failing"
            )
        members.append(member)
    return members


def _fields(result: type, struct: type) -> list[tuple[type, type]]:
    """Check one pair's fields; return the nested pairs it reaches."""
    result_names = [f.name for f in dataclasses.fields(result)]
    struct_names = [f.name for f in msgspec.structs.fields(struct)]
    filled = FILLED_BY_EDGE.get(struct, {})
    not_sent = NOT_SENT.get(struct, {})
    problems = []
    missing = [n for n in struct_names if n not in result_names and n not in filled]
    if missing:
        problems.append(f"{struct.__name__} fields {missing} are not fields of the core's {result.__name__}")
    unread = [n for n in result_names if n not in struct_names and n not in not_sent]
    if unread:
        problems.append(f"{result.__name__} fields {unread} are not sent: {struct.__name__} has no such field")
    stale = [n for n in filled if n in result_names or n not in struct_names]
    stale += [n for n in not_sent if n not in result_names or n in struct_names]
    if stale:
        problems.append(f"the exceptions declared for {struct.__name__} no longer hold for {stale}")
    if problems:
        raise ConversionMismatch("; ".join(problems))

    result_hints = _hints(result)
    struct_hints = _hints(struct)
    nested: list[tuple[type, type]] = []
    for name in (n for n in struct_names if n in result_names):
        results = _named(result_hints[name], _is_result)
        structs = structs_in(struct_hints[name])
        where = f"{result.__name__}.{name} -> {struct.__name__}.{name}"
        if _is_mapping(result_hints[name]) and structs and not _is_mapping(struct_hints[name]):
            record = _one(structs, where)
            values = _one(results, where)
            record_hints = _hints(record)
            for member in _record_members(record, result, name):
                kind = _one(structs_in(record_hints[member.name]), f"{where}.{member.name}")
                nested.append((values, kind))
        elif results and structs:
            nested.append((_one(results, where), _one(structs, where)))
        elif results or structs:
            raise ConversionMismatch(f"{where}: one side is a nested result, the other is not")
    return nested


def check(roots: tuple[tuple[type, type], ...] = ROOTS) -> frozenset[tuple[type, type]]:
    """Every (core result type, Struct) pair reachable from ``roots``, each checked; or a mismatch."""
    seen: set[tuple[type, type]] = set()
    pending = list(roots)
    while pending:
        pair = pending.pop()
        if pair in seen:
            continue
        seen.add(pair)
        pending.extend(_fields(*pair))
    return frozenset(seen)


PAIRS = check()


def to_message(result: Any, struct: type[Message]) -> Message:
    """``result`` (a core result) as ``struct``; a pair not checked at import is checked first."""
    global PAIRS
    pair = (type(result), struct)
    if pair not in PAIRS:
        PAIRS = PAIRS | check((pair,))
    return msgspec.convert(_leave_out(result), struct, from_attributes=True)


def _leave_out(result: Any) -> Any:
    """``result`` as a mapping of its fields without the members it lists in ``absent`` (so the
    Struct's UNSET default leaves them absent on the wire), nested descriptions too (a
    comparison's first and second); ``result`` itself when nothing is absent.

    A description's ``descriptors`` must hold every descriptor it does not list as absent: a
    missing one is a :class:`ConversionMismatch`, never a member silently left out."""
    absent = set(getattr(result, "absent", ()))
    mapping = getattr(result, "descriptors", None)
    if isinstance(mapping, dict):
        missing = [name for name in SCALAR_DESCRIPTORS if name not in mapping and name not in absent]
        if missing:
            raise ConversionMismatch(f"{type(result).__name__}.descriptors lacks {missing}, which it does not list as absent")
    nested = {side: getattr(result, side) for side in ("first", "second") if getattr(getattr(result, side, None), "absent", ())}
    if not absent and not nested:
        return result
    names = {f.name for f in dataclasses.fields(result)}
    fields = {name: getattr(result, name) for name in names if name not in absent}
    fields.update({side: _leave_out(description) for side, description in nested.items()})
    return fields


def group_messages(described: Described) -> list[schemas.GroupDescription]:
    """Every group's answer. A group described together with others (:class:`Shared`) is the
    template's answer, converted once by :func:`to_message`, with the group's own key, size,
    descriptor values and quantile values put in: what converting its whole description would
    give (tests/api/test_groups.py checks each group against the samples endpoint alone)."""
    template: schemas.GroupDescription | None = None
    messages = []
    for entry in described.entries:
        if not isinstance(entry, Shared):
            messages.append(to_message(entry, schemas.GroupDescription))
            continue
        if template is None:
            template = to_message(described.description(entry), schemas.GroupDescription)
            names = described.together.names
            values = {name: getattr(template.descriptors, name) for name in names}
            quantiles = template.quantiles
        numbers = entry.numbers
        messages.append(msgspec.structs.replace(
            template,
            key=entry.key,
            size=msgspec.structs.replace(
                template.size,
                n=numbers.n,
                total_weight=float(numbers.n),
                distinct_values=None if template.size.distinct_values is None else numbers.distinct,
            ),
            descriptors=msgspec.structs.replace(
                template.descriptors,
                **{name: msgspec.structs.replace(values[name], value=numbers.value(name)) for name in names},
            ),
            quantiles=quantiles if quantiles is msgspec.UNSET else [
                msgspec.structs.replace(q, value=v) for q, v in zip(quantiles, numbers.quantiles)
            ],
            partial_state=None if entry.partial_state is None else to_message(entry.partial_state, schemas.PartialState),
        ))
    return messages


__all__ = [
    "FILLED_BY_EDGE", "NOT_SENT", "PAIRS", "ROOTS", "ConversionMismatch", "check", "group_messages", "structs_in",
    "to_message",
]
