"""The columnar form of groups: values with one key per value, split into one sample per key."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from tailgauge.core.errors import DescriptorError, LimitExceeded, Location, UncomputableInput
from tailgauge.core.groups.describing import Group
from tailgauge.core.groups.keys import Key
from tailgauge.core.weighted import WeightMeaning, from_samples


def from_columns(
    values: Sequence[float | None] | np.ndarray,
    keys: Sequence[Key],
    weights: Sequence[float] | np.ndarray | None,
    *,
    omit_missing: bool,
    meaning: WeightMeaning,
    max_groups: int,
) -> list[Group]:
    """One group per distinct key, in the order of each key's first appearance, holding that
    key's values in the order sent; each group's data by :func:`~tailgauge.core.weighted.from_samples`
    (its rules, and its errors located at the positions of ``values`` and ``weights`` as sent).

    ``keys`` must have one entry per value (``keys``, 422), and name at most ``max_groups`` keys
    (``keys``, 422 ``limit-exceeded``). Equal values of different types are different keys.
    """
    array = np.asarray(values, dtype=np.float64)
    if len(keys) != array.size:
        raise UncomputableInput.at(
            "keys", f"has {len(keys)} entries but values has {array.size}; give one key per value"
        )
    if weights is not None and len(weights) != array.size:
        raise UncomputableInput.at(
            "weights", f"has {len(weights)} entries but values has {array.size}; give one weight per value"
        )
    index: dict[Key, int] = {}
    codes = np.fromiter((index.setdefault(key, len(index)) for key in keys), dtype=np.intp, count=array.size)
    if len(index) > max_groups:
        raise LimitExceeded(
            detail=f"keys name {len(index)} groups; this server describes at most {max_groups} groups per request",
            locations=[Location("keys", f"at most {max_groups} distinct keys")],
        )
    order = np.argsort(codes, kind="stable")
    bounds = np.cumsum(np.bincount(codes, minlength=len(index)))
    starts = np.concatenate(([0], bounds[:-1]))
    grouped = array[order]
    weight_array = None if weights is None else np.asarray(weights, dtype=np.float64)[order]
    groups = []
    for code, key in enumerate(index):
        start, stop = int(starts[code]), int(bounds[code])
        try:
            data = from_samples(
                grouped[start:stop],
                omit_missing=omit_missing,
                weights=None if weight_array is None else weight_array[start:stop],
                meaning=meaning,
            )
        except DescriptorError as error:
            raise type(error)(
                detail=f"group {key!r}: {error.detail}",
                locations=[_as_sent(location, order, start) for location in error.locations],
            ) from None
        groups.append(Group(key, data))
    return groups


def _as_sent(location: Location, order: np.ndarray, start: int) -> Location:
    """A group's ``values[i]`` (or ``weights[i]``) as the position it was sent at."""
    field, bracket, rest = location.path.partition("[")
    if not bracket or field not in ("values", "weights"):
        return location
    position = int(rest.rstrip("]"))
    return Location(f"{field}[{int(order[start + position])}]", location.message)
