"""Many groups of one request: planned together, the basic descriptors computed together, every
other group described alone by ``describe``, each contrasted with a baseline group on request."""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

from tailgauge.core import cost
from tailgauge.core.compare import Contrasts, contrast
from tailgauge.core.describe import DescribeOptions, Description, check_description, describe, restricted
from tailgauge.core.describe.assembly import input_shape, planned
from tailgauge.core.errors import DescriptorError, LimitExceeded, Location, UncomputableInput
from tailgauge.core.groups import vectorised
from tailgauge.core.groups.keys import Key, group_seed, sort_key
from tailgauge.core.partial import PartialState, state_of
from tailgauge.core.scoring import Scores, standardize
from tailgauge.core.weighted import WeightedData

GroupOrder = Literal["as_sent", "by_key"]
# What contrasting a group with the baseline reads of both, shown or not: the standardized mean
# difference's mean and standard deviation (the differences and ratios read what is shown).
READ_BY_CONTRASTS = ("mean", "standard_deviation")


@dataclass(frozen=True)
class Group:
    """One group: its key, its data, and the request field it came from (``groups[3]``; empty
    for the columnar form, whose groups have no field of their own)."""

    key: Key
    data: WeightedData
    field: str = ""


@dataclass
class GroupDescription(Description):
    """A group's answer: its description as the samples endpoint gives it for the group alone
    (restricted to what ``options.descriptors`` shows, with ``options.score``'s scores and
    ``options.partial_state``'s state), its key, and its contrasts with the baseline group."""

    key: Key = ""
    contrasts: Contrasts | None = None
    scores: Scores | None = None
    partial_state: PartialState | None = None


def whole_shape(groups: list[Group], options: DescribeOptions) -> cost.Shape:
    """Every group's values as one input, which is what the point descriptors of all groups
    hold and touch (the vectorised path stacks them; the others are described in turn)."""
    entries = sum(g.data.count for g in groups)
    return cost.Shape(
        entries=entries, rows=entries, draws=entries, bins=False, multinomial=True, poisson=False, picks=False,
        subset_rows=0, ordered=options.order == "as_sent",
    )


