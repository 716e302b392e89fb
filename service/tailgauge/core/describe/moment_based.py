"""The moment-based family: mean, variance, standard deviation, coefficient of variation, the
Joanes & Gill skewness and kurtosis families, the moments member, tail contributions and the
lag-1 autocorrelation, all from the shifted central power sums of ``tailgauge.core.moments``."""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from tailgauge.core import grouped, shape, tail
from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.warnings import Warnings, finite_or_none
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.results import Contribution, Descriptor, Moments, ShapeEstimate, ShapeEstimators, TailContributions
from tailgauge.core.moments import CentralSums, scale_by_power_of_two
from tailgauge.core.registry import WarningCode
from tailgauge.core.serial import lag1_autocorrelation
from tailgauge.core.weighted import WeightedData

LAG1_LABEL = "r(1) = sum (x_i - mean)(x_i+1 - mean) / sum (x_i - mean)^2"


# Largest contributors listed for raw samples (tables and bins list every outcome up to the limit).
SAMPLE_CONTRIBUTORS = 10



def moment_descriptors(
    descriptors: dict[str, Descriptor],
    sums: CentralSums | None,
    basis: Basis,
    constant: bool,
    notes: Warnings,
    *,
    mean_label: str,
    lowest: float,
    sheppard_width: float | None = None,
) -> None:
    """Mean, variance, standard deviation, coefficient of variation, skewness and kurtosis from ``sums``.

    ``lowest`` is the smallest value (for bins, the lower edge of the lowest occupied bin): the
    coefficient of variation is defined only on a ratio scale. ``sheppard_width``: the bin width
    in the scaled units of ``sums`` when they carry Sheppard's corrections (the variance is then
    ``grouped.sheppard_variance``: s^2 - h^2/12 under the sample convention).
    """
    mean = None if sums is None else notes.finite(sums.mean, "mean")
    descriptors["mean"] = Descriptor(mean, mean_label)
    variance = sd = None
    variance_label = basis.variance_label
    if sums is not None and not basis.single:
        # In scaled units, so the square root is representable even when the variance is not.
        scaled = sums.scaled_central_moment(2) * basis.variance_factor
        if sheppard_width is not None:
            scaled = grouped.sheppard_variance(sums.scaled_central_moment(2), sheppard_width, basis.variance_factor)
            variance_label += ", Sheppard-corrected (" + ("m2" if basis.population else "s^2") + " - h^2/12)"
        exponent = sums.scale_exponent
        variance = notes.finite(scale_by_power_of_two(scaled, 2 * exponent), "variance")
        sd = notes.finite(scale_by_power_of_two(math.sqrt(scaled), exponent), "standard_deviation")
    descriptors["variance"] = Descriptor(variance, variance_label)
    descriptors["standard_deviation"] = Descriptor(sd, f"square root of the {basis.variance_label} variance")
    descriptors["coefficient_of_variation"] = Descriptor(
        coefficient_of_variation(lowest, sums, sd, basis, notes),
        f"standard deviation ({basis.variance_label}) / mean",
    )
    shape_descriptors(descriptors, sums, basis, basis.single or constant, notes)



def coefficient_of_variation(
    lowest: float, sums: CentralSums | None, sd: float | None, basis: Basis, notes: Warnings
) -> float | None:
    """``sd / mean`` for data on a ratio scale (no negative values) with a non-zero mean.

    With no negative values the mean is zero only for all-zero data, and otherwise at least
    ``sd / sqrt(n)``, so "mean near zero relative to the spread" cannot occur on a ratio scale.
    """
    if sums is None or basis.single:
        return None
    reason = None
    if lowest < 0.0:
        reason = "the data include negative values, so they are not on a ratio scale"
    elif sums.mean == 0.0:
        reason = "the mean is zero"
    elif sd is None:
        reason = "the standard deviation is outside the range of float64"
    if reason is not None:
        notes.add(
            WarningCode.COEFFICIENT_OF_VARIATION_UNDEFINED,
            f"the coefficient of variation is undefined: {reason}",
            ["coefficient_of_variation"],
        )
        return None
    return notes.finite(sd / sums.mean, "coefficient_of_variation")



