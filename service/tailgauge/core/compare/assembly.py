""":func:`compare`: both inputs described by the same options, then contrasted, second against first."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from tailgauge.core import cost, resample
from tailgauge.core.compare.contrasts import (
    Difference,
    QuantileShift,
    StandardizedQuantile,
    differences,
    quantile_shifts,
    ratios,
    standardized_quantiles,
)
from tailgauge.core.compare.effect_size import StandardizedMeanDifference, standardized_mean_difference, welch
from tailgauge.core.compare.warnings import ComparisonWarning, IntervalWarnings, Warnings, note_conventions
from tailgauge.core.compare.paired import Resampled
from tailgauge.core.compare.two_sample import DistributionTest, distribution_test
from tailgauge.core.describe import Description, DescribeOptions, Resampling, admit, describe, restricted
from tailgauge.core.errors import DescriptorError, LimitExceeded, Location
from tailgauge.core.selection import Selection, shown_warnings
from tailgauge.core.weighted import WeightedData


@dataclass(frozen=True)
class Comparison:
    """Everything :func:`compare` returns; every contrast is second against first.

    ``differences`` has every name of ``SCALAR_DESCRIPTORS`` and ``ratios`` every name of
    ``SCALE_DESCRIPTORS`` (values ``None`` where undefined); ``quantile_shifts`` and
    ``standardized_quantiles`` follow the requested probabilities; ``resampling`` echoes the
    interval request (``None`` without one) while each input's own ``resampling`` names the
    seed spawned for it. ``warnings`` holds the comparison's own warnings, about its contrasts;
    each input's warnings are in its description (``first.warnings``, ``second.warnings``).
    """

    first: Description
    second: Description
    differences: dict[str, Difference]
    ratios: dict[str, Difference]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: list[QuantileShift]
    standardized_quantiles: list[StandardizedQuantile]
    distribution_test: DistributionTest
    warnings: list[ComparisonWarning]
    resampling: Resampling | None
    # Members left out of the answer by options.descriptors (the quantile members without quantiles).
    absent: tuple[str, ...] = ()


READ_BY_COMPARISON = ("mean", "standard_deviation", "median", "median_absolute_deviation_normal")


def side_seeds(seed: int) -> tuple[int, int]:
    """The seeds of the two inputs' resamples: two children spawned from ``seed``
    (``numpy.random.SeedSequence.spawn``), each reduced to 53 bits so it survives JSON.

    Each input is then described with its own seed, so ``first.resampling.seed`` reproduces
    that input's intervals on the descriptor endpoints, and the same comparison seed gives the
    same comparison bit for bit.
    """
    children = np.random.SeedSequence(seed).spawn(2)
    first, second = (int(child.generate_state(1, np.uint64)[0] >> np.uint64(11)) for child in children)
    return first, second


def _check_budget(first: WeightedData, second: WeightedData, options: DescribeOptions) -> None:
    """Both inputs' resamples count against one budget, checked before any is drawn.

    Needed beside :func:`~tailgauge.core.describe.admit`: the memory and time plan uses the
    resampling budget only for its advice, and each input's own bootstrap checks that input
    alone. ``resample.resampling_work`` is the bootstrap's own measure (it also rejects an input
    that cannot be resampled, named by side, before anything is described).
    """
    interval = options.interval
    assert interval is not None
    (work_first, per_first), (work_second, per_second) = (
        _for_side(side, resample.resampling_work, data, interval.resamples, options.subset_rows)
        for data, side in ((first, "first"), (second, "second"))
    )
    work = work_first + work_second
    if work > options.max_resample_work:
        allowed = int(options.max_resample_work // (per_first + per_second))
        if any(cost.shape_of(data, options.subset_rows).subset_rows for data in (first, second)):
            allowed -= allowed % resample.SUBSETS  # little bootstraps round resamples up to a multiple
        raise LimitExceeded(
            detail=(
                f"resampling both inputs touches {work:.3g} rows ({work_first:.3g} + {work_second:.3g}), "
                f"beyond this server's resampling budget of {options.max_resample_work:.3g}; lower "
                f"options.interval.resamples to at most {allowed}"
            ),
            locations=[Location("options.interval.resamples", f"at most {allowed} for these inputs")],
        )


def _for_side(side: str, function, *args, **kwargs):
    """``function(*args, **kwargs)``, with any core error's detail saying which input it concerns."""
    try:
        return function(*args, **kwargs)
    except DescriptorError as error:
        raise type(error)(detail=f"{side} input: {error.detail}", locations=error.locations) from None


