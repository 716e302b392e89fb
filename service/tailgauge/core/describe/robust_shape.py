"""Robust shape and L-moments: quartile skewness, octile kurtosis, medcouple, half-sample mode,
mean-median gap and the L-moments (Hosking 1990)."""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from tailgauge.core import half_sample, lmoments, robust
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.describe.results import Descriptor
from tailgauge.core.moments import CentralSums, scale_by_power_of_two
from tailgauge.core.registry import WarningCode, names
from tailgauge.core.selection import EVERYTHING, Selection
from tailgauge.core.weighted import WeightedData, WeightMeaning

MEDCOUPLE_LABEL = "median of h(x_i, x_j) over x_i <= median <= x_j (Brys et al. 2004)"
HALF_SAMPLE_MODE_LABEL = "half-sample mode (Bickel & Fruhwirth 2006)"
L_MOMENTS_LABEL = "L-moments (Hosking 1990)"
L_MOMENT_DESCRIPTORS = names("l_moment")


def _normal_octile_kurtosis() -> float:
    e = stats.norm.ppf(np.arange(1, 8) / 8.0)
    return float(((e[6] - e[4]) + (e[2] - e[0])) / (e[5] - e[1]))



# Moors (1988): the octile kurtosis of any normal distribution, 1.2330951...
NORMAL_OCTILE_KURTOSIS = _normal_octile_kurtosis()



def robust_descriptors(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    sums: CentralSums | None,
    basis: Basis,
    quantiles: np.ndarray,
    constant: bool,
    notes: Warnings,
    selection: Selection = EVERYTHING,
) -> None:
    """Quartile skewness, octile kurtosis, medcouple, half-sample mode, mean-median gap, L-moments;
    the medcouple, the half-sample mode and the L-moments only when ``selection`` computes them."""
    method = "grouped quantiles" if data.binned else f"quantiles type {basis.quantile_type}"
    undefined = "single" if basis.single else "constant" if constant else None
    missing = None
    if data.binned:
        missing = (WarningCode.QUANTILE_IN_OPEN_BIN, "a quantile behind the ratio falls inside an open-ended bin")
    quantile_shape(descriptors, quantiles, method, undefined, notes, missing)

    mc = hsm = None
    if data.binned:
        notes.add(
            WarningCode.NEEDS_VALUES,
            "the medcouple and the half-sample mode need observed values; bins give only intervals",
            ["medcouple", "half_sample_mode"],
        )
    else:
        if undefined is None and selection.computes("medcouple"):
            support = data.support
            median = descriptors["median"].value
            if data.weights is None and support.values.size == data.values.size:
                mc = robust.medcouple(data.sorted_values, None, median)
            else:
                # Tied observations: the same kernel values, counted by the support's weights
                # (about the cost of the distinct values, not of the observations).
                mc = robust.medcouple(support.values, support.weights, median)
            mc = finite_or_none(mc)
        if not selection.computes("half_sample_mode"):
            pass
        elif data.meaning is WeightMeaning.UNIT:
            hsm = half_sample.half_sample_mode(data.sorted_values)
        elif data.integer_weights:
            hsm = half_sample.half_sample_mode(data.support.values, data.support.weights)
        else:
            notes.add(
                WarningCode.NEEDS_VALUES,
                "the half-sample mode is defined for observations with whole counts; see modes",
                ["half_sample_mode"],
            )
    descriptors["medcouple"] = Descriptor(mc, MEDCOUPLE_LABEL)
    descriptors["half_sample_mode"] = Descriptor(hsm, HALF_SAMPLE_MODE_LABEL)

    mean_median_gap(descriptors)

    if selection.computes_any(L_MOMENT_DESCRIPTORS):
        l_moments(descriptors, data, sums, basis, undefined, notes)