def shape_descriptors(
    descriptors: dict[str, Descriptor],
    sums: CentralSums | None,
    basis: Basis,
    undefined: bool,
    notes: Warnings,
) -> None:
    for name, family, plug_in_family in (
        ("skewness", basis.skewness_family, "g1"),
        ("excess_kurtosis", basis.kurtosis_family, "g2"),
    ):
        affected = ["skewness"] if name == "skewness" else ["kurtosis", "excess_kurtosis"]
        value = error = None
        label = f"{family} (plug-in)" if basis.reliability and family == plug_in_family else family
        if sums is not None:
            value, error, reason = family_estimate(family, sums, basis, undefined)
            if reason is None and value is not None and basis.reliability and not basis.population:
                # The sample convention asks for a bias-corrected value, which these weights lack.
                notes.add(
                    WarningCode.PLUG_IN_ESTIMATOR,
                    f"reliability weights have no published bias-corrected {name.replace('_', ' ')}; "
                    f"the plug-in {plug_in_family} is reported",
                    affected,
                )
            elif reason == "bias-corrected":
                # No published bias correction for these weights: the plug-in value, named as such.
                value, error, _ = family_estimate(plug_in_family, sums, basis, undefined)
                label = f"{plug_in_family} (plug-in)"
                notes.add(
                    WarningCode.PLUG_IN_ESTIMATOR,
                    f"{family} has no published form for reliability weights; "
                    f"the plug-in {plug_in_family} is reported instead",
                    affected,
                )
            elif reason is not None:
                notes.add(WarningCode.TOO_FEW_OBSERVATIONS, f"{name.replace('_', ' ')} {family} {reason}", affected)
        if name == "skewness":
            descriptors["skewness"] = Descriptor(value, label, error)
        else:
            descriptors["kurtosis"] = Descriptor(
                None if value is None else value + 3.0, f"{label} + 3 (normal = 3)", error
            )
            descriptors["excess_kurtosis"] = Descriptor(value, f"{label} (normal = 0)", error)



def family_estimate(
    family: str, sums: CentralSums, basis: Basis, undefined: bool
) -> tuple[float | None, float | None, str | None]:
    """(value, normal-theory standard error, reason it is undefined) for one J&G family."""
    skewness = family in shape.SKEWNESS_FAMILIES
    plug_in = sums.standardized_moment(3) if skewness else sums.standardized_moment(4) - 3.0
    if undefined:
        return None, None, None
    if family in ("g1", "g2") and not basis.bias_correctable:
        # The plug-in value; no sampling distribution is claimed for probabilities or reliability weights.
        return finite_or_none(plug_in), None, None
    if not basis.bias_correctable:
        return None, None, "bias-corrected"
    n = basis.sample_size
    assert n is not None
    minimum = shape.SKEWNESS_MIN_N[family] if skewness else shape.KURTOSIS_MIN_N[family]
    if n < minimum:
        # The same for either convention: which families are defined depends on n alone.
        return None, None, f"needs at least {minimum} observations; n = {n:g}"
    estimate = (shape.skewness if skewness else shape.excess_kurtosis)(plug_in, n, family)
    return finite_or_none(float(estimate.value)), finite_or_none(float(estimate.standard_error)), None



def shape_estimators(sums: CentralSums | None, basis: Basis, constant: bool) -> ShapeEstimators:
    """Every Joanes & Gill family side by side; ``None`` where it does not apply or n is too small."""
    undefined = sums is None or basis.single or constant

    def row(family: str) -> ShapeEstimate:
        if undefined:
            return ShapeEstimate(family, None, None)
        value, error, _ = family_estimate(family, sums, basis, False)
        return ShapeEstimate(family, value, error)

    return ShapeEstimators(
        skewness=[row(f) for f in shape.SKEWNESS_FAMILIES],
        excess_kurtosis=[row(f) for f in shape.KURTOSIS_FAMILIES],
    )



def moments_member(sums: CentralSums, top: int, single: bool, constant: bool, notes: Warnings) -> Moments:
    raw, central, standardized = [], [], []
    for k in range(1, top + 1):
        raw.append(notes.finite(sums.raw_moment(k), f"moments.raw[{k - 1}] (order {k})"))
        central.append(
            0.0 if k == 1 else notes.finite(sums.central_moment(k), f"moments.central[{k - 1}] (order {k})")
        )
        if single or constant:
            standardized.append(None)
        else:
            standardized.append(finite_or_none(sums.standardized_moment(k)))
    return Moments(order=top, raw=raw, central=central, standardized=standardized)



