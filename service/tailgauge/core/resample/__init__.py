"""Bootstrap intervals for every descriptor at once, by resampling the support rather than the rows.

A resample is a vector of weights over the k support rows (distinct values with their counts,
or, for reliability or fractional weights, the entries themselves). A batch of resamples is a
b x k weight matrix; every moment descriptor of the whole batch comes from one matrix product
with the powers of the scaled deviations, and every order statistic from the cumulative
weights. So the cost grows with resamples x k, not with the total count.

The BCa acceleration comes from the jackknife over the support rows with their multiplicities
(leaving out one observation of row i changes only row i), so it costs O(k), never O(n^2).

References
----------
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
percentile (eq. 13.5), basic (Davison & Hinkley 1997, eq. 5.6) and BCa (eq. 14.10-14.15)
intervals; the acceleration from the jackknife (eq. 14.15).

The package, by concept: ``rows`` (batches of weight rows and the jackknife's rows, as the
order-statistic rules read them), ``draws`` (the plan, batches and their draws), ``statistics``
(every descriptor of many rows), ``intervals`` (interval methods and results), ``little`` (bag
of little bootstraps), ``budget`` (work, advice, deadline, working memory) and ``pool`` (the
process's threads); :func:`bootstrap` here runs them.
"""

from __future__ import annotations

import itertools
import threading
from collections.abc import Callable

import numpy as np

from tailgauge.core.moments import CentralSums
from tailgauge.core.registry import FEW_TAIL_VALUES, TOO_COSTLY
from tailgauge.core.resample import blocks as block_draws
from tailgauge.core.resample import medcouple_rows
from tailgauge.core.resample.blocks import Blocks
from tailgauge.core.resample.budget import (
    EVALUATION_PART_BYTES,
    SUBSET_EXPONENT,
    SUBSETS,
    allowed_resamples,
    deadline_check,
    evaluation_row_bytes,
    medcouple_fits,
    over_budget,
    resampling_work,
    uses_subsets,
    work_of,
)
from tailgauge.core.resample.draws import (
    PIPELINE_ROWS,
    Plan,
    batches,
    by_multinomial,
    draw,
    multinomial_counts,
    plan_of,
)
from tailgauge.core.resample.intervals import (
    FEW_DISTINCT,
    INTERVAL_DESCRIPTORS,
    SMALL_SAMPLE,
    BootstrapOutcome,
    BootstrapResult,
    Interval,
    IntervalOptions,
    Replicates,
    acceleration,
    interval_from_replicates,
)
from tailgauge.core.resample.little import little_bootstraps
from tailgauge.core.resample.pool import pool
from tailgauge.core.resample.rows import LeaveOneOut, Rows, Scratch
from tailgauge.core.resample.statistics import QuantileShape, Statistics
from tailgauge.core.resample.tail_rows import TailSpec
from tailgauge.core.weighted import WeightedData

__all__ = [
    "EVALUATION_PART_BYTES",
    "FEW_DISTINCT",
    "INTERVAL_DESCRIPTORS",
    "SMALL_SAMPLE",
    "SUBSETS",
    "SUBSET_EXPONENT",
    "Blocks",
    "BootstrapOutcome",
    "BootstrapResult",
    "Interval",
    "IntervalOptions",
    "QuantileShape",
    "TailSpec",
    "Replicates",
    "acceleration",
    "allowed_resamples",
    "bootstrap",
    "evaluation_row_bytes",
    "interval_from_replicates",
    "resampling_work",
]


# Bytes of leave-one-out values (support rows x statistics) up to which the jackknife is computed
# while the batches run (bootstrap): a sample of 10,000 distinct values with the default
# probabilities takes 4.6 MB.
EARLY_JACKKNIFE_BYTES = 8 << 20


