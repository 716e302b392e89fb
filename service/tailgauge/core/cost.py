"""What a request will cost before it runs: the memory and time of each stage, from sizes alone.

Every compute request is planned here after its input is normalised (so the support size is
known) and before anything else is computed. Each stage's working memory and time come from
the sizes that drive it: values n, support rows k, requested probabilities q, resamples B,
the rows m of a little-bootstrap subset, and bins. A request whose peak memory is beyond
``max_bytes`` or whose time is beyond the seconds left is refused at once
(:class:`LimitExceeded`) with what would fit, and that advice is itself admitted when resent.

The memory figures are upper bounds measured with tracemalloc on the stages themselves
(tests/core/test_cost.py checks them against the measured peaks); the time figures are
per-element costs measured on a 2-core machine with a margin (``make bench`` prints the model
beside measured times in tests/benchmarks/cost.py). The wall-clock deadline, checked inside
every long stage, stays the safety net for a slower machine.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass

from tailgauge.core import resample, serial
from tailgauge.core.errors import LimitExceeded, Location
from tailgauge.core.resample.budget import (
    LMOMENT_BYTES_PER_ELEMENT,
    MEDCOUPLE_BYTES_PER_ELEMENT,
    medcouple_fits,
    medcouple_table_entries,
    medcouple_work,
)
from tailgauge.core.resample.blocks import chunk_bytes
from tailgauge.core.resample.draws import BATCH_ELEMENTS, batch_size, tops_up
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Statistics every resample records besides the quantiles (resample.INTERVAL_DESCRIPTORS and
# the quartiles), as float64 per resample.
_RECORDED = len(resample.INTERVAL_DESCRIPTORS) + 4
# Normalised input arrays per entry (values, weights, sort order, support values and weights).
NORMALISED_BYTES_PER_ENTRY = 32
# Point descriptors of n entries: sort, order statistics, medcouple, L-moments, modes, tails
# (tracemalloc peak 93.5 bytes per value at n = 2e6 raw lognormal samples, December 2026).
POINT_BYTES_PER_ENTRY = 104
# Seconds per entry x log2(entries) of the point descriptors (0.26 s for 2e6 raw samples since
# the medcouple's threshold search, 6.2e-9 per entry x log2; was 1.43 s): with a margin for
# slower or busier machines.
POINT_SECONDS = 12e-9
# Seconds per resampled element (resample x support row) drawn and reduced, by how counts are
# drawn; and per order statistic looked up in a resample.
DRAW_SECONDS = {"multinomial": 300e-9, "poisson": 25e-9, "picks": 60e-9, "subset": 220e-9}
# Seconds per observation index of a block resample (drawn, mapped to its support row, counted;
# 8-68 ns measured on the 2-core machine, the stationary scheme slowest).
BLOCK_DRAW_SECONDS = 120e-9
# Seconds per value x log2(2 x value) of a series' autocovariances (one real FFT each way of 2n;
# 7-12 ns measured for n = 1e5 and 2e6 on the 2-core machine, 30 at n = 1000).
SERIAL_SECONDS = 25e-9
LOOKUP_SECONDS = 120e-9
# Seconds per resampled element of the L-moments (plotting positions, their powers and four
# matrix-vector products over each row; measured about 3.4 ns on the 2-core machine).
LMOMENT_SECONDS = 8e-9
# Order statistics every resample looks up besides the requested quantiles: the median, and the
# quartiles and octiles of the quantile-based shape (distinct from the requested ones or not).
SHAPE_LOOKUPS = 10
# Seconds per element of the medcouple's work (resample.budget.medcouple_work: bisection gathers
# and table entries), when the engine resamples it: tests/benchmarks/cost.py measured about 16 ns
# for 150 distinct values (hundreds of medians, so mostly tables) and far less for a table of 100
# outcomes (few medians).
MEDCOUPLE_SECONDS = 20e-9
# Seconds per leave-one-out row and order statistic (a search over the support each).
JACKKNIFE_LOOKUP_SECONDS = 300e-9
# Seconds per (row x bin) of the grouped MAD, in resamples and in the jackknife.
GROUPED_MAD_SECONDS = 150e-9
# The tail statistics of a resample (trimmed, winsorized, geometric, harmonic means, Hill's
# index, the tail means): up to three prefix sums over the support (core.quantile_integrals), in
# parts of its PART_BYTES, and a few order-statistic lookups each; two more recorded values and
# lookups per tail level.
TAIL_SECONDS = 6e-9
TAIL_PASSES = 3
TAIL_LOOKUPS = 8
TAIL_PART_BYTES = 2 * (4 << 20)
# What every stage takes whatever the sizes (small arrays, the interpreter's own work).
STAGE_BYTES = 4 << 20
# Advice fits in this share of the seconds left, so it is admitted when resent a moment later.
ADVICE_TIME_SHARE = 0.95
STAGE_SECONDS = 0.02


@dataclass(frozen=True)
class Stage:
    """One stage of a request: its peak working memory (on top of the normalised input) and time."""

    name: str
    bytes: float
    seconds: float


@dataclass(frozen=True)
class Estimate:
    stages: tuple[Stage, ...]
    resident: float  # the normalised input, alive through every stage

    @property
    def peak_bytes(self) -> float:
        return self.resident + max((stage.bytes for stage in self.stages), default=0.0)

    @property
    def seconds(self) -> float:
        return sum(stage.seconds for stage in self.stages)


@dataclass(frozen=True)
class Shape:
    """The sizes that drive one input's cost."""

    entries: int  # values, outcomes or bins after normalising
    rows: int  # support rows a resample weighs (distinct values, entries, or bins)
    draws: int  # observations per resample
    bins: bool
    multinomial: bool  # whole counts: multinomial counts per resample
    poisson: bool  # raw sample of distinct values: Poisson counts topped up
    picks: bool  # resamples drawn as individual picks (b x draws indices)
    subset_rows: int  # m of the bag of little bootstraps, 0 for the ordinary bootstrap
    # A series sent with options.order as_sent: autocovariances, and resamples joined from blocks.
    ordered: bool = False


