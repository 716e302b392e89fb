"""The intervals bridge: bootstrap intervals from the resampling engine and classical intervals
(t, chi-square, order statistics) for every defined descriptor and quantile, with their warnings.
Which descriptors are resampled, and why the others are not, is the registry's."""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from tailgauge.core import classical, grouped, resample
from tailgauge.core.describe import ordered, tails
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.order_based import ROBUST_PROBABILITIES
from tailgauge.core.describe.results import Descriptor, Quantile, Resampling
from tailgauge.core.describe.robust_shape import NORMAL_OCTILE_KURTOSIS
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.moments import CentralSums, central_sums
from tailgauge.core.registry import BOOTSTRAP_FAILS, WarningCode, extremes_reason
from tailgauge.core.weighted import WeightedData, WeightMeaning


def intervals(
    data: WeightedData,
    sums: CentralSums | None,
    midpoint_sums: CentralSums | None,
    sheppard_applied: bool,
    basis: Basis,
    options: DescribeOptions,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    probabilities: np.ndarray,
    notes: Warnings,
    structure: ordered.Serial | None = None,
    tail_point: tails.TailPoint | None = None,
) -> Resampling:
    """Bootstrap and classical intervals for every defined descriptor and quantile, and for the
    tail means (``tail_point``).

    The data were checked for resampling beforehand (``validation.check_description``).
    ``structure``: the serial structure of a sample sent with options.order as_sent, whose
    resamples join blocks; BCa then falls back to percentile (its acceleration is a jackknife
    of independent observations), and the classical intervals are the mean's with the effective n.
    """
    tail_point = tails.TailPoint() if tail_point is None else tail_point
    interval = options.interval
    assert interval is not None
    blocks = chosen = None
    engine_options = interval
    if structure is not None:
        blocks, chosen = ordered.blocks_of(data, options, structure)
        if interval.method == "bca":
            engine_options = dataclasses.replace(interval, method="percentile")
    # Open bins leave the moments undefined; the plan still needs a finite scaling of the values.
    plan_sums = midpoint_sums if midpoint_sums is not None else central_sums(data.values, data.weights, 4)
    sheppard_width = None
    if sheppard_applied:
        width = grouped.equal_width(data)
        assert width is not None
        sheppard_width = math.ldexp(width, -plan_sums.scale_exponent)
    families = (
        (basis.skewness_family, basis.kurtosis_family) if basis.bias_correctable else ("g1", "g2")
    )
    estimates = {name: d.value for name, d in descriptors.items() if options.selection.computes(name)}
    outcome = resample.bootstrap(
        data,
        plan_sums,
        estimates | tail_point.estimates,
        [q.value for q in quantiles],
        probabilities,
        families=families,
        quantile_type=basis.quantile_type,
        factor_rule=basis.variance_rule,
        options=engine_options,
        max_work=options.max_resample_work,
        deadline=options.deadline,
        threads=options.resample_threads,
        subset_rows=options.subset_rows,
        sheppard_width=sheppard_width,
        quantile_shape=resample.QuantileShape(ROBUST_PROBABILITIES, NORMAL_OCTILE_KURTOSIS),
        blocks=blocks,
        tails=resample.TailSpec(
            np.array([m.level for m in tail_point.tail_means], dtype=np.float64), options.trim_proportion,
            tail_point.tail_count,
        ),
    )
    if engine_options is not interval:
        blocked = [name for name, result in outcome.results.items() if result.interval is not None]
        blocked += [f"quantiles[{i}]" for i, r in enumerate(outcome.quantiles) if r.interval is not None]
        notes.add(
            WarningCode.BCA_FALLBACK,
            "BCa's acceleration comes from a jackknife of independent observations; for a series in the "
            "order sent (options.order as_sent) the percentile interval of the block resamples is given",
            blocked,
        )
    fallbacks: dict[str, list[str]] = {}
    undefined: dict[str, list[str]] = {}
    for name, result in outcome.results.items():
        if name.startswith((tails.UPPER, tails.LOWER)):
            name = _tail_mean_result(tail_point, name, result)
            if result.reason is not None:
                (fallbacks if result.interval is not None else undefined).setdefault(result.reason, []).append(name)
            continue
        descriptors[name].interval = result.interval
        descriptors[name].standard_error = finite_or_none(result.standard_error) if result.standard_error is not None else None
        if result.reason is not None:
            (fallbacks if result.interval is not None else undefined).setdefault(result.reason, []).append(name)
    extremes = []
    for i, result in enumerate(outcome.quantiles):
        if quantiles[i].probability in (0.0, 1.0) and quantiles[i].value is not None:
            extremes.append(f"quantiles[{i}]")  # the minimum or maximum again
            continue
        quantiles[i].interval = result.interval
        quantiles[i].standard_error = result.standard_error
        if result.reason is not None and quantiles[i].value is not None:
            target = fallbacks if result.interval is not None else undefined
            target.setdefault(result.reason, []).append(f"quantiles[{i}]")
    for reason, names in fallbacks.items():
        notes.add(WarningCode.BCA_FALLBACK, f"BCa could not be computed ({reason}); the percentile interval is given", names)
    for reason, names in undefined.items():
        notes.add(WarningCode.INTERVAL_UNDEFINED, f"no bootstrap interval: {reason}", names)
    skipped = [name for name in BOOTSTRAP_FAILS if descriptors[name].value is not None]
    skipped += [name for name in outcome.left_out if descriptors[name].value is not None]
    skipped += extremes

    def why(name: str) -> str:
        if name in extremes:
            return extremes_reason()
        return outcome.left_out[name] if name in outcome.left_out else BOOTSTRAP_FAILS[name]

    for reason in sorted({why(name) for name in skipped}):
        notes.add(WarningCode.INTERVAL_NOT_OFFERED, f"no bootstrap interval: {reason}", [n for n in skipped if why(n) == reason])
    for text in outcome.notes:
        notes.add(WarningCode.RESAMPLING_SCHEME, text)
    n = basis.sample_size or 0.0
    if n < resample.SMALL_SAMPLE:
        notes.add(
            WarningCode.BOOTSTRAP_SMALL_SAMPLE,
            f"with n = {n:g} (< {resample.SMALL_SAMPLE}, common practice) bootstrap intervals may cover "
            "much less than their level",
        )
    distinct = data.values.size if data.binned else data.support.values.size
    # Named: the order statistics that have a value (a null one has no interval to be coarse).
    coarse = [name for name in ("median", "interquartile_range", "median_absolute_deviation") if descriptors[name].value is not None]
    if any(q.value is not None for q in quantiles):
        coarse.append("quantiles")
    if distinct < resample.FEW_DISTINCT and coarse:
        notes.add(
            WarningCode.BOOTSTRAP_DISCRETE,
            f"only {distinct} distinct values: the bootstrap distribution of order statistics (median, "
            "quantiles, IQR, MAD) is lumpy and their intervals are coarse",
            coarse,
        )
    if structure is None:
        _classical_intervals(data, sums, basis, interval.level, descriptors, quantiles, probabilities, notes)
        ordered.note_serial_dependence(data, sums, descriptors, quantiles, notes)
    else:
        _effective_mean_interval(sums, interval.level, descriptors, structure)
        ordered.note_independent_classical(descriptors, quantiles, notes)
    if tail_point.tail_count is not None:
        index = descriptors[tails.TAIL_INDEX]
        index.classical_interval = tails.tail_index_interval(index, tail_point.tail_count, interval.level)
    return Resampling(
        method=interval.method,
        level=interval.level,
        resamples=outcome.resamples,
        seed=interval.seed,
        scheme=outcome.scheme,
        block_scheme=None if blocks is None else blocks.scheme,
        block_length=None if blocks is None else blocks.length,
        block_length_choice=chosen,
        replicates=outcome.replicates,
    )