def admit_groups(groups: list[Group], options: DescribeOptions) -> cost.Estimate:
    """Plan the memory and time of describing ``groups`` (``cost.admit``): without intervals the
    point descriptors of all values at once; with them each group's bootstrap in turn, whose
    resampling work also counts against one budget for the whole request. Each group is planned
    as ``describe`` plans one input (``input_shape``), with every term its options set."""
    interval = options.interval
    if interval is None:
        return planned([whole_shape(groups, options)], options, None)
    shapes = [input_shape(g.data, options) for g in groups]
    work = cost.resampling_work(shapes, interval.resamples)
    if work > options.max_resample_work:
        rows = cost.resampling_work(shapes, 1)
        allowed = int(options.max_resample_work // rows)
        raise LimitExceeded(
            detail=(
                f"resampling every group touches {work:.3g} rows, beyond this server's resampling budget "
                f"of {options.max_resample_work:.3g}; lower options.interval.resamples to at most {allowed}"
            ),
            locations=[Location("options.interval.resamples", f"at most {allowed} for these groups")],
        )
    return planned(shapes, options, interval, separately=True)


def group_options(options: DescribeOptions, key: Key) -> DescribeOptions:
    """The options a group is described by: the request's, with the group's own seed."""
    if options.interval is None:
        return options
    return dataclasses.replace(options, interval=dataclasses.replace(options.interval, seed=group_seed(options.interval.seed, key)))


def _for_group(group: Group, function, *args, **kwargs):
    """``function(*args, **kwargs)``; a core error names the group, and its data fields are placed
    under the group's field (``values[2]`` -> ``groups[3].values[2]``)."""
    try:
        return function(*args, **kwargs)
    except DescriptorError as error:
        locations = [
            loc
            if loc.path.startswith(("options", "$")) or not group.field
            else Location(f"{group.field}.{loc.path}", loc.message)
            for loc in error.locations
        ]
        if group.field and any(loc.path.startswith("options") for loc in error.locations):
            # An option this group's data cannot meet: the group is named beside the option.
            locations.append(Location(f"{group.field}.values", "the group whose data the option does not apply to"))
        raise type(error)(detail=f"group {group.key!r}: {error.detail}", locations=locations) from None


def describe_groups(
    groups: list[Group],
    options: DescribeOptions,
    *,
    order: GroupOrder = "as_sent",
    baseline: Key | None = None,
    score: Sequence[float] = (),
    partial_state_order: int | None = None,
) -> Described:
    """Describe every group by ``options``, as ``describe`` describes each group alone.

    Keys are unique (the caller checks). ``order``: ``"as_sent"`` keeps the groups' order,
    ``"by_key"`` sorts them by :func:`~tailgauge.core.groups.keys.sort_key`. ``baseline``: the key
    of the group every group (itself included) is contrasted with, as the comparison contrasts its
    second input with its first; an unknown key is an error located at ``options.baseline``.

    With ``options.interval`` each group is resampled with its own seed
    (:func:`~tailgauge.core.groups.keys.group_seed`), which its ``resampling.seed`` reports.
    Degenerate groups (one value, constant values) are outcomes, as for ``describe``: null
    descriptors and warnings in that group's answer. ``score``: values scored against each group
    (``scoring.standardize``); ``partial_state_order``: each group's mergeable state of that order
    (``partial.state_of``); ``None``: none.
    """
    selection = options.descriptors
    base_index = None
    if baseline is not None:
        base_index = next((i for i, g in enumerate(groups) if g.key == baseline and type(g.key) is type(baseline)), None)
        if base_index is None:
            raise UncomputableInput.at("options.baseline", f"no group has the key {baseline!r}")
        if selection is not None:
            options = dataclasses.replace(options, descriptors=selection.also(READ_BY_CONTRASTS))
    if not options.admitted:
        admit_groups(groups, options)
        options = dataclasses.replace(options, admitted=True)
    _check_groups(groups, options)
    # Without a baseline or scores nothing reads what the answers do not show: the groups
    # described together stay numbers on one restricted template.
    shown_only = base_index is None and selection is not None and not score
    together = vectorised.describe_together([g.data for g in groups], options, shown_only=shown_only)
    shared = {} if together is None else together.numbers

    def described(index: int) -> Description:
        if index in shared:
            return together.description(shared[index])
        group = groups[index]
        return _for_group(group, describe, group.data, group_options(options, group.key), kind="samples")

    base = None if base_index is None else described(base_index)
    entries: list[GroupDescription | Shared] = []
    for index, group in enumerate(groups):
        state = None
        if partial_state_order is not None:
            state = _for_group(group, state_of, group.data, order=partial_state_order)
        if shown_only and index in shared:
            entries.append(Shared(group.key, shared[index], state))
            continue
        description = base if index == base_index else described(index)
        contrasts = None
        if base is not None:
            contrasts = contrast((base, description), (groups[base_index].data, group.data), options.interval, selection)
        scores = standardize(description, score) if score else None
        # Each group's replicates served its contrasts: only the baseline's are kept meanwhile.
        description = restricted(_without_replicates(description), selection)
        fields = {f.name: getattr(description, f.name) for f in _DESCRIPTION_FIELDS}
        if scores is not None:
            fields["warnings"] = [*description.warnings, *scores.warnings]
        entries.append(GroupDescription(**fields, key=group.key, contrasts=contrasts, scores=scores, partial_state=state))
        _on_time(options)
    if order == "by_key":
        entries.sort(key=lambda entry: sort_key(entry.key))
    return Described(entries, together)


@dataclass(slots=True)
class Shared:
    """A group described together with others: its key, its numbers on the template (see
    :class:`Described`) and its partial state when asked for."""

    key: Key
    numbers: vectorised.Numbers
    partial_state: PartialState | None = None


@dataclass(frozen=True)
class Described:
    """What :func:`describe_groups` returns, in the answer's order: each group as a
    :class:`GroupDescription`, or as :class:`Shared` numbers on ``together``'s template (a
    restricted description shared by the groups described together; converting it once and
    putting each group's numbers in saves building every group's description)."""

    entries: list[GroupDescription | Shared]
    together: vectorised.Together | None

    def descriptions(self) -> list[GroupDescription]:
        """Every group's full description, shared ones built from the template."""
        return [entry if isinstance(entry, GroupDescription) else self.description(entry) for entry in self.entries]

    def description(self, entry: Shared) -> GroupDescription:
        assert self.together is not None
        description = self.together.description(entry.numbers)
        fields = {f.name: getattr(description, f.name) for f in _DESCRIPTION_FIELDS}
        return GroupDescription(**fields, key=entry.key, partial_state=entry.partial_state)


def _check_groups(groups: list[Group], options: DescribeOptions) -> None:
    """Every rule options and data must meet together (``check_description``), for every group,
    before any group is computed: a group the options do not apply to is refused at once, not
    after the groups before it were described. Groups the vectorised path takes are alike in all
    that the rules read but their length, so one of each length is checked."""
    together = vectorised.applies(options)
    lengths = set()
    for group in groups:
        if together and vectorised.ordinary(group.data):
            if group.data.count in lengths:
                continue
            lengths.add(group.data.count)
        _for_group(group, check_description, group.data, options)


_DESCRIPTION_FIELDS = dataclasses.fields(Description)


def _without_replicates(description: Description) -> Description:
    if description.resampling is None or description.resampling.replicates is None:
        return description
    return dataclasses.replace(description, resampling=dataclasses.replace(description.resampling, replicates=None))


def _on_time(options: DescribeOptions) -> None:
    """The wall-clock check between groups (each group checks its own stages too)."""
    if options.deadline is not None and time.monotonic() > options.deadline:
        raise LimitExceeded(
            detail="the groups were not all described within this server's time limit; send fewer groups or values",
            locations=[Location("", "too many groups or values to describe in time")],
        )