def shape_of(data: WeightedData, subset_rows: int, *, distinct: bool = True, ordered: bool = False) -> Shape:
    """The cost-driving sizes of ``data``, by the rules of ``resample.draws.plan_of`` and ``draw``
    (without building the plan's arrays).

    ``distinct=False``: a raw sample's support rows are taken as its count, an upper bound, so the
    data need not be sorted to plan a request that neither resamples nor asks for a sort."""
    if data.binned:
        rows = int(data.values.size)
        total = float(data.weights.sum()) if data.weights is not None else float(rows)
    elif not distinct and data.weights is None and "support" not in data.__dict__:
        rows = int(data.count)
        total = float(rows)
    else:
        support = data.support
        rows = int(support.values.size)
        total = float(support.weights.sum())
    integer = data.integer_weights and data.meaning is not WeightMeaning.RELIABILITY
    if integer:
        draws = int(round(total))
    else:
        rows = draws = int(data.count)
    multinomial = integer
    # Whole counts as many as the rows: each row holds one (bins aside, where empty bins count).
    poisson = tops_up(multinomial, draws, rows, unit_rows=True)
    picks = not ((multinomial and draws > 8 * rows) or poisson)
    subsets = 0
    if rows > subset_rows and not data.binned and not ordered:
        subsets = int(math.ceil(draws**resample.SUBSET_EXPONENT))
    return Shape(
        entries=int(data.count),
        rows=rows,
        draws=draws,
        bins=data.binned,
        multinomial=multinomial,
        poisson=poisson,
        picks=picks,
        subset_rows=subsets,
        ordered=ordered,
    )


def _log2(x: float) -> float:
    return math.log2(max(x, 2.0))


def point_stage(shape: Shape) -> Stage:
    n = shape.entries
    return Stage(
        "point descriptors", STAGE_BYTES + POINT_BYTES_PER_ENTRY * n, STAGE_SECONDS + POINT_SECONDS * n * _log2(n)
    )


def serial_stage(shape: Shape) -> Stage:
    """A series' autocovariances (effective n, block lengths): one FFT of the padded values."""
    n = shape.entries
    return Stage(
        "autocovariances",
        STAGE_BYTES + serial.AUTOCOVARIANCE_BYTES_PER_VALUE * n,
        STAGE_SECONDS + SERIAL_SECONDS * n * _log2(2 * n),
    )


def _per_element_bytes(shape: Shape) -> float:
    """Bytes of one batch's draws per (resample x support row), by how counts are drawn."""
    if shape.ordered:
        return 32.0  # int64 counts from block draws, float64 weights, prefix sums
    if shape.poisson:
        return 19.0  # byte counts, float64 weights, 32-bit prefix sums, 16-bit draws
    if shape.multinomial and shape.draws > 8 * shape.rows:
        return 32.0  # int64 counts, float64 weights, prefix sums
    ratio = shape.draws / max(shape.rows, 1)
    return 32.0 + 16.0 * ratio  # picks and their rows (int64), then counts, weights, prefix sums