def _effective_mean_interval(
    sums: CentralSums | None, level: float, descriptors: dict[str, Descriptor], structure: ordered.Serial
) -> None:
    """The mean's classical interval of an ordered sample: Student's t with the effective n."""
    mean = descriptors["mean"].value
    if sums is None or mean is None or structure.effective_n is None:
        return
    n = float(sums.sums[0])
    sample_variance = sums.central_moment(2) * n / (n - 1.0)
    if math.isfinite(sample_variance) and sample_variance > 0.0:
        descriptors["mean"].classical_interval = ordered.effective_mean_interval(
            mean, math.sqrt(sample_variance), structure.effective_n, level
        )



def _tail_mean_result(tail_point: tails.TailPoint, name: str, result: resample.BootstrapResult) -> str:
    """Put a tail mean's interval in its place; return its name in the answer (tail_means[i])."""
    upper = name.startswith(tails.UPPER)
    i = int(name.split(":")[1])
    side = tail_point.tail_means[i].upper if upper else tail_point.tail_means[i].lower
    side.interval = result.interval
    return f"tail_means[{i}]"


def _classical_intervals(
    data: WeightedData,
    sums: CentralSums | None,
    basis: Basis,
    level: float,
    descriptors: dict[str, Descriptor],
    quantiles: list[Quantile],
    probabilities: np.ndarray,
    notes: Warnings,
) -> None:
    counted = data.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
    n = data.total_weight
    if sums is not None and counted and n >= 2 and descriptors["mean"].value is not None:
        sample_variance = sums.central_moment(2) * n / (n - 1.0)
        if math.isfinite(sample_variance) and sample_variance > 0.0:
            with np.errstate(all="ignore"):
                t = classical.mean_interval(descriptors["mean"].value, math.sqrt(sample_variance), n, level)
                chi = classical.variance_interval(sample_variance, n, level)
            # A level within rounding of 1 (or 0) puts a quantile of t or chi-square at infinity
            # or zero: no finite interval exists, so none is given (a warning says so).
            unbounded = []
            if math.isfinite(t.low) and math.isfinite(t.high):
                descriptors["mean"].classical_interval = t
            else:
                unbounded.append("mean")
            if all(math.isfinite(b) and b >= 0.0 for b in (chi.low, chi.high)):
                descriptors["variance"].classical_interval = chi
                descriptors["standard_deviation"].classical_interval = dataclasses.replace(
                    chi, low=math.sqrt(chi.low), high=math.sqrt(chi.high)
                )
            else:
                unbounded += ["variance", "standard_deviation"]
            if unbounded:
                notes.add(WarningCode.INTERVAL_UNDEFINED, f"no finite classical interval at level {level!r}", unbounded)
    if counted and data.integer_weights and not data.binned:
        if descriptors["median"].value is not None:
            descriptors["median"].classical_interval = classical.quantile_interval(data, 0.5, level)
        for quantile in quantiles:
            if quantile.value is not None:
                quantile.classical_interval = classical.quantile_interval(data, quantile.probability, level)