def quantile_shape(
    descriptors: dict[str, Descriptor],
    quantiles: np.ndarray,
    method: str,
    undefined: str | None,
    notes: Warnings,
    missing: tuple[WarningCode, str] | None = None,
) -> None:
    """Quartile skewness and octile kurtosis from the quantiles at ``ROBUST_PROBABILITIES``.

    A ratio left undefined gets its own reason: ``missing`` (code and message) where a quantile
    behind it is unknown (``None``: the caller has already named these descriptors, as for
    quantile types that need whole counts), ``quantile_spread_zero`` where its denominator is
    zero, ``not_representable`` where the ratio overflows.
    """
    q1, q2, q3, e1, e2, e3, e5, e6, e7 = np.asarray(quantiles, dtype=np.float64)  # numpy scalars: no ZeroDivisionError
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        # Halves first, so quantiles near +-1.8e308 do not overflow before the ratio.
        bowley_spread = 0.5 * q3 - 0.5 * q1
        moors_spread = 0.5 * e6 - 0.5 * e2
        bowley = (0.5 * q3 + 0.5 * q1 - q2) / bowley_spread
        moors = ((0.5 * e7 - 0.5 * e5) + (0.5 * e3 - 0.5 * e1)) / moors_spread
    defined_bowley = undefined is None and math.isfinite(bowley)
    defined_moors = undefined is None and math.isfinite(moors)
    descriptors["quartile_skewness"] = Descriptor(
        float(bowley) if defined_bowley else None, f"(Q3 + Q1 - 2 Q2) / (Q3 - Q1), {method} (Bowley)"
    )
    descriptors["octile_kurtosis"] = Descriptor(
        float(moors) if defined_moors else None, f"((E7 - E5) + (E3 - E1)) / (E6 - E2), {method} (Moors 1988)"
    )
    descriptors["octile_excess_kurtosis"] = Descriptor(
        float(moors - NORMAL_OCTILE_KURTOSIS) if defined_moors else None,
        f"octile kurtosis - {NORMAL_OCTILE_KURTOSIS!r} (its normal value)",
    )
    if undefined is not None:
        return
    reasons: dict[str, list[str]] = {"missing": [], "zero": [], "overflow": []}
    for names_, defined, behind, spread in (
        (["quartile_skewness"], defined_bowley, (q1, q2, q3), bowley_spread),
        (["octile_kurtosis", "octile_excess_kurtosis"], defined_moors, (e1, e2, e3, e5, e6, e7), moors_spread),
    ):
        if defined:
            continue
        reason = "missing" if not np.all(np.isfinite(behind)) else "zero" if spread == 0.0 else "overflow"
        reasons[reason].extend(names_)
    if reasons["missing"] and missing is not None:
        notes.add(missing[0], missing[1], reasons["missing"])
    if reasons["zero"]:
        notes.add(
            WarningCode.QUANTILE_SPREAD_ZERO,
            "the quantiles in the denominator coincide, so the ratio is undefined",
            reasons["zero"],
        )
    for name in reasons["overflow"]:
        if name != "octile_excess_kurtosis":
            notes.add(
                WarningCode.NOT_REPRESENTABLE,
                f"{name} is outside the range of float64 for these data (its denominator is too small)",
                [name] + (["octile_excess_kurtosis"] if name == "octile_kurtosis" else []),
            )



def mean_median_gap(descriptors: dict[str, Descriptor]) -> None:
    mean, median, sd = descriptors["mean"].value, descriptors["median"].value, descriptors["standard_deviation"].value
    gap = None
    if mean is not None and median is not None and sd:
        gap = finite_or_none((0.5 * mean - 0.5 * median) / (0.5 * sd))
    descriptors["mean_median_gap"] = Descriptor(gap, "(mean - median) / standard deviation")



def l_moments(
    descriptors: dict[str, Descriptor],
    data: WeightedData,
    sums: CentralSums | None,
    basis: Basis,
    undefined: str | None,
    notes: Warnings,
) -> None:
    # L-moments are linear in the data: compute them on data scaled by a power of two (exact),
    # so nothing overflows near float64's limit, and scale l1 and l2 back.
    if data.binned:
        points = data.edges[np.isfinite(data.edges)]
    else:
        ordered = data.sorted_values if data.unit_sorted else data.support.values
        points = ordered[[0, -1]]
    largest = float(np.max(np.abs(points)))
    exponent = -math.frexp(largest)[1] if largest > 0.0 else 0
    values = None
    if data.binned:
        if data.open_bin_weight == 0.0:
            assert data.edges is not None and data.weights is not None
            values = lmoments.binned_lmoments(np.ldexp(data.edges, exponent), data.weights)
            label = "population L-moments of even spread within bins (approximation)"
    elif data.meaning is WeightMeaning.PROBABILITY:
        support = data.support
        values = lmoments.population_lmoments(np.ldexp(support.values, exponent), support.weights)
        label = "population L-moments (Hosking 1990)"
    elif data.integer_weights and data.meaning is not WeightMeaning.RELIABILITY:
        if data.total_weight >= 4:
            if data.weights is None:
                values = lmoments.sample_lmoments(data.sorted_values, None, exponent)
            else:
                support = data.support
                values = lmoments.sample_lmoments(support.values, support.weights, exponent)
            label = "unbiased, from probability-weighted moments (Hosking 1990)"
        else:
            notes.add(
                WarningCode.TOO_FEW_OBSERVATIONS,
                f"the unbiased L-moments up to order 4 need at least 4 observations; n = {data.total_weight:g}",
                L_MOMENT_DESCRIPTORS,
            )
    else:
        support = data.support
        values = lmoments.population_lmoments(np.ldexp(support.values, exponent), support.weights)
        label = "plug-in L-moments of the weighted distribution (no unbiased form for these weights)"
    if values is None:
        for name in L_MOMENT_DESCRIPTORS:
            descriptors[name] = Descriptor(None, L_MOMENTS_LABEL)
        return
    l1, l2, l3, l4 = values
    ratios_defined = l2 > 0.0 and undefined is None
    location = notes.finite(scale_by_power_of_two(l1, -exponent), "l_location")
    scale = None if undefined == "single" else notes.finite(scale_by_power_of_two(l2, -exponent), "l_scale")
    descriptors["l_location"] = Descriptor(location, f"l1, {label}")
    descriptors["l_scale"] = Descriptor(scale, f"l2, {label}")
    descriptors["l_skewness"] = Descriptor(finite_or_none(l3 / l2) if ratios_defined else None, f"t3 = l3 / l2, {label}")
    descriptors["l_kurtosis"] = Descriptor(finite_or_none(l4 / l2) if ratios_defined else None, f"t4 = l4 / l2, {label}")