def _lmoment_part(rows: int, shape: Shape) -> float:
    """The L-moments' dense rows: a part of at most ``EVALUATION_PART_BYTES``."""
    return min(float(resample.EVALUATION_PART_BYTES), rows * shape.rows * float(LMOMENT_BYTES_PER_ELEMENT))


def _medcouple(shape: Shape, rows: int, resamples: int, max_work: float, batch: int) -> tuple[float, float]:
    """(seconds, working bytes) of the medcouple's replicates when the engine resamples it
    (``resample.budget.medcouple_fits``; bins have none): its table of bounds and a part of
    dense rows."""
    if shape.bins or not medcouple_fits(rows, resamples, max_work):
        return 0.0, 0.0
    table = 2.0 * 4.0 * medcouple_table_entries(rows)
    part = min(float(resample.EVALUATION_PART_BYTES), batch * rows * float(MEDCOUPLE_BYTES_PER_ELEMENT))
    return MEDCOUPLE_SECONDS * medcouple_work(rows, resamples), table + part


def resampling_stages(
    shape: Shape, resamples: int, probabilities: int, method: str, threads: int, max_work: float = math.inf,
    tail_levels: int = 0,
) -> list[Stage]:
    """The bootstrap (or bag of little bootstraps) and, for BCa, the jackknife of one input;
    ``max_work``, the resampling budget, decides whether the medcouple is resampled;
    ``tail_levels``, the levels of the tail means, each two more statistics."""
    q = probabilities + SHAPE_LOOKUPS + TAIL_LOOKUPS + 2 * tail_levels
    recorded = (_RECORDED + probabilities + 2 * tail_levels) * 8.0
    tails_seconds = TAIL_SECONDS * TAIL_PASSES
    k = shape.rows
    stages = []
    part = float(resample.EVALUATION_PART_BYTES)
    if shape.subset_rows:
        m = shape.subset_rows
        per_subset = -(-resamples // resample.SUBSETS)
        drawn = per_subset * resample.SUBSETS
        batch = max(1, min(per_subset, BATCH_ELEMENTS // m))
        row_bytes = resample.evaluation_row_bytes(m, probabilities, bins=False)
        working = batch * m * 32.0 + min(batch, max(1, part // row_bytes)) * row_bytes
        working += min(part, batch * m * float(LMOMENT_BYTES_PER_ELEMENT)) + TAIL_PART_BYTES
        medcouple_seconds, medcouple_bytes = _medcouple(shape, m, drawn, max_work, batch)
        working += medcouple_bytes
        # The whole sample's plan (powers, cumulative counts), choosing a subset, its plan.
        subset = 80.0 * k + 8.0 * shape.entries + 64.0 * m
        stored = 2.0 * drawn * recorded  # the rounds, then stacked
        seconds = drawn * (
            DRAW_SECONDS["subset"] * m + LOOKUP_SECONDS * q * _log2(m) + LMOMENT_SECONDS * m + tails_seconds * m
        )
        seconds += medcouple_seconds
        memory = STAGE_BYTES + subset + working + stored + 2 * batch * recorded
        stages.append(Stage("bag of little bootstraps", memory, STAGE_SECONDS + seconds))
        return stages
    if shape.ordered:
        method = "percentile"  # BCa falls back: no jackknife of independent observations
    batch = batch_size(k, resamples, shape.poisson and not shape.ordered)
    batches = -(-resamples // batch)
    busy = max(1, min(threads, batches))
    row_bytes = resample.evaluation_row_bytes(k, probabilities, bins=shape.bins)
    evaluation = min(batch, max(1, part // row_bytes)) * row_bytes + _lmoment_part(batch, shape) + TAIL_PART_BYTES
    medcouple_seconds, medcouple_bytes = _medcouple(shape, k, resamples, max_work, batch)
    evaluation += medcouple_bytes
    per_thread = batch * k * _per_element_bytes(shape) + evaluation + 2.0 * batch * recorded
    if shape.ordered:
        per_thread += chunk_bytes(shape.draws)
    plan = 64.0 * k + (16.0 * shape.draws if shape.picks and shape.draws != k else 0.0)
    if shape.ordered:
        plan += 8.0 * shape.draws  # the support row of each observation
    stored = 2.0 * resamples * recorded
    if shape.ordered:
        draw = DRAW_SECONDS["picks"] + BLOCK_DRAW_SECONDS * shape.draws / max(k, 1)
    elif shape.poisson:
        draw = DRAW_SECONDS["poisson"]
    elif shape.picks:
        draw = DRAW_SECONDS["picks"] * max(1.0, shape.draws / max(k, 1))
    else:
        draw = DRAW_SECONDS["multinomial"]
    seconds = resamples * (draw * k + LOOKUP_SECONDS * q * _log2(batch * k) + (LMOMENT_SECONDS + tails_seconds) * k)
    if shape.bins:
        seconds += resamples * GROUPED_MAD_SECONDS * k
    seconds = (seconds + medcouple_seconds) / busy
    stages.append(Stage("bootstrap", STAGE_BYTES + plan + busy * per_thread + stored, STAGE_SECONDS + seconds))
    if method == "bca":
        row_bytes = resample.evaluation_row_bytes(k, probabilities, bins=shape.bins)
        evaluation = min(k, max(1, part // row_bytes)) * row_bytes
        if shape.bins:  # bins' L-moments read dense leave-one-out rows; others sum in O(k)
            evaluation += _lmoment_part(k, shape)
        else:
            evaluation += 8.0 * 5 * 4 * k  # five terms, their prefix and suffix sums, per position
        # The leave-one-out rows share a few medians (the data's and its neighbours'): k rows.
        jackknife_medcouple, medcouple_bytes = _medcouple(shape, k, k, max_work, k)
        evaluation += medcouple_bytes
        # The leave-one-out values of every row (filled part by part), and the part in hand.
        kept = 1.25 * k * recorded
        seconds = k * JACKKNIFE_LOOKUP_SECONDS * q + jackknife_medcouple
        if shape.bins:
            seconds += k * k * GROUPED_MAD_SECONDS
        memory = STAGE_BYTES + plan + stored / 2.0 + 48.0 * k + evaluation + kept
        stages.append(Stage("jackknife", memory, STAGE_SECONDS + seconds))
    return stages


def estimate(
    shapes: list[Shape],
    *,
    probabilities: int,
    resamples: int,
    method: str | None,
    threads: int,
    max_work: float = math.inf,
    tail_levels: int = 0,
) -> Estimate:
    """The stages of describing (one shape) or comparing (two shapes) inputs of these sizes.

    The inputs of a comparison are described one after the other, but the first one's
    replicates (and jackknife) are kept for the contrasts while the second is resampled.
    """
    resident = sum(NORMALISED_BYTES_PER_ENTRY * s.entries for s in shapes)
    stages: list[Stage] = []
    kept = 0.0
    for index, shape in enumerate(shapes):
        point = point_stage(shape)
        stages.append(Stage(f"{_side(index, shapes)}{point.name}", point.bytes + kept, point.seconds))
        if shape.ordered:
            own_serial = serial_stage(shape)
            stages.append(Stage(f"{_side(index, shapes)}{own_serial.name}", own_serial.bytes + kept, own_serial.seconds))
        if method is None:
            continue
        own = resampling_stages(shape, resamples, probabilities, method, threads, max_work, tail_levels)
        for stage in own:
            stages.append(Stage(f"{_side(index, shapes)}{stage.name}", stage.bytes + kept, stage.seconds))
        jackknife = method == "bca" and not shape.ordered
        kept += (_RECORDED + probabilities + 2 * tail_levels) * 8.0 * (resamples + (shape.rows if jackknife else 0))
    return Estimate(tuple(stages), float(resident))


def estimate_separately(
    shapes: list[Shape],
    *,
    probabilities: int,
    resamples: int,
    method: str | None,
    threads: int,
    max_work: float = math.inf,
    tail_levels: int = 0,
) -> Estimate:
    """The stages of describing inputs one after another with nothing kept between them (the
    groups of one request): their times add up, their working memory peaks at the largest.
    Inputs of the same shape are planned once and counted."""
    resident = sum(NORMALISED_BYTES_PER_ENTRY * s.entries for s in shapes)
    stages: list[Stage] = []
    for shape, count in Counter(shapes).items():
        one = estimate(
            [shape], probabilities=probabilities, resamples=resamples, method=method, threads=threads, max_work=max_work,
            tail_levels=tail_levels,
        )
        label = f"{count} input(s) of {shape.entries} entries: "
        stages.extend(Stage(label + stage.name, stage.bytes, stage.seconds * count) for stage in one.stages)
    return Estimate(tuple(stages), float(resident))


def _side(index: int, shapes: list[Shape]) -> str:
    return "" if len(shapes) == 1 else ("first input: " if index == 0 else "second input: ")


def resampling_work(shapes: list[Shape], resamples: int) -> float:
    """The resampling budget's measure (``resample.resampling_work``): resamples x rows (and, for
    a series, x the observations drawn in blocks)."""
    work = 0.0
    for shape in shapes:
        if shape.ordered:
            work += resamples * (shape.rows + shape.draws)
        elif shape.subset_rows:
            work += resample.SUBSETS * -(-resamples // resample.SUBSETS) * shape.subset_rows
        else:
            work += resamples * shape.rows
    return work


def _mib(x: float) -> str:
    return f"{x / 2**20:.0f} MiB"


def admit(
    shapes: list[Shape],
    *,
    probabilities: int,
    resamples: int,
    method: str | None,
    threads: int,
    max_bytes: float,
    seconds: float,
    max_work: float = math.inf,
    min_resamples: int = 100,
    separately: bool = False,
    tail_levels: int = 0,
) -> Estimate:
    """The estimate of a request, or :class:`LimitExceeded` naming what would fit.

    ``separately``: the inputs are described one after another (:func:`estimate_separately`),
    not compared.

    The advice is the largest resample count (a multiple of ``resample.SUBSETS`` when an input
    is resampled by little bootstraps, whose counts are rounded up to one) whose estimate fits;
    failing that, the largest number of probabilities, or the percentile method instead of BCa;
    failing all, fewer values.
    """
    planned = estimate_separately if separately else estimate
    wanted = planned(
        shapes, probabilities=probabilities, resamples=resamples, method=method, threads=threads, max_work=max_work,
        tail_levels=tail_levels,
    )
    if wanted.peak_bytes <= max_bytes and wanted.seconds <= seconds:
        return wanted  # the resampling budget alone is checked by the bootstrap, as before
    heaviest = max(wanted.stages, key=lambda s: s.bytes)
    slowest = max(wanted.stages, key=lambda s: s.seconds)
    over = []
    if wanted.peak_bytes > max_bytes:
        over.append(
            f"about {_mib(wanted.peak_bytes)} of memory at its peak ({heaviest.name}), beyond this server's "
            f"{_mib(max_bytes)} per request"
        )
    if wanted.seconds > seconds:
        over.append(
            f"about {wanted.seconds:.3g} s ({slowest.name} {slowest.seconds:.3g} s), beyond this server's "
            f"{seconds:.3g} s per request"
        )
    detail = "this request would take " + " and ".join(over)

    def fits(**change) -> bool:
        arguments = dict(
            probabilities=probabilities, resamples=resamples, method=method, threads=threads, tail_levels=tail_levels
        )
        arguments.update(change)
        e = planned(shapes, max_work=max_work, **arguments)
        work = resampling_work(shapes, arguments["resamples"]) if arguments["method"] is not None else 0.0
        # Advice must still fit when resent against the same deadline a moment later: the time
        # it leaves is a little less than now (ADVICE_TIME_SHARE of it).
        return e.peak_bytes <= max_bytes and e.seconds <= ADVICE_TIME_SHARE * seconds and work <= max_work

    if method is not None:
        # Cost grows with the resamples: the largest count that fits, by bisection.
        step = resample.SUBSETS if any(s.subset_rows for s in shapes) else 1
        low, high = -(-min_resamples // step), resamples // step
        allowed = 0
        if low <= high and fits(resamples=low * step):
            while low < high:
                middle = (low + high + 1) // 2
                if fits(resamples=middle * step):
                    low = middle
                else:
                    high = middle - 1
            allowed = low * step
        if allowed:
            raise LimitExceeded(
                detail=f"{detail}; lower options.interval.resamples to at most {allowed}",
                locations=[Location("options.interval.resamples", f"at most {allowed} for these data")],
            )
    if probabilities > 0:
        low, high = 0, probabilities - 1
        while low < high:
            middle = (low + high + 1) // 2
            if fits(probabilities=middle):
                low = middle
            else:
                high = middle - 1
        if low > 0 or fits(probabilities=0):
            raise LimitExceeded(
                detail=f"{detail}; send at most {low} probabilities in options.probabilities",
                locations=[Location("options.probabilities", f"at most {low} for these data")],
            )
    if method == "bca" and fits(method="percentile"):
        raise LimitExceeded(
            detail=f"{detail}; the percentile method (no jackknife) fits: set options.interval.method",
            locations=[Location("options.interval.method", "BCa's jackknife does not fit; use percentile")],
        )
    if method is not None and fits(method=None):
        raise LimitExceeded(
            detail=f"{detail}; without options.interval the descriptors themselves fit",
            locations=[Location("options.interval", "intervals do not fit for these data; leave them out")],
        )
    raise LimitExceeded(
        detail=f"{detail}; send fewer values",
        locations=[Location("", "too many values for this server's memory and time limits")],
    )


__all__ = ["Estimate", "Shape", "Stage", "admit", "estimate", "estimate_separately", "resampling_work", "shape_of"]
