"""The resampling budget: the work a bootstrap would spend, the advice when it is over, the
wall-clock deadline, and the working memory of evaluating statistics over many rows.
"""

from __future__ import annotations

import math
import time

from tailgauge.core.errors import LimitExceeded, Location
from tailgauge.core.moments import central_sums
from tailgauge.core.resample.blocks import Blocks
from tailgauge.core.resample.draws import Plan, plan_of
from tailgauge.core.weighted import WeightedData

# Working memory of one part of ``Statistics.evaluate`` (rows of a batch or of the jackknife
# evaluated together); see ``evaluation_row_bytes``.
EVALUATION_PART_BYTES = 16 << 20
# Bag of little bootstraps (Kleiner, Talwalkar, Sarkar & Jordan, JRSS-B 76, 2014): subsets of
# size n**0.7, 20 of them (the paper's experiments find s = 10-20 and r = 50-100 enough).
SUBSET_EXPONENT = 0.7
SUBSETS = 20
# Bytes per (row x support position) of the L-moments' dense rows (cumulative weights, their
# plotting positions and powers; bins also the positions before each bin): the L-moments take
# rows a part of at most EVALUATION_PART_BYTES at a time.
LMOMENT_BYTES_PER_ELEMENT = 32
# The medcouple's rows: bytes per (row x support position) of its dense weights, cumulative
# lower weights, gathered bounds and products (parts of at most EVALUATION_PART_BYTES).
MEDCOUPLE_BYTES_PER_ELEMENT = 48
# The medcouple's table of bounds per median has (k^2/4 + 1) x k/2 32-bit entries (two copies
# while it is built): at most this many, so k <= 252 or so.
MEDCOUPLE_TABLE_ENTRIES = 1 << 21
# The medcouple's work (resamples x k log2 k: bisection steps x gathers per row) may take at most
# this share of the resampling budget (resamples x support rows).
MEDCOUPLE_WORK_SHARE = 0.05


def medcouple_table_entries(rows: int) -> float:
    """Entries of the medcouple's table of bounds for one median, at most (balanced halves)."""
    half = rows / 2.0
    return (half * half + 1.0) * half


def medcouple_work(rows: int, resamples: int) -> float:
    """The medcouple's work, in gathers: each resample's bisection (about k log2 k gathers) and
    a table of bounds per distinct median among the resamples (at most the resamples; taken as
    4 k, which bounds what was seen: 475 medians among 9,999 resamples of 200 distinct values),
    whose entries cost about an eighth of a gather each (a running sum of 32-bit marks)."""
    medians = min(float(resamples), 4.0 * rows)
    return float(resamples) * rows * math.log2(max(rows, 2)) + medians * medcouple_table_entries(rows) / 8.0


def medcouple_fits(rows: int, resamples: int, max_work: float) -> bool:
    """Whether the engine resamples the medcouple of data with ``rows`` support rows: its table
    of bounds fits MEDCOUPLE_TABLE_ENTRIES and its work MEDCOUPLE_WORK_SHARE of ``max_work``
    (otherwise it is left out, with the registry's TOO_COSTLY reason)."""
    return (
        medcouple_table_entries(rows) <= MEDCOUPLE_TABLE_ENTRIES
        and medcouple_work(rows, resamples) <= MEDCOUPLE_WORK_SHARE * max_work
    )


def evaluation_row_bytes(rows: int, probabilities: int, *, bins: bool) -> int:
    """Working memory of ``Statistics.evaluate`` per evaluated row (measured with tracemalloc,
    rounded up; tests/core/test_cost.py checks it): about 128 bytes per requested quantile, and
    128 x 12 for the quartiles, the octiles and median of the quantile shape, and the median and
    MAD searches (measured 104 bytes per quantile and 1,400-2,000 bytes besides, at k = 50 and
    20,000), plus, for binned data, the grouped MAD's arrays over every bin edge. The L-moments'
    dense rows are taken in parts of their own (``LMOMENT_BYTES_PER_ELEMENT``)."""
    per_row = 128 * (probabilities + 12)
    if bins:
        per_row += 192 * (rows + 1)
    return per_row


def deadline_check(deadline: float | None) -> None:
    if deadline is not None and time.monotonic() > deadline:
        raise LimitExceeded(
            detail="the resampling did not finish within this server's time limit; lower options.interval.resamples",
            locations=[Location("options.interval.resamples", "lower it")],
        )


def over_budget(work: float, max_work: float, allowed: int, description: str) -> LimitExceeded:
    return LimitExceeded(
        detail=(
            f"{description} = {work:.3g} exceeds this server's resampling budget of {max_work:.3g}; "
            f"lower options.interval.resamples to at most {allowed}"
        ),
        locations=[Location("options.interval.resamples", f"at most {allowed} for these data")],
    )


def uses_subsets(plan: Plan, subset_rows: int, blocks: Blocks | None = None) -> bool:
    """Whether the bag of little bootstraps replaces the ordinary bootstrap for this plan (never
    for blocks: its subsets are drawn as independent observations)."""
    return plan.values.size > subset_rows and plan.edges is None and blocks is None


def work_of(
    plan: Plan, resamples: int, subset_rows: int, blocks: Blocks | None = None
) -> tuple[float, float, str]:
    """The work ``bootstrap`` spends (rows touched), the work per resample, and how it was counted.
    Blocks add the n observation indices each resample draws to its k support rows."""
    if blocks is not None:
        k, n = plan.values.size, blocks.observations
        return float(resamples) * float(k + n), float(k + n), f"{resamples} resamples x ({k} support rows + {n} observations in blocks)"
    if uses_subsets(plan, subset_rows):
        m = int(math.ceil(plan.draws**SUBSET_EXPONENT))
        drawn = SUBSETS * int(math.ceil(resamples / SUBSETS))
        return float(drawn) * m, float(m), f"{drawn} resamples x {m} subset rows"
    k = plan.values.size
    return float(resamples) * float(k), float(k), f"{resamples} resamples x {k} support rows"


def allowed_resamples(
    max_work: float, per_resample: float, plan: Plan, subset_rows: int, blocks: Blocks | None = None
) -> int:
    """The most resamples within ``max_work``: the bag of little bootstraps draws a whole
    number per subset (requests are rounded up to a multiple of ``SUBSETS``), so its advice is
    rounded down to one, and a resent request with that count stays within the budget."""
    allowed = int(max_work // per_resample)
    if uses_subsets(plan, subset_rows, blocks):
        allowed -= allowed % SUBSETS
    return allowed


def resampling_work(
    data: WeightedData, resamples: int, subset_rows: int, blocks: Blocks | None = None
) -> tuple[float, float]:
    """(work, work per resample) that ``bootstrap`` would spend on ``data``: the measure its budget
    ``max_work`` is compared with, so a caller resampling several inputs can budget them together."""
    plan, _ = plan_of(data, central_sums(data.values, data.weights, 4))
    work, per_resample, _ = work_of(plan, resamples, subset_rows, blocks)
    return work, per_resample