def sheppard(data: WeightedData, sums: CentralSums, notes: Warnings) -> tuple[CentralSums, float | None]:
    """The sums with Sheppard's corrections of orders 2 and 4, and the bin width in their scaled
    units (``None``, with the sums unchanged, where the corrections do not apply)."""
    width = grouped.equal_width(data)
    if width is None:
        notes.add(
            WarningCode.SHEPPARD_NOT_APPLICABLE,
            "Sheppard's corrections assume bins of equal width; these widths differ, so no correction was applied",
            ["variance", "standard_deviation", "kurtosis", "excess_kurtosis", "moments"],
        )
        return sums, None
    # In the scaled units of the sums, so the correction is exact wherever float64 can hold it.
    scaled_width = math.ldexp(width, -sums.scale_exponent)
    m2, m4 = sums.scaled_central_moment(2), sums.scaled_central_moment(4)
    corrected2, corrected4 = grouped.sheppard_corrected(m2, m4, scaled_width)
    if not (corrected2 > 0.0 and corrected4 > 0.0 and math.isfinite(corrected4)):
        notes.add(
            WarningCode.SHEPPARD_NOT_APPLICABLE,
            f"the bins (width {width:g}) are too wide for the spread of the data: the corrected second or "
            "fourth moment would not be positive, so no correction was applied",
            ["variance", "standard_deviation", "kurtosis", "excess_kurtosis", "moments"],
        )
        return sums, None
    corrected = sums.sums.copy()
    corrected[2] = corrected2 * sums.total_weight
    corrected[4] = corrected4 * sums.total_weight
    return dataclasses.replace(sums, sums=corrected), scaled_width



def tail_contributions(
    data: WeightedData,
    sums: CentralSums | None,
    undefined: bool,
    options: DescribeOptions,
    kind: str,
    notes: Warnings,
) -> TailContributions | None:
    if sums is None or undefined:
        return None
    if data.binned:
        values, weights = data.values, data.weights
    else:
        support = data.support
        values, weights = support.values, support.weights
    found = tail.contributions(
        values,
        weights,
        sums,
        limit=SAMPLE_CONTRIBUTORS if kind == "samples" else options.contributions_limit,
        largest_only=kind == "samples",
    )
    third, fourth = sums.standardized_moment(3), sums.standardized_moment(4)
    if not (math.isfinite(third) and math.isfinite(fourth) and np.all(np.isfinite(found.fourth))):
        notes.add(WarningCode.NOT_REPRESENTABLE, "the tail contributions are outside float64's range", ["tail_contributions"])
        return None
    return TailContributions(
        standardized_third=float(third),
        standardized_fourth=float(fourth),
        complete=found.complete,
        outcomes=[
            Contribution(float(v), float(w), float(t), float(f))
            for v, w, t, f in zip(found.values, found.weights, found.third, found.fourth)
        ],
    )



def lowest_value(data: WeightedData) -> float:
    """The smallest value; for bins the lower edge of the lowest bin holding data."""
    if data.binned:
        assert data.edges is not None and data.weights is not None
        return float(data.edges[int(np.flatnonzero(data.weights > 0)[0])])
    if "sorted_values" in data.__dict__ or data.weights is not None:
        return float(data.sorted_values[0])
    return float(np.min(data.values))  # one pass, when nothing else needs the data sorted



def lag1(
    data: WeightedData, sums: CentralSums | None, single: bool, constant: bool, notes: Warnings
) -> float | None:
    # No order first: it leaves r(1) undefined whatever else the data are (tables, bins with an
    # open bin, weighted samples).
    if not data.ordered or data.weights is not None:
        notes.add(
            WarningCode.NO_OBSERVATION_ORDER,
            "lag-1 autocorrelation needs unweighted observations in their original order",
            ["lag1_autocorrelation"],
        )
        return None
    if single or constant or sums is None:
        return None
    return finite_or_none(lag1_autocorrelation(data.values, sums))
