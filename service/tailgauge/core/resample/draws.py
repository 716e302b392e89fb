"""How resamples are drawn: the plan fixed across resamples, batches and their generators, and
the draws themselves (multinomial counts, Poisson counts topped up to n, or counted picks).

A resample is a vector of weights over the k support rows (distinct values with their counts,
or, for reliability or fractional weights, the entries themselves); a batch of resamples is a
b x k weight matrix.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from tailgauge.core.errors import Location, UncomputableInput
from tailgauge.core.moments import CentralSums
from tailgauge.core.resample.rows import Scratch
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Working memory of one batch of resamples (per thread), whatever the request: b x k arrays of
# about 32 bytes per element (draws, counts, weights, prefix sums), or 19 for Poisson counts
# topped up (16-bit draws, byte counts).
BATCH_BYTES = 64 << 20
BATCH_ELEMENTS = BATCH_BYTES // 32
TOPPED_UP_BATCH_ELEMENTS = BATCH_BYTES // 19
# Resamples of at least this many draws are counted row by row (cheaper than one flat count).
_ROW_BY_ROW_DRAWS = 2048
# Multinomial batches of at least twice this many resamples are drawn this many at a time when
# the bootstrap runs on several threads, each part's order statistics read while the rest is
# drawn (bootstrap's run): the generator runs without the interpreter's lock, the reading
# mostly with it, so one thread reads while the other draws.
PIPELINE_ROWS = 1250
# Raw samples of at least this many distinct values get Poisson counts topped up to n
# (topped_up_counts), whose expected shortfall is this many standard deviations.
POISSON_DRAWS = 2048
_POISSON_SHORTFALL = 4.0
_POISSON_LEVELS = 5
_POISSON_PIECE = 1 << 18


@dataclass(frozen=True)
class Plan:
    """Everything fixed across resamples: the support, its scaled powers and the rules."""

    values: np.ndarray  # support values, increasing
    base: np.ndarray  # original weight per support row
    unit: np.ndarray  # weight carried by one resampled draw of each row
    powers: np.ndarray  # k x (order + 1) powers of the scaled deviations
    sums: CentralSums
    draws: int  # observations per resample
    multinomial: bool  # counts drawn with rng.multinomial, else uniform draws of rows
    integer: bool  # whole counts: order-statistic quantile rules apply
    reliability: bool
    edges: np.ndarray | None  # bins
    row_of_draw: np.ndarray | None  # support row of each observation, when rows hold several
    unit_weights: bool
    # One draw per support row (a raw sample of distinct values): Poisson edges for topped_up_counts.
    poisson_edges: np.ndarray | None = None


def plan_of(data: WeightedData, sums: CentralSums) -> tuple[Plan, list[str]]:
    """The plan of resampling ``data`` (scaled by ``sums``), and notes on how it is resampled."""
    notes = []
    if data.binned:
        assert data.weights is not None and data.edges is not None
        values, base = data.values, data.weights
    else:
        support = data.support
        values, base = support.values, support.weights
    integer = data.integer_weights
    reliability = data.meaning is WeightMeaning.RELIABILITY
    if integer and not reliability:
        draws = int(round(float(np.sum(base))))
        unit = np.ones_like(base)
        multinomial = True
    else:
        if data.binned:
            raise UncomputableInput(
                detail="bootstrap intervals for bins need whole counts",
                locations=[Location("counts", "counts must be whole numbers to resample the bins")],
            )
        # Each entry is resampled with its weight: rows are the entries, not merged values.
        order_index = np.argsort(data.values, kind="stable")
        values = data.values[order_index]
        assert data.weights is not None
        unit = data.weights[order_index]
        base = unit.copy()
        draws = int(values.size)
        multinomial = False
        notes.append(
            "the weights are not whole counts, so entries are resampled uniformly and keep their weights"
        )
    deviations = sums.scaled_deviations(values)
    # A far outlier's fourth power may overflow: the replicates that use it are then
    # non-finite, and reported as undefined, rather than a floating-point warning here.
    with np.errstate(over="ignore"):
        powers = np.vander(deviations, 5, increasing=True)
    row_of_draw = None
    if not np.all(base == unit) and not (multinomial and draws > 8 * values.size):
        row_of_draw = np.repeat(np.arange(values.size, dtype=np.int64), np.round(base / unit).astype(np.int64))
    edges = None
    if tops_up(multinomial, draws, values.size, bool(np.all(base == 1.0))):
        edges = poisson_edges(1.0 - _POISSON_SHORTFALL / math.sqrt(draws))
    plan = Plan(
        poisson_edges=edges,
        row_of_draw=row_of_draw,
        unit_weights=bool(np.all(unit == 1.0)),
        values=values,
        base=base,
        unit=unit,
        powers=powers,
        sums=sums,
        draws=draws,
        multinomial=multinomial,
        integer=integer and not reliability,
        reliability=reliability,
        edges=data.edges if data.binned else None,
    )
    return plan, notes


def tops_up(multinomial: bool, draws: int, rows: int, unit_rows: bool) -> bool:
    """Whether multinomial counts are drawn as Poisson counts topped up to n
    (:func:`topped_up_counts`): one draw per support row of a large raw sample of distinct values."""
    return multinomial and draws == rows and draws >= POISSON_DRAWS and unit_rows


def batch_size(rows: int, resamples: int, topped_up: bool) -> int:
    """Resamples per batch: about ``BATCH_BYTES`` of draws, and at least two batches for big
    requests, so two cores share the work (numpy releases the GIL in its generators and loops);
    fixed by k and the resample count alone, never by threads."""
    elements = TOPPED_UP_BATCH_ELEMENTS if topped_up else BATCH_ELEMENTS
    batch = max(1, min(resamples, elements // max(rows, 1)))
    if resamples >= 2000:
        batch = min(batch, -(-resamples // 2))
    return batch


def batches(plan: Plan, seed: int, resamples: int, blocks: bool = False) -> list[tuple[np.random.Generator, int]]:
    """(generator, size) of each batch of resamples.

    Batch sizes depend only on k and how counts are drawn (``blocks``: counts from block draws,
    never Poisson counts), and each batch has its own generator spawned from ``seed``, so the
    same seed gives the same resamples bit for bit on any worker and thread count.
    """
    batch = batch_size(plan.values.size, resamples, plan.poisson_edges is not None and not blocks)
    sizes = [min(batch, resamples - start) for start in range(0, resamples, batch)]
    children = np.random.SeedSequence(seed).spawn(len(sizes))
    return [(np.random.default_rng(child), size) for child, size in zip(children, sizes)]


@functools.lru_cache(maxsize=256)
def poisson_edges(rate: float) -> np.ndarray:
    """``2**64 P(X < c)`` for c = 1, 2, ... of X ~ Poisson(rate), as unsigned 64-bit integers,
    up to the count whose upper tail is below 2**-65 (from scipy's survival function, so the
    tail keeps its relative precision). Cached (read-only): a comparison plans each
    input's resampling twice (budget, then bootstrap), and sample sizes recur."""
    edges = []
    count = 1
    while (tail := round(math.ldexp(float(stats.poisson.sf(count - 1, rate)), 64))) > 0:
        edges.append((1 << 64) - tail)
        count += 1
    table = np.array(edges, dtype=np.uint64)
    table.flags.writeable = False
    return table


