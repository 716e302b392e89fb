"""The basic descriptors of many raw samples at once: mean, variance, standard deviation,
median, extremes, range, IQR and quantiles of every group, bit for bit what ``describe`` gives
for each group alone.

Groups of one length are stacked as the rows of one array for their power sums
(:func:`tailgauge.core.moments.row_power_sums`, ``central_sums``' one-pass arithmetic row by
row: a pairwise sum follows the length) and one sort of the rows; the sorted groups are laid end
to end, and everything else is computed once for all groups: the acceptance test and
re-centring (:func:`~tailgauge.core.moments.finish_row_sums`) and the order-statistic rules of
:mod:`tailgauge.core.order_rules` over :class:`Segments` (each group a sorted sample, read by
index as ``SortedRow`` reads one). So no number here has an arithmetic of its own.

A group takes this path when the request asks for nothing else (``options.descriptors`` within
:data:`VECTORISED`, no intervals) and its data are ordinary: unit weights, nothing omitted, at
least two values and not all equal, at most ``ROW_SUMS_AT_MOST`` values, power sums accepted
by the one-pass test, every result finite and normal, and no +0 tied with -0 (whose order a sort
leaves open). Every other group is described alone by ``describe``: so are the degenerate ones,
whose answers carry warnings about themselves.
"""

from __future__ import annotations

import dataclasses
from collections import defaultdict
from dataclasses import dataclass

import numpy as np

from tailgauge.core import order_rules
from tailgauge.core.describe import (
    DescribeOptions,
    Description,
    Descriptor,
    Quantile,
    Size,
    check_description,
    describe,
    restricted,
)
from tailgauge.core.describe.assembly import NOT_COMPUTED
from tailgauge.core.moments import ROW_SUMS_AT_MOST, finish_row_sums, row_power_sums, variance_factor
from tailgauge.core.registry import SCALAR_DESCRIPTORS
from tailgauge.core.weighted import WeightedData

# What this path computes; a selection computing anything else describes each group alone.
VECTORISED = frozenset(
    ("mean", "variance", "standard_deviation", "median", "minimum", "maximum", "range", "interquartile_range", "quantiles")
)
# The smallest normal float64: scale_by_power_of_two reads anything smaller as not representable.
_NORMAL = 2.0**-1021


def applies(options: DescribeOptions) -> bool:
    """Whether ``options`` ask for nothing beyond :data:`VECTORISED` (and no intervals)."""
    return options.interval is None and options.descriptors is not None and options.descriptors.computed <= VECTORISED


class Segments:
    """Rows of unit weights over sorted samples laid end to end (row ``r`` at positions
    ``offsets[r] .. offsets[r] + sizes[r] - 1`` of the flat array): the order-statistic rules' row
    interface (:class:`tailgauge.core.order_rules.Rows`) as ``SortedRow`` gives it for one row,
    shifted to each row's place."""

    prefers_search = True
    unit_sorted = True

    def __init__(self, offsets: np.ndarray, sizes: np.ndarray) -> None:
        self.count = sizes.size
        self.total = sizes.astype(np.float64)
        self._sizes = sizes[:, None]
        self._offsets = offsets[:, None]

    def first_reaching(self, target: np.ndarray) -> np.ndarray:
        return np.clip(np.ceil(target), 1, self._sizes).astype(np.intp) - 1 + self._offsets


def ordinary(data: WeightedData) -> bool:
    """Whether ``data`` are a raw sample this path can take (its numbers decide the rest)."""
    return data.weights is None and not data.binned and data.omitted == 0 and 2 <= data.count <= ROW_SUMS_AT_MOST


@dataclass(slots=True)
class Numbers:
    """What a group described together has of its own: its size, the values of the descriptors
    this path computes and of the requested quantiles (row ``row`` of columns shared by every
    group described together). Everything else of its description is the template's
    (:class:`Together`)."""

    n: int
    distinct: int
    columns: dict[str, list[float]]  # descriptor name -> one value per row
    requested: list[list[float]]  # the requested quantiles, one list per row
    row: int

    def value(self, name: str) -> float:
        return self.columns[name][self.row]

    @property
    def values(self) -> dict[str, float]:
        return {name: column[self.row] for name, column in self.columns.items()}

    @property
    def quantiles(self) -> list[float]:
        return self.requested[self.row]