def _estimates(description: Description) -> dict[str, float | None]:
    """Point values keyed as the resampling engine keys its statistics."""
    out: dict[str, float | None] = {name: d.value for name, d in description.descriptors.items()}
    for i, quantile in enumerate(description.quantiles):
        out[f"quantile:{i}"] = quantile.value
    return out


def compare(
    first: WeightedData, second: WeightedData, options: DescribeOptions, *, kinds: tuple[str, str]
) -> Comparison:
    """Describe both inputs by ``options`` and contrast them, second against first.

    With ``options.interval`` each input is resampled on its own (independent bootstraps, as
    for two samples in Efron & Tibshirani 1993, ch. 8), with seeds spawned from the one seed
    (:func:`side_seeds`); replicate k of a contrast is the contrast of the k-th resample of each
    input, e.g. ``stat(second*_k) - stat(first*_k)``, so the inputs' own intervals and those of
    their contrasts come from the same resamples. Percentile and basic intervals follow
    directly; BCa uses the two-sample acceleration from both inputs' jackknives
    (:func:`tailgauge.core.resample.acceleration`), and falls back to percentile, with a warning,
    where it cannot be computed or an input is resampled by the bag of little bootstraps. The
    compute budget ``options.max_resample_work`` covers both inputs together.

    Degenerate input is a documented outcome, never NaN: a contrast is ``None`` with a warning
    when either input leaves a descriptor undefined (``difference_undefined``), when a ratio's
    first value is zero (``ratio_undefined``), when the standardized mean difference has no
    sample sizes or no spread (``effect_size_undefined``) or when a result overflows float64
    (``not_representable``); the two-sample test is ``None`` with its ``reason`` where it does
    not apply.
    """
    interval = options.interval
    if not options.admitted:
        admit([first, second], options)
    options = dataclasses.replace(options, admitted=True)
    if options.descriptors is not None:
        # The effect size and the standardized quantiles read these of each input, shown or not.
        options = dataclasses.replace(options, descriptors=options.descriptors.also(READ_BY_COMPARISON))
    side_options = (options, options)
    if interval is not None:
        _check_budget(first, second, options)
        side_options = tuple(
            dataclasses.replace(options, interval=dataclasses.replace(interval, seed=seed))
            for seed in side_seeds(interval.seed)
        )
    described = (
        _for_side("first", describe, first, side_options[0], kind=kinds[0]),
        _for_side("second", describe, second, side_options[1], kind=kinds[1]),
    )
    notes = Warnings()
    pending = IntervalWarnings()
    estimates, resampled, contrasts, scale_ratios, shifts = _paired(described, (first, second), interval, notes, pending)
    standardized = standardized_quantiles(described, estimates, resampled, notes, pending)
    effect = standardized_mean_difference(described, estimates, resampled, notes, pending)
    test = distribution_test(first, second, notes)
    note_conventions(described, notes)
    pending.emit(notes)

    resampling = None
    if interval is not None:
        schemes = [d.resampling.scheme for d in described if d.resampling is not None]
        resampling = Resampling(
            method=interval.method,
            level=interval.level,
            resamples=interval.resamples,
            seed=interval.seed,
            scheme=f"each input resampled independently (first: {schemes[0]}; second: {schemes[1]})",
        )
    return Comparison(
        first=described[0],
        second=described[1],
        differences=contrasts,
        ratios=scale_ratios,
        standardized_mean_difference=effect,
        quantile_shifts=shifts,
        standardized_quantiles=standardized,
        distribution_test=test,
        # Each input's own warnings stay in its description (first, second): said once, where
        # they belong; the comparison lists only what concerns its contrasts.
        warnings=notes.of_comparison(),
        resampling=resampling,
    )