def _part_edges(size: int) -> list[int]:
    """Where a batch of ``size`` resamples is cut into parts of about ``PIPELINE_ROWS``, the
    first one short (a fifth), so reading starts soon after drawing does."""
    parts = max(2, round(size / PIPELINE_ROWS))
    edges = [size * i // parts for i in range(parts + 1)]
    lead = PIPELINE_ROWS // 5
    if edges[1] > 2 * lead:
        edges.insert(1, lead)
    return edges


def _in_parts(
    plan: Plan,
    statistics: Statistics,
    rng: np.random.Generator,
    size: int,
    probabilities: np.ndarray,
    wanted: tuple[str, ...],
    deadline: float | None,
    scratch: Scratch,
    drawn: tuple[np.ndarray, Callable[[int], None]] | None = None,
) -> dict[str, np.ndarray]:
    """One batch of multinomial resamples drawn in parts of about ``PIPELINE_ROWS``, each part's
    order statistics (and the medcouple of its rows that share a common median) read as soon as
    it is drawn, then the rest of the batch's statistics read from the whole batch, as
    :func:`draw` and ``Statistics.evaluate`` would (the generator draws row after row, and the
    order statistics are per row): the same values, bit for bit.

    ``drawn``: the batch's counts array and a wait for part i, when another thread draws them
    (:func:`_drawn_ahead`); otherwise each part is drawn here from ``rng``."""
    k = plan.values.size
    counts = np.empty((size, k), dtype=np.int64) if drawn is None else drawn[0]
    ordered: dict[str, np.ndarray] = {}
    medcouple = later = None
    if "medcouple" in wanted:
        medcouple, later = np.full(size, np.nan), np.zeros(size, dtype=bool)
    edges = _part_edges(size)
    for index, (start, stop) in enumerate(itertools.pairwise(edges)):
        deadline_check(deadline)
        part = counts[start:stop]
        if drawn is None:
            part[:] = multinomial_counts(plan, rng, stop - start)
        else:
            drawn[1](index)
        view = Rows(part.astype(np.float64), None, True, part, plan.draws, scratch)
        for name, values in statistics.order_statistics(view, probabilities, wanted).items():
            if name not in ordered:
                ordered[name] = np.empty(size, dtype=values.dtype)
            ordered[name][start:stop] = values
        if medcouple is not None:
            # Rows sharing their median with many others in this part now (one median's kernels
            # serve them all); the few rows of rare medians with the whole batch, below.
            median = ordered["median"][start:stop]
            now = _in_large_groups(median, 2 * medcouple_rows.PILOT)
            medcouple[start:stop] = statistics.medcouples(view, np.where(now, median, np.nan))
            later[start:stop] = ~now & np.isfinite(median)
        del view
    view = Rows(counts.astype(np.float64), plan.powers, True, counts, plan.draws, scratch)
    if medcouple is not None:
        if later.any():
            rest = statistics.medcouples(view, np.where(later, ordered["median"], np.nan))
            medcouple = np.where(later, rest, medcouple)
        ordered["medcouple"] = medcouple
    return statistics.evaluate(view, probabilities, wanted, deadline, ordered)


def _in_large_groups(medians: np.ndarray, least: int) -> np.ndarray:
    """Whether each row's (finite) median is shared by more than ``least`` rows."""
    _, which, sizes = np.unique(medians, return_inverse=True, return_counts=True)
    return (sizes[which] > least) & np.isfinite(medians)


def _drawn_ahead(
    plan: Plan,
    statistics: Statistics,
    planned: list[tuple[np.random.Generator, int]],
    probabilities: np.ndarray,
    wanted: tuple[str, ...],
    deadline: float | None,
    threads: int,
) -> list[dict[str, np.ndarray]]:
    """Every multinomial batch, drawn part after part by one pool thread while this thread reads
    each part as soon as it is drawn (:func:`_in_parts`).

    The generator releases the GIL and the reading mostly holds it, so one thread drawing beside
    one reading overlaps them, where two threads each drawing and reading a batch contend for
    the GIL while they read. Each batch is drawn by its own generator in order, so the values are
    the same bit for bit. At most two batches' counts exist at once, as with two threads each
    holding one.
    """
    k = plan.values.size
    jobs = [(rng, size, [threading.Event() for _ in range(len(_part_edges(size)) - 1)]) for rng, size in planned]
    arrays: list[np.ndarray | None] = [None] * len(jobs)
    allocated = [threading.Event() for _ in jobs]
    room = threading.Semaphore(2)
    stopped = threading.Event()

    def draw_all() -> None:
        for index, (rng, size, ready) in enumerate(jobs):
            room.acquire()
            if stopped.is_set():
                return
            counts = np.empty((size, k), dtype=np.int64)
            arrays[index] = counts
            allocated[index].set()
            for (start, stop), event in zip(itertools.pairwise(_part_edges(size)), ready):
                if stopped.is_set():
                    return
                counts[start:stop] = multinomial_counts(plan, rng, stop - start)
                event.set()

    drawer = pool(threads).submit(draw_all)

    def wait(event: threading.Event) -> None:
        while not event.wait(0.05):
            if drawer.done():
                drawer.result()  # the drawer's error, if it failed
                if not event.is_set():
                    raise RuntimeError("the resampling draws stopped before this part")
            deadline_check(deadline)

    scratch = Scratch()
    outputs = []
    try:
        for index, (rng, size, ready) in enumerate(jobs):
            wait(allocated[index])
            counts = arrays[index]
            assert counts is not None
            outputs.append(
                _in_parts(
                    plan, statistics, rng, size, probabilities, wanted, deadline, scratch,
                    drawn=(counts, lambda part, ready=ready: wait(ready[part])),
                )
            )
            arrays[index] = None
            room.release()
        drawer.result()
    finally:
        stopped.set()
        room.release()
        room.release()
    return outputs


def bootstrap(
    data: WeightedData,
    sums: CentralSums,
    estimates: dict[str, float | None],
    quantile_estimates: list[float | None],
    probabilities: np.ndarray,
    *,
    families: tuple[str, str],
    quantile_type: int | None,
    factor_rule: str,
    options: IntervalOptions,
    max_work: float,
    deadline: float | None,
    threads: int = 2,
    subset_rows: int = 100_000,
    sheppard_width: float | None = None,
    quantile_shape: QuantileShape | None = None,
    blocks: Blocks | None = None,
    tails: TailSpec | None = None,
) -> BootstrapOutcome:
    """Bootstrap every defined scalar descriptor and requested quantile of ``data`` in one pass.

    With more than ``subset_rows`` support rows the bag of little bootstraps replaces the
    ordinary bootstrap (percentile or basic intervals; BCa falls back to percentile).

    ``estimates`` are the point estimates from ``describe``; a descriptor whose estimate is
    ``None`` gets no interval; so does a quantile-based shape measure without ``quantile_shape``
    (the probabilities and constant of describe's definitions), and the medcouple when resampling
    it does not fit the budget (``medcouple_fits``; the outcome's ``left_out`` says why). Raises
    :class:`LimitExceeded` when resamples x support rows exceed ``max_work`` or the wall clock
    passes ``deadline`` (``time.monotonic()`` seconds).

    ``blocks``: the sample is ordered and each resample joins blocks of it
    (:mod:`tailgauge.core.resample.blocks`); never the little bootstraps, and never BCa (its
    acceleration is a jackknife of independent observations: the caller asks for percentile).
    """
    plan, notes = plan_of(data, sums)
    k = plan.values.size
    assert blocks is None or (options.method != "bca" and plan.integer and blocks.rows == k)
    work, per_resample, counted = work_of(plan, options.resamples, subset_rows, blocks)
    if work > max_work:
        raise over_budget(
            work, max_work, allowed_resamples(max_work, per_resample, plan, subset_rows, blocks), counted
        )
    left_out = {}
    # The rows one resample weighs: the support, or a little bootstrap's subset.
    rows = k if blocks is not None else int(per_resample)
    if estimates.get("medcouple") is not None and not medcouple_fits(rows, options.resamples, max_work):
        left_out["medcouple"] = TOO_COSTLY
    if uses_subsets(plan, subset_rows, blocks):
        if estimates.get("upper_tail_index") is not None:
            left_out["upper_tail_index"] = FEW_TAIL_VALUES
        return little_bootstraps(
            plan, notes, estimates, quantile_estimates, probabilities,
            Statistics(
                plan, families, quantile_type, factor_rule, quantile_shape=quantile_shape, left_out=left_out, tails=tails
            ),
            options, deadline,
        )
    statistics = Statistics(plan, families, quantile_type, factor_rule, sheppard_width, quantile_shape, left_out, tails)
    wanted = statistics.wanted(estimates)

    own = threading.local()
    planned = batches(plan, options.seed, options.resamples, blocks is not None)
    parallel = threads > 1 and len(planned) > 1
    # On several threads, multinomial batches are drawn a part at a time and each part's order
    # statistics read while the next is drawn (see PIPELINE_ROWS); the values are the same.
    # Not when evaluate would take fewer rows at a time to bound its working memory (many
    # probabilities): a part's order statistics would then take more.
    in_parts = (
        parallel and blocks is None and by_multinomial(plan) and statistics.part_rows(None, probabilities.size) >= PIPELINE_ROWS
    )

    def run(batch: tuple[np.random.Generator, int]) -> dict[str, np.ndarray]:
        deadline_check(deadline)
        if not hasattr(own, "scratch"):
            own.scratch = Scratch()
        # Weights near float64's limit can overflow in a resample; such replicates are non-finite
        # and reported as undefined below, so the floating-point flags carry no news. (errstate
        # is per thread: it must be set here, in the worker.)
        with np.errstate(all="ignore"):
            rng, size = batch
            if in_parts and size >= 2 * PIPELINE_ROWS:
                return _in_parts(plan, statistics, rng, size, probabilities, wanted, deadline, own.scratch)
            if blocks is not None:
                counts = block_draws.block_counts(blocks, rng, size)
                weights = counts.astype(np.float64)
            else:
                weights, counts = draw(plan, rng, size, own.scratch)
            if plan.integer:
                view = Rows(weights, plan.powers, True, counts, plan.draws, own.scratch)
            else:
                view = Rows(weights, plan.powers, False)
            return statistics.evaluate(view, probabilities, wanted, deadline)

    def leave_one_out() -> tuple[dict[str, np.ndarray], np.ndarray]:
        present = plan.base > 0
        removed = np.where(present, plan.unit, 0.0)
        # A row whose removal leaves a total that rounds to 0 (weights 1e17 and 0.5), or power
        # sums that overflow (weights near 1.8e308), has no finite leave-one-out value, which
        # makes BCa fall back with its reason.
        with np.errstate(all="ignore"):
            view = LeaveOneOut(plan.base, removed, plan.powers)
            values = statistics.evaluate(view, probabilities, wanted, deadline)
        # Each row stands for its observations: row i's leave-one-out value counts base/unit times.
        return values, np.where(present, plan.base / plan.unit, 0.0)

    jackknife = jackknife_weights = None
    # Multinomial batches all large enough to read in parts: one thread draws, this one reads.
    ahead = in_parts and all(size >= 2 * PIPELINE_ROWS for _, size in planned)
    # Otherwise a small jackknife is computed by this thread while the batches run: its values
    # (one per support row and statistic) within EARLY_JACKKNIFE_BYTES, its working memory bounded
    # by evaluate's parts. A large one (and any when this thread reads) runs after the batches,
    # once their buffers are gone.
    early = (
        options.method == "bca" and parallel and not ahead
        and k * (probabilities.size + 48) * 8 <= EARLY_JACKKNIFE_BYTES
    )
    # numpy releases the GIL in the heavy loops, so batches overlap on the cores; each batch has
    # its own generator, so the result does not depend on which thread ran it.
    if ahead:
        with np.errstate(all="ignore"):
            outputs = _drawn_ahead(plan, statistics, planned, probabilities, wanted, deadline, threads)
    elif not parallel:
        outputs = [run(batch) for batch in planned]
    else:
        futures = [pool(threads).submit(run, batch) for batch in planned]
        try:
            if early:
                jackknife, jackknife_weights = leave_one_out()
            outputs = [future.result() for future in futures]
        finally:
            for future in futures:  # after an error (a passed deadline), drop the batches not started
                future.cancel()
    replicates = {name: np.concatenate([out[name] for out in outputs]) for name in outputs[0]}
    # The threads' scratch buffers (a batch's draws each) go before the jackknife runs.
    del own, outputs

    if options.method == "bca" and not early:
        jackknife, jackknife_weights = leave_one_out()
    results: dict[str, BootstrapResult] = {}
    for name in wanted:
        estimate = estimates[name]
        assert estimate is not None
        results[name] = interval_from_replicates(
            estimate, replicates[name], None if jackknife is None else [(jackknife[name], jackknife_weights)], options
        )
    quantile_results = []
    for i, estimate in enumerate(quantile_estimates):
        if estimate is None:
            quantile_results.append(BootstrapResult(None, None, "the quantile itself is undefined"))
            continue
        name = f"quantile:{i}"
        quantile_results.append(
            interval_from_replicates(
                estimate, replicates[name], None if jackknife is None else [(jackknife[name], jackknife_weights)], options
            )
        )
    accelerations = {name: r.acceleration for name, r in results.items() if r.acceleration is not None}
    scheme = (
        block_draws.describe_scheme(blocks) if blocks is not None
        else f"multinomial counts over {k} distinct values" if plan.multinomial
        else f"uniform draws of {k} weighted entries"
    )
    kept = Replicates(
        {name: values[None, :] for name, values in replicates.items()}, jackknife, jackknife_weights, False, left_out
    )
    return BootstrapOutcome(
        results, quantile_results, options.resamples, scheme, notes, accelerations, kept, left_out
    )