@dataclass(frozen=True)
class Together:
    """The groups this path described: ``numbers`` by index, and ``template``, ``describe``'s own
    description of one of them (restricted to what the answer shows when asked), which every
    other one shares but for its :class:`Numbers`. The template describes no group by itself
    here: :meth:`description` gives each group's."""

    template: Description
    numbers: dict[int, Numbers]
    # The descriptors whose values come from ``Numbers`` (the others are the template's).
    names: tuple[str, ...]

    def description(self, numbers: Numbers) -> Description:
        """The description of the group of ``numbers``, as ``describe`` (or ``restricted``) gives it."""
        template = self.template
        descriptors = dict(template.descriptors)
        for name in self.names:
            descriptors[name] = Descriptor(numbers.value(name), template.descriptors[name].estimator)
        return dataclasses.replace(
            template,
            size=self.size(numbers),
            descriptors=descriptors,
            quantiles=[Quantile(q.probability, v) for q, v in zip(template.quantiles, numbers.quantiles)],
        )

    def size(self, numbers: Numbers) -> Size:
        distinct = None if self.template.size.distinct_values is None else numbers.distinct
        return Size(n=numbers.n, total_weight=float(numbers.n), omitted=0, distinct_values=distinct, zero_weight=0,
                    effective_n=None)


def describe_together(
    datas: list[WeightedData], options: DescribeOptions, *, shown_only: bool = False
) -> Together | None:
    """The groups this path takes (``None``: none); the caller describes the others alone.
    ``options`` are admitted (planned) by the caller. ``shown_only``: each description as
    ``describe.restricted`` leaves it (what the answer shows), not as ``describe`` returns it."""
    if not applies(options):
        return None
    indices = [index for index, data in enumerate(datas) if ordinary(data)]
    if not indices:
        return None
    computed = _numbers([datas[i] for i in indices], indices, options)
    if not computed:
        return None
    # The template: the first group this path took, described alone.
    first = min(computed)
    template = describe(datas[first], options, kind="samples")
    shown = restricted(template, options.descriptors)
    if shown.warnings or not _same(Together(template, computed, ()), computed[first]):
        return None  # never expected: the shared arithmetic is tested; every group is then described alone
    if shown_only:
        template = shown
    else:
        # Only what this path computes is shared; the rest of the template's own (hidden) values
        # would belong to the template's group alone.
        skipped = Descriptor(None, NOT_COMPUTED)
        own = template.descriptors
        template = dataclasses.replace(
            template,
            warnings=[],
            descriptors={
                name: own[name] if name in VECTORISED and own[name].value is not None else skipped
                for name in SCALAR_DESCRIPTORS
            },
        )
    names = tuple(name for name, d in template.descriptors.items() if name in VECTORISED and d.value is not None)
    return Together(template, computed, names)