def _paired(
    described: tuple[Description, Description],
    data: tuple[WeightedData, WeightedData],
    interval: resample.IntervalOptions | None,
    notes: Warnings,
    pending: IntervalWarnings,
):
    """The contrasts every comparison has, in the order their warnings are given: the estimates,
    the paired replicates (``None`` without intervals), differences (with Welch's interval),
    ratios and quantile shifts."""
    estimates = (_estimates(described[0]), _estimates(described[1]))
    resampled = None
    if interval is not None:
        replicates = [d.resampling.replicates if d.resampling is not None else None for d in described]
        assert replicates[0] is not None and replicates[1] is not None
        resampled = Resampled(replicates[0], replicates[1], estimates, interval)
    contrasts = differences(estimates, resampled, notes, pending)
    scale_ratios = ratios(estimates, resampled, notes, pending)
    welch(contrasts, described, data, interval)
    shifts = quantile_shifts(described, resampled, notes, pending)
    return estimates, resampled, contrasts, scale_ratios, shifts


@dataclass(frozen=True)
class Contrasts:
    """A second description contrasted with a first, as :func:`compare` contrasts them (its
    differences, ratios, quantile shifts and standardized mean difference, with their
    warnings), for descriptions already computed, e.g. each group against a baseline group."""

    differences: dict[str, Difference]
    ratios: dict[str, Difference]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: list[QuantileShift]
    warnings: list[ComparisonWarning]


def contrast(
    described: tuple[Description, Description],
    data: tuple[WeightedData, WeightedData],
    interval: resample.IntervalOptions | None,
    selection: Selection | None = None,
) -> Contrasts:
    """The second of ``described`` against the first, by :func:`compare`'s rules; with
    ``interval`` each description must carry its resamples' replicates (the intervals of the
    contrasts pair replicate k of each). ``selection``: only the contrasts of shown descriptors,
    as :func:`restricted_comparison` keeps them. Each description reads only the mean and the
    standard deviation of the other (the standardized mean difference)."""
    notes = Warnings()
    pending = IntervalWarnings()
    estimates, resampled, contrasts, scale_ratios, shifts = _paired(described, data, interval, notes, pending)
    effect = standardized_mean_difference(described, estimates, resampled, notes, pending)
    note_conventions(described, notes)
    pending.emit(notes)
    warnings = notes.of_comparison()
    if selection is not None:
        contrasts = {name: d for name, d in contrasts.items() if selection.shows(name)}
        scale_ratios = {name: d for name, d in scale_ratios.items() if selection.shows(name)}
        shifts = shifts if selection.shows("quantiles") else []
        warnings = shown_warnings(warnings, selection)
    return Contrasts(contrasts, scale_ratios, effect, shifts, warnings)


# Comparison members that follow the quantiles member.
_QUANTILE_MEMBERS = ("quantile_shifts", "standardized_quantiles")


def restricted_comparison(comparison: Comparison, selection: Selection | None) -> Comparison:
    """``comparison`` as its answer shows it: each input restricted (``describe.restricted``), the
    contrasts of shown descriptors only, the quantile members only with ``quantiles``, and the
    warnings about what is shown. Applied last, after the scores read the first input."""
    if selection is None:
        return comparison
    quantiles = selection.shows("quantiles")
    return dataclasses.replace(
        comparison,
        first=restricted(comparison.first, selection),
        second=restricted(comparison.second, selection),
        differences={name: d for name, d in comparison.differences.items() if selection.shows(name)},
        ratios={name: d for name, d in comparison.ratios.items() if selection.shows(name)},
        warnings=shown_warnings(comparison.warnings, selection),
        absent=() if quantiles else _QUANTILE_MEMBERS,
    )
