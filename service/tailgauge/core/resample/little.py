"""Bag of little bootstraps (Kleiner, Talwalkar, Sarkar & Jordan, JRSS-B 76, 2014): intervals
averaged over resamples of size n drawn from small subsets, for data with many support rows.
"""

from __future__ import annotations

import math

import numpy as np

from tailgauge.core.resample.budget import SUBSET_EXPONENT, SUBSETS, deadline_check
from tailgauge.core.resample.draws import BATCH_ELEMENTS, Plan
from tailgauge.core.resample.intervals import (
    BootstrapOutcome,
    BootstrapResult,
    Interval,
    IntervalOptions,
    Replicates,
    percentile,
)
from tailgauge.core.resample.rows import Rows
from tailgauge.core.resample.statistics import Statistics


def little_bootstraps(
    plan: Plan,
    notes: list[str],
    estimates: dict[str, float | None],
    quantile_estimates: list[float | None],
    probabilities: np.ndarray,
    full: Statistics,
    options: IntervalOptions,
    deadline: float | None,
) -> BootstrapOutcome:
    """Bag of little bootstraps: intervals averaged over resamples of size n drawn from small subsets.

    Each of ``SUBSETS`` subsets holds ``m = n**0.7`` observations drawn without replacement; each
    resample puts multinomial(n, 1/m) weights on its observations, so every statistic is computed
    at the full sample size at a cost of O(m) per resample (Kleiner et al. 2014, algorithm 1).
    """
    observations = plan.draws
    m = int(math.ceil(observations**SUBSET_EXPONENT))
    per_subset = int(math.ceil(options.resamples / SUBSETS))
    wanted = full.wanted(estimates)
    names = wanted + tuple(f"quantile:{i}" for i, q in enumerate(quantile_estimates) if q is not None)
    method = "basic" if options.method == "basic" else "percentile"
    cumulative = np.cumsum(np.round(plan.base / plan.unit))
    lows: dict[str, list[float]] = {name: [] for name in names}
    highs: dict[str, list[float]] = {name: [] for name in names}
    errors: dict[str, list[float]] = {name: [] for name in names}
    undefined: set[str] = set()
    children = np.random.SeedSequence(options.seed).spawn(SUBSETS)
    rounds: list[dict[str, np.ndarray]] = []
    for child in children:
        deadline_check(deadline)
        rng = np.random.default_rng(child)
        chosen = rng.choice(observations, size=m, replace=False)
        rows, counts = np.unique(np.searchsorted(cumulative, chosen, side="right"), return_counts=True)
        subset = Plan(
            values=plan.values[rows],
            base=counts * plan.unit[rows],
            unit=plan.unit[rows],
            powers=plan.powers[rows],
            sums=plan.sums,
            draws=observations,
            multinomial=True,
            integer=plan.integer,
            reliability=plan.reliability,
            edges=None,
            row_of_draw=None,
            unit_weights=bool(np.all(plan.unit[rows] == 1.0)),
        )
        statistics = Statistics(
            subset, (full.skewness_family, full.kurtosis_family), full.quantile_type, full.factor_rule,
            quantile_shape=full.quantile_shape, left_out=full.left_out, tails=full.tails,
        )
        # The subset's resamples in batches of at most BATCH_ELEMENTS counts (a subset of a
        # large sample would otherwise hold resamples x m counts at once); the generator's
        # draws are the same in batches as in one call, so only the batch's matrix product
        # may round differently when a subset needs more than one batch.
        batch = max(1, BATCH_ELEMENTS // counts.size)
        parts = []
        for start in range(0, per_subset, batch):
            deadline_check(deadline)
            with np.errstate(all="ignore"):  # non-finite replicates are reported as undefined below
                drawn = rng.multinomial(observations, counts / m, size=min(batch, per_subset - start))
                weights = drawn.astype(np.float64) * subset.unit[None, :]
                whole = drawn if subset.integer and subset.unit_weights else None
                view = Rows(weights, subset.powers, subset.integer, whole)
                parts.append(statistics.evaluate(view, probabilities, wanted, deadline))
            del drawn, weights, whole, view
        replicates = parts[0] if len(parts) == 1 else {
            name: np.concatenate([part[name] for part in parts]) for name in parts[0]
        }
        del parts
        rounds.append(replicates)
        alpha = 1.0 - options.level
        for name in names:
            values = replicates[name]
            if not np.all(np.isfinite(values)):
                undefined.add(name)
                continue
            low, high = percentile(values, np.array([alpha / 2.0, 1.0 - alpha / 2.0]))
            estimate = estimates[name] if name in estimates else quantile_estimates[int(name.split(":")[1])]
            if method == "basic":
                low, high = 2.0 * estimate - high, 2.0 * estimate - low
            lows[name].append(float(low))
            highs[name].append(float(high))
            errors[name].append(float(np.std(values, ddof=1)))

    def averaged(name: str) -> BootstrapResult:
        if name in undefined:
            return BootstrapResult(None, None, "some resamples leave this descriptor undefined")
        reason = "BCa is not defined for the bag of little bootstraps" if options.method == "bca" else None
        interval = Interval(float(np.mean(lows[name])), float(np.mean(highs[name])), options.level, method)
        return BootstrapResult(interval, float(np.mean(errors[name])), reason)

    results = {name: averaged(name) for name in wanted}
    quantiles = [
        averaged(f"quantile:{i}") if q is not None else BootstrapResult(None, None, "the quantile itself is undefined")
        for i, q in enumerate(quantile_estimates)
    ]
    scheme = (
        f"bag of little bootstraps (Kleiner et al. 2014): {SUBSETS} subsets of {m} = n^{SUBSET_EXPONENT} "
        f"observations, {per_subset} multinomial resamples of size {observations} each"
    )
    kept = Replicates(
        {name: np.stack([r[name] for r in rounds]) for name in rounds[0]}, None, None, True, dict(full.left_out)
    )
    return BootstrapOutcome(results, quantiles, SUBSETS * per_subset, scheme, notes, {}, kept, dict(full.left_out))