def _numbers(datas: list[WeightedData], indices: list[int], options: DescribeOptions) -> dict[int, Numbers]:
    """The numbers of the ordinary groups ``datas`` (at ``indices``), keyed by index, the groups
    this path cannot take left out.

    Per length, the groups' values stacked as rows give their power sums and, one sort of the
    rows, their sorted values, laid end to end with every other length's (pairwise sums follow
    the length, so rows of one length are summed together); everything else once for all groups:
    the acceptance test and re-centring, the variance, and the order statistics read from the
    sorted values by :class:`Segments`.
    """
    basis = check_description(datas[0], options)
    order = max(options.moment_order, 4)
    sizes = np.array([d.count for d in datas], dtype=np.intp)
    offsets = np.concatenate(([0], np.cumsum(sizes)[:-1])).astype(np.intp)
    sums = np.empty((order + 1, len(datas)))
    shift = np.empty(len(datas))
    # Distinct values of each group: 1 + its sorted neighbours that differ (-0.0 equals 0.0).
    counted = np.empty(len(datas), dtype=np.intp)
    by_length: dict[int, list[int]] = defaultdict(list)
    for position, size in enumerate(sizes.tolist()):
        by_length[size].append(position)
    # Groups all of one length: their sorted rows are the groups laid end to end (no copy).
    ordered = None if len(by_length) == 1 else np.empty(int(sizes.sum()))
    for n, positions in by_length.items():
        rows = np.empty((len(positions), n))
        for row, position in zip(rows, positions):
            row[...] = datas[position].values
        part_sums = np.empty((order + 1, len(positions)))
        part_shift = np.empty(len(positions))
        row_power_sums(rows, order, part_sums, part_shift)
        sums[:, positions] = part_sums
        shift[positions] = part_shift
        rows.sort(axis=1)
        counted[positions] = np.count_nonzero(rows[:, 1:] != rows[:, :-1], axis=1) + 1
        if ordered is None:
            ordered = rows.reshape(-1)
        elif positions[-1] - positions[0] == len(positions) - 1:  # consecutive groups: one stretch
            start = int(offsets[positions[0]])
            ordered[start : start + rows.size] = rows.ravel()
        else:
            ordered[(offsets[positions][:, None] + np.arange(n)).ravel()] = rows.ravel()
    assert ordered is not None
    first, last = offsets, offsets + sizes - 1
    minimum, maximum = ordered[first], ordered[last]
    constant = minimum == maximum
    found = finish_row_sums(sums, shift, order, constant)
    factor = variance_factor(basis.variance_rule, sizes.astype(np.float64))
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        variance = found.sums[2] / found.sums[0] * factor
        sd = np.sqrt(variance)
        spread = maximum - minimum
        segments = Segments(offsets, sizes)
        probabilities = np.concatenate(([0.25, 0.75], np.asarray(options.probabilities, dtype=np.float64)))
        assert basis.quantile_type is not None
        quantiles = order_rules.hf_quantiles(segments, ordered, probabilities, basis.quantile_type)
        median = order_rules.median(segments, ordered, whole=True, average=True)
        iqr = quantiles[:, 1] - quantiles[:, 0]
    mixed_zeros = np.zeros(len(datas), dtype=bool)
    if np.any((minimum <= 0.0) & (maximum >= 0.0)):  # some groups may hold zeros of both signs
        zeros = ordered == 0.0
        negative_zeros = _per_segment(zeros & np.signbit(ordered), first, last)
        mixed_zeros = (negative_zeros > 0) & (negative_zeros < _per_segment(zeros, first, last))
    ok = (
        ~constant
        & found.accepted
        & ~mixed_zeros
        & np.isfinite(found.mean)
        & (np.abs(variance) >= _NORMAL) & np.isfinite(variance)
        & (np.abs(sd) >= _NORMAL) & np.isfinite(sd)
        & np.isfinite(spread)
        & np.isfinite(iqr)
        & np.all(np.isfinite(quantiles), axis=1)
    )
    columns = {
        "mean": found.mean, "variance": variance, "standard_deviation": sd, "median": median, "minimum": minimum,
        "maximum": maximum, "range": spread, "interquartile_range": iqr,
    }
    lists = {name: column.tolist() for name, column in columns.items()}
    requested = quantiles[:, 2:].tolist()
    counts = counted.tolist()
    n_of = sizes.tolist()
    return {indices[row]: Numbers(n_of[row], counts[row], lists, requested, row) for row in np.flatnonzero(ok).tolist()}


def _per_segment(flags: np.ndarray, first: np.ndarray, last: np.ndarray) -> np.ndarray:
    """How many of ``flags[first[r] .. last[r]]`` are set, for each segment ``r`` (none when
    ``first[r] > last[r]``)."""
    running = np.concatenate(([0], np.cumsum(flags, dtype=np.intp)))
    return np.maximum(running[last + 1] - running[first], 0)


def _same(together: Together, numbers: Numbers) -> bool:
    """Whether ``describe``'s own answer for a group has the numbers and size this path computed
    for it (so the template has nothing of its own group but these)."""
    template = together.template
    if template.size != together.size(numbers):
        return False
    for name, value in numbers.values.items():
        shown = template.descriptors[name].value
        if shown is not None and shown != value:
            return False
    return all(q.value == v for q, v in zip(template.quantiles, numbers.quantiles))
