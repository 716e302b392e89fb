"""The estimator basis: how what the weights mean, the sizes and the options become formulas.

Computed once per description, after :mod:`tailgauge.core.describe.validation` has checked the
options against the data, and shared by every descriptor family and by partial states.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from tailgauge.core import order_statistics
from tailgauge.core.moments import VarianceRule, variance_factor
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.weighted import WeightedData, WeightMeaning


@dataclass(frozen=True)
class Basis:
    """How the weights translate into estimator formulas."""

    population: bool
    reliability: bool
    sample_size: float | None  # n in bias corrections and normal-theory standard errors
    variance_factor: float  # sample variance = plug-in variance * variance_factor
    variance_rule: VarianceRule  # which divisor: the rule of tailgauge.core.moments.variance_factor
    variance_label: str
    divisor_label: str
    bias_correctable: bool
    single: bool  # no information on spread: one observation, or every count in one bin
    quantile_type: int | None
    quantile_definition: str
    median_rule: str
    skewness_family: str
    kurtosis_family: str
    single_bin: bool = False  # binned data with every count in one bin (then also ``single``)

    @property
    def convention(self) -> str:
        return "population" if self.population else "sample"


def basis_of_data(data: WeightedData, options: DescribeOptions) -> Basis:
    """The basis of ``data``; all counts in one bin leave the spread within it unknown (``single``)."""
    basis = basis_of(
        data.meaning,
        total=data.total_weight,
        effective=data.effective_size,
        entries=data.count,
        integer=data.integer_weights,
        binned=data.binned,
        options=options,
    )
    if data.binned and int(np.count_nonzero(data.weights)) == 1:
        # The midpoint would report zero spread, but the spread within the bin is unknown, so
        # spread and shape are undefined rather than zero.
        return dataclasses.replace(basis, single=True, single_bin=True)
    return basis


def basis_of(
    meaning: WeightMeaning,
    *,
    total: float,
    effective: float,
    entries: int,
    integer: bool,
    binned: bool,
    options: DescribeOptions,
) -> Basis:
    """The estimator basis from what the weights mean, the total and effective sizes and the support.

    The options are taken as checked (see :func:`tailgauge.core.describe.validation.check_description`).
    """
    probability = meaning is WeightMeaning.PROBABILITY
    reliability = meaning is WeightMeaning.RELIABILITY
    population = probability or options.convention == "population"

    rule: VarianceRule = "population" if population else "reliability" if reliability else "sample"
    if population:
        divisor = "total weight (population)"
        variance_label = "population (divisor n)" if not probability else "population (exact)"
    elif reliability:
        divisor = "V1 - V2 / V1 (reliability weights)"
        variance_label = "sample, reliability weights (divisor V1 - V2/V1)"
    else:
        divisor = "n - 1"
        variance_label = "sample (divisor n - 1)"

    # A population of one point has zero spread; a sample of one says nothing about spread.
    if population:
        single = False
    elif reliability:
        single = entries <= 1 or effective <= 1.0
    else:
        single = total <= 1.0
    # No sample variance without a positive divisor: the factor is then infinite (never read).
    positive = total > 1.0 if rule == "sample" else effective > 1.0 if rule == "reliability" else True
    factor = variance_factor(rule, total, 1.0 / effective if reliability else None) if positive else math.inf

    if binned:
        quantile_type = None
        definition = "grouped: linear interpolation within the bin holding p N (values spread evenly in bins)"
        median_rule = "grouped: interpolated within the bin holding N / 2"
    elif probability:
        quantile_type = options.quantile_type or 1
        definition = (
            "population: smallest x with F(x) >= p"
            if quantile_type == 1
            else "population: smallest x with F(x) >= p, averaged with the next value where F(x) = p"
        )
        median_rule = "population: smallest x with F(x) >= 1/2"
    else:
        quantile_type = options.quantile_type or (7 if integer else 2)
        definition = f"Hyndman & Fan (1996) type {quantile_type}: {order_statistics.QUANTILE_TYPE_NAMES[quantile_type]}"
        if not integer:
            definition += " (from the weighted distribution function)"
        median_rule = (
            "average of the two middle order statistics"
            if integer
            else "weighted: smallest x with F(x) >= 1/2, averaged with the next value where F(x) = 1/2"
        )

    # Bias corrections need a sample size in whole observations: raw samples and counts.
    bias_correctable = meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY)
    sample_defaults = bias_correctable and not population
    skewness_family = options.skewness_estimator or ("G1" if sample_defaults else "g1")
    kurtosis_family = options.kurtosis_estimator or ("G2" if sample_defaults else "g2")
    return Basis(
        population=population,
        reliability=reliability,
        sample_size=None if probability else (effective if reliability else total),
        variance_factor=factor,
        variance_rule=rule,
        variance_label=variance_label,
        divisor_label=divisor,
        bias_correctable=bias_correctable,
        single=single,
        quantile_type=quantile_type,
        quantile_definition=definition,
        median_rule=median_rule,
        skewness_family=skewness_family,
        kurtosis_family=kurtosis_family,
    )
