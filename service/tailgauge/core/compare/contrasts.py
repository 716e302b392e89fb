"""Contrasts of two descriptions, second against first: differences of every scalar descriptor,
ratios of the scale descriptors, quantile shifts and quantiles on the z scale, each with its
bootstrap interval (:mod:`tailgauge.core.compare.paired`) when intervals are asked for.

A contrast is ``None`` when either input leaves a descriptor undefined (``difference_undefined``),
when a ratio's first value is zero (``ratio_undefined``) or when it overflows float64
(``not_representable``).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from tailgauge.core.compare.warnings import IntervalWarnings, Warnings, finite_or_none, side_of, undefined_by_side
from tailgauge.core.compare.paired import Contrast, Resampled, Stats
from tailgauge.core.compare.vocabulary import (
    DIFFERENCE_DESCRIPTORS,
    SCALE_DESCRIPTORS,
    no_interval_reason,
    no_quantile_interval_reason,
)
from tailgauge.core.classical import ClassicalInterval
from tailgauge.core.describe import Description
from tailgauge.core.resample import Interval
from tailgauge.core.scoring import standardized
from tailgauge.core.registry import WarningCode


@dataclass(frozen=True)
class Difference:
    """One contrast of the two inputs (a difference, second minus first, or a ratio, second / first).

    ``interval`` and ``standard_error`` come from independent resampling of both inputs;
    ``classical_interval`` and ``classical_standard_error`` are Welch's t interval and its
    standard error sqrt(s1^2/n1 + s2^2/n2), given for the difference of means only.
    """

    value: float | None
    interval: Interval | None = None
    standard_error: float | None = None
    classical_interval: ClassicalInterval | None = None
    classical_standard_error: float | None = None


@dataclass(frozen=True)
class QuantileShift:
    """q2(p) - q1(p), each quantile by the rule its description names."""

    probability: float
    value: float | None
    interval: Interval | None = None
    standard_error: float | None = None


@dataclass(frozen=True)
class StandardizedPair:
    """One quantile of each input on a standardized scale, and second minus first."""

    first: float | None
    second: float | None
    difference: float | None
    interval: Interval | None = None


@dataclass(frozen=True)
class StandardizedQuantile:
    """Quantiles at ``probability`` free of location and scale.

    ``z``: (q(p) - mean) / standard deviation of each input; ``robust_z``:
    (q(p) - median) / normal-consistent MAD. Equal shapes give equal values whatever the
    location and scale; the differences show where the shapes part.
    """

    probability: float
    z: StandardizedPair
    robust_z: StandardizedPair


def difference_of(name: str) -> Contrast:
    return lambda a, b: b[name] - a[name]


def ratio_of(name: str) -> Contrast:
    return lambda a, b: b[name] / a[name]


def standardized_gap(quantile: str, centre: str, scale: str) -> Contrast:
    def gap(a: Stats, b: Stats):
        second = standardized(b[quantile], b[centre], b[scale])
        return second - standardized(a[quantile], a[centre], a[scale])

    return gap


def differences(
    estimates: tuple[Stats, Stats], resampled: Resampled | None, notes: Warnings, pending: IntervalWarnings
) -> dict[str, Difference]:
    """Second minus first for every scalar descriptor."""
    return _contrasts("differences", DIFFERENCE_DESCRIPTORS, estimates, resampled, notes, pending)


def ratios(
    estimates: tuple[Stats, Stats], resampled: Resampled | None, notes: Warnings, pending: IntervalWarnings
) -> dict[str, Difference]:
    """Second / first for every scale descriptor (undefined where the first is zero)."""
    return _contrasts("ratios", SCALE_DESCRIPTORS, estimates, resampled, notes, pending)


def _contrasts(
    what: str,
    names: tuple[str, ...],
    estimates: tuple[Stats, Stats],
    resampled: Resampled | None,
    notes: Warnings,
    pending: IntervalWarnings,
) -> dict[str, Difference]:
    """One rule for differences and ratios: undefined by side, zero first (ratios), overflow."""
    ratio = what == "ratios"
    first, second = estimates
    out: dict[str, Difference] = {}
    missing: dict[str, list[str]] = {}
    zero, overflowed = [], []
    for name in names:
        a, b = first[name], second[name]
        member = f"{what}.{name}"
        if a is None or b is None:
            missing.setdefault(side_of(a, b), []).append(member)
            out[name] = Difference(None)
            continue
        if ratio and a == 0.0:
            zero.append(member)
            out[name] = Difference(None)
            continue
        with np.errstate(over="ignore", under="ignore"):
            value = finite_or_none(np.float64(b) / np.float64(a) if ratio else np.float64(b) - np.float64(a))
        if value is None:
            overflowed.append(member)
            out[name] = Difference(None)
            continue
        contrast = ratio_of(name) if ratio else difference_of(name)
        out[name] = _with_interval(Difference(value), contrast, value, name, member, resampled, pending)
    undefined_by_side(missing, what, notes)
    if zero:
        notes.add(
            WarningCode.RATIO_UNDEFINED,
            "the first input's value is zero, so the ratio second / first is undefined",
            zero,
        )
    if overflowed:
        kind = "ratio" if ratio else "difference"
        notes.add(WarningCode.NOT_REPRESENTABLE, f"the {kind} is outside the range of float64", overflowed)
    return out


def _with_interval(
    result: Difference,
    contrast: Contrast,
    value: float,
    name: str,
    member: str,
    resampled: Resampled | None,
    pending: IntervalWarnings,
) -> Difference:
    """``result`` with the bootstrap interval of ``contrast`` where the engine resamples ``name``."""
    if resampled is None:
        return result
    reason = no_interval_reason(name) or resampled.left_out.get(name)
    if reason is not None:
        pending.skip(member, reason)
        return result
    bootstrapped = resampled.interval(contrast, value)
    pending.record(member, bootstrapped)
    return dataclasses.replace(
        result, interval=bootstrapped.interval, standard_error=bootstrapped.standard_error
    )


def quantile_shifts(
    described: tuple[Description, Description],
    resampled: Resampled | None,
    notes: Warnings,
    pending: IntervalWarnings,
) -> list[QuantileShift]:
    out = []
    missing: dict[str, list[str]] = {}
    overflowed = []
    for i, (qa, qb) in enumerate(zip(described[0].quantiles, described[1].quantiles)):
        member = f"quantile_shifts[{i}]"
        if qa.value is None or qb.value is None:
            missing.setdefault(side_of(qa.value, qb.value), []).append(member)
            out.append(QuantileShift(qa.probability, None))
            continue
        with np.errstate(over="ignore"):
            value = finite_or_none(np.float64(qb.value) - np.float64(qa.value))
        if value is None:
            overflowed.append(member)
            out.append(QuantileShift(qa.probability, None))
            continue
        shift = QuantileShift(qa.probability, value)
        if resampled is not None:
            reason = no_quantile_interval_reason(qa.probability)
            if reason is not None:
                pending.skip(member, reason)
            else:
                result = resampled.interval(difference_of(f"quantile:{i}"), value)
                pending.record(member, result)
                shift = dataclasses.replace(
                    shift, interval=result.interval, standard_error=result.standard_error
                )
        out.append(shift)
    undefined_by_side(missing, "quantile shifts", notes)
    if overflowed:
        notes.add(WarningCode.NOT_REPRESENTABLE, "the quantile shift is outside the range of float64", overflowed)
    return out


def standardized_quantiles(
    described: tuple[Description, Description],
    estimates: tuple[Stats, Stats],
    resampled: Resampled | None,
    notes: Warnings,
    pending: IntervalWarnings,
) -> list[StandardizedQuantile]:
    first, second = estimates
    undefined: dict[str, list[str]] = {}
    overflowed = []

    def pair(i: int, probability: float, centre: str, scale: str, member: str) -> StandardizedPair:
        quantile = f"quantile:{i}"
        values = []
        for side, stats_ in (("first", first), ("second", second)):
            q, c, s = stats_[quantile], stats_[centre], stats_[scale]
            if q is None or c is None or s is None:
                why = f"the {side} input leaves its quantile, {centre} or {scale} undefined"
                undefined.setdefault(why, []).append(f"{member}.{side}")
                values.append(None)
            elif s == 0.0:
                undefined.setdefault(f"the {side} input's {scale} is zero", []).append(f"{member}.{side}")
                values.append(None)
            else:
                z = finite_or_none(standardized(np.float64(q), c, s))
                if z is None:
                    overflowed.append(f"{member}.{side}")
                values.append(z)
        a, b = values
        if a is None or b is None:
            return StandardizedPair(a, b, None)
        difference = finite_or_none(np.float64(b) - np.float64(a))
        if difference is None:
            overflowed.append(f"{member}.difference")
            return StandardizedPair(a, b, None)
        result = StandardizedPair(a, b, difference)
        if resampled is not None:
            reason = no_quantile_interval_reason(probability)
            if reason is not None:
                pending.skip(f"{member}.interval", reason)
            else:
                bootstrapped = resampled.interval(standardized_gap(quantile, centre, scale), difference)
                pending.record(f"{member}.interval", bootstrapped)
                result = dataclasses.replace(result, interval=bootstrapped.interval)
        return result

    out = []
    for i, quantile in enumerate(described[0].quantiles):
        p, member = quantile.probability, f"standardized_quantiles[{i}]"
        out.append(
            StandardizedQuantile(
                p,
                pair(i, p, "mean", "standard_deviation", f"{member}.z"),
                pair(i, p, "median", "median_absolute_deviation_normal", f"{member}.robust_z"),
            )
        )
    for reason, members in undefined.items():
        notes.add(WarningCode.DIFFERENCE_UNDEFINED, f"standardized quantiles are undefined where {reason}", members)
    if overflowed:
        notes.add(WarningCode.NOT_REPRESENTABLE, "a standardized quantile is outside the range of float64", overflowed)
    return out