def topped_up_counts(plan: Plan, rng: np.random.Generator, b: int, scratch: Scratch) -> np.ndarray | None:
    """Multinomial(n; 1/n, ..., 1/n) counts of b resamples of n distinct values, without n draws each.

    Each value first gets an independent Poisson(rate) count with rate = 1 - 4/sqrt(n); given
    their total T the counts are multinomial(T), so adding n - T uniform draws makes them exactly
    multinomial(n) (a row whose T exceeds n, about 3 in 100,000, is drawn again directly). The
    Poisson counts come from 16 random bits per value compared with the top 16 bits of the edges;
    the few values that fall on an edge's top bits are resolved with 48 more bits, so the counts
    follow the Poisson probabilities to double precision. Every step is a numpy loop that
    releases the GIL, so batches on two threads use both cores. ``None`` when a count would not
    fit in a byte (the caller then draws directly).
    """
    k = plan.values.size
    edges = plan.poisson_edges
    assert edges is not None
    top = (edges >> np.uint64(48)).astype(np.uint16)
    counts = scratch.array("counts", (b, k), np.uint8)
    flat = counts.reshape(-1)
    # A cache-sized piece of the batch at a time: the comparisons below pass over it ten times.
    piece = max(k, (_POISSON_PIECE // k) * k)
    unsure = scratch.array("unsure", (piece,), np.bool_)
    compared = scratch.array("compared", (piece,), np.bool_)
    levels = min(_POISSON_LEVELS, top.size)
    for start in range(0, b * k, piece):
        size = min(piece, b * k - start)
        bits = rng.bit_generator.random_raw(-(-size // 4)).view(np.uint16)[:size]
        out, doubt, scratch_bits = flat[start : start + size], unsure[:size], compared[:size]
        # Counts below _POISSON_LEVELS by comparison; a value on an edge's top bits, or at or
        # above the last compared edge, is resolved in full (about 0.3% of values).
        np.greater(bits, top[0], out=out.view(np.bool_))
        np.greater_equal(bits, top[levels - 1], out=doubt)
        for level in range(1, levels):
            np.greater(bits, top[level], out=scratch_bits)
            np.add(out, scratch_bits.view(np.uint8), out=out)
        for level in range(levels - 1):
            np.equal(bits, top[level], out=scratch_bits)
            np.logical_or(doubt, scratch_bits, out=doubt)
        resolve = np.flatnonzero(doubt)
        if resolve.size:
            full = (bits[resolve].astype(np.uint64) << np.uint64(48)) | (
                rng.bit_generator.random_raw(resolve.size) >> np.uint64(16)
            )
            out[resolve] = np.searchsorted(edges, full, side="right")
    # Row sums of byte counts in 32 bits (at most 255 k, far below 2**32): exact, and half the
    # cost of summing them in 64.
    shortfall = k - counts.sum(axis=1, dtype=np.uint32).astype(np.int64)
    over = np.flatnonzero(shortfall < 0)
    for row in over:
        direct = np.bincount(rng.integers(0, k, size=k), minlength=k)
        if direct.max() > 255:
            return None
        counts[row] = direct
    shortfall[over] = 0  # those rows are complete
    added_rows = np.repeat(np.arange(b, dtype=np.int64), shortfall)
    cells = added_rows * k + rng.integers(0, k, size=added_rows.size, dtype=np.int64)
    np.add.at(flat, cells, np.uint8(1))
    # A value given more than about 235 of its row's uniform draws would wrap its byte, losing a
    # multiple of 256 from the row's total: never seen (the caller then draws directly).
    if np.any(counts.sum(axis=1, dtype=np.uint32) != k):
        return None
    return counts


def by_multinomial(plan: Plan) -> bool:
    """Whether :func:`draw` draws multinomial counts with the generator's own multinomial
    (many draws per support row)."""
    return plan.multinomial and plan.draws > 8 * plan.values.size


def multinomial_counts(plan: Plan, rng: np.random.Generator, rows: int) -> np.ndarray:
    """``rows`` resamples' multinomial counts (rows x k, 64-bit), when :func:`by_multinomial`.
    The generator draws row after row, so a batch drawn a few rows at a time gets the same
    counts as drawn at once."""
    probabilities = plan.base / float(np.sum(plan.base))
    return rng.multinomial(plan.draws, probabilities, size=rows)


def draw(
    plan: Plan, rng: np.random.Generator, b: int, scratch: Scratch | None = None
) -> tuple[np.ndarray, np.ndarray | None]:
    """A b x k weight matrix of resamples, and its whole counts when the draws carry unit weight.

    Many draws per row: multinomial counts (cost per resample grows with k). Otherwise the
    draws themselves are made and counted (cost grows with the draws, cheaper when most rows
    get 0 or 1).
    """
    k = plan.values.size
    if by_multinomial(plan):
        counts = multinomial_counts(plan, rng, b)
        return counts.astype(np.float64), counts
    if plan.poisson_edges is not None:
        scratch = Scratch() if scratch is None else scratch
        counts = topped_up_counts(plan, rng, b, scratch)
        if counts is not None:
            weights = scratch.array("weights", (b, k), np.float64)
            np.copyto(weights, counts)
            return weights, counts
    picks = rng.integers(0, plan.draws, size=(b, plan.draws), dtype=np.int64)
    if plan.row_of_draw is not None:
        picks = plan.row_of_draw[picks]
    if plan.draws >= _ROW_BY_ROW_DRAWS:
        # Long rows are counted one at a time: each row's k counters stay in cache.
        counts = np.empty((b, k), dtype=np.int64)
        for row in range(b):
            counts[row] = np.bincount(picks[row], minlength=k)
    else:
        picks += (np.arange(b, dtype=np.int64) * k)[:, None]
        counts = np.bincount(picks.ravel(), minlength=b * k).reshape(b, k)
    weights = counts.astype(np.float64)
    if plan.unit_weights:
        return weights, counts
    return weights * plan.unit[None, :], None
