"""The descriptors of the data behind a merged partial state, by describe's own families and
assembly; quantiles, where asked, from KLL sketches of the same data."""

from __future__ import annotations

import dataclasses
import math
from typing import TYPE_CHECKING

import numpy as np

from tailgauge.core.describe import (
    DescribeOptions,
    Description,
    Descriptor,
    QuantileSketches,
    Size,
    assemble,
    basis_of,
    quantiles_at,
)
from tailgauge.core.describe import evidence, moment_based, order_based, robust_shape
from tailgauge.core.describe.assembly import PLUG_IN_CENTRAL_MOMENTS
from tailgauge.core.describe.warnings import Warnings, note_degenerate
from tailgauge.core.describe.order_based import ROBUST_PROBABILITIES
from tailgauge.core.moments import CentralSums
from tailgauge.core.order_rules import whole_counts
from tailgauge.core.partial.state import PartialState
from tailgauge.core.partial.validation import check_state_request
from tailgauge.core.registry import FROM_QUANTILES, NEEDS_VALUES, SCALAR_DESCRIPTORS, WarningCode
from tailgauge.core.weighted import WeightMeaning

if TYPE_CHECKING:
    from tailgauge.core.sketches import SketchUnion


_QUANTILE_LABELS = {
    "median": "the 0.5 quantile",
    "interquartile_range": "Q(0.75) - Q(0.25)",
    "quartile_skewness": "(Q3 + Q1 - 2 Q2) / (Q3 - Q1) (Bowley)",
    "octile_kurtosis": "((E7 - E5) + (E3 - E1)) / (E6 - E2) (Moors 1988)",
    "octile_excess_kurtosis": "octile kurtosis - its normal value",
    "mean_median_gap": "(mean - median) / standard deviation",
}


def as_central_sums(state: PartialState) -> CentralSums:
    """The state in the scaled form of ``moments.CentralSums`` (exact power-of-two scaling).

    Values are scaled by ``2**pre`` to below 1 in magnitude and the deviations by ``2**post`` to
    below 1, as the two-pass path of ``central_sums`` does, so every ratio describe takes is in range.
    """
    assert state.minimum is not None and state.maximum is not None
    pre = -math.frexp(max(abs(state.minimum), abs(state.maximum)))[1]
    shift = math.ldexp(state.mean, pre)
    largest = max(math.ldexp(state.maximum, pre) - shift, shift - math.ldexp(state.minimum, pre))
    post = -math.frexp(largest)[1] if largest > 0.0 else 0
    sums = np.zeros(state.order + 1)
    sums[0] = state.count
    with np.errstate(under="ignore"):
        sums[2:] = np.ldexp(np.asarray(state.central_sums), (pre + post) * np.arange(2, state.order + 1))
    return CentralSums(mean=state.mean, sums=sums, pre_exponent=pre, shift=shift, post_exponent=post, centre=0.0)


def describe_state(
    state: PartialState,
    options: DescribeOptions,
    quantiles_from: SketchUnion | None = None,
    *,
    kind: str = "states",
) -> Description:
    """The descriptors of the data behind a (merged) partial state.

    From the state: mean, variance, standard deviation, coefficient of variation, skewness and
    kurtosis in the requested conventions with their normal-theory standard errors, moments up to
    the state's order, every Joanes & Gill family, the normality tests (whole counts), minimum,
    maximum and range, by the same code as ``describe``. Everything that needs the values is
    ``None`` with the warning ``not_available_from_states``; with ``quantiles_from`` (the union of
    KLL sketches of the same data) the quantiles, median, IQR, quartile skewness, octile kurtosis
    and mean-median gap are given as approximations, warning ``approximate_quantiles`` with the
    rank error. Moments above the state's order are ``None`` (``beyond_state_order``).

    Degenerate states follow ``describe``: a count of at most 1 has no spread
    (``single_observation``), zero ``M2`` is constant data (``constant_data``).

    The state is trusted: pass callers' states through ``merge_states`` (which checks them),
    even a single one.

    Raises
    ------
    UncomputableInput
        An empty state; ``options.interval`` or ``options.quantile_type`` (resampling and
        quantile rules need the values); sketches of other data (not ``count`` values, or other
        extremes than the state's).
    """
    check_state_request(state, options, quantiles_from)
    count = state.count
    integer = whole_counts(np.array([count]), count)
    basis = basis_of(
        WeightMeaning.FREQUENCY,
        total=count,
        effective=count,
        entries=0,
        integer=integer,
        binned=False,
        options=options,
    )
    sketch = quantiles_from
    if sketch is None:
        quantile_rule = median_rule = "not available: partial states carry no order statistics"
    else:
        quantile_rule = (
            f"approximate: smallest retained item whose rank reaches p in the union of {sketch.sketches} KLL "
            f"sketch(es) (Karnin, Lang & Liberty 2016; Apache DataSketches, inclusive rank), normalized rank "
            f"error {sketch.normalized_rank_error:.3g}"
        )
        median_rule = "approximate: the 0.5 quantile of the KLL sketches"
    # No quantile rule of the values applies: the sketches' own rule, or none.
    basis = dataclasses.replace(
        basis, quantile_type=None, quantile_definition=quantile_rule, median_rule=median_rule
    )
    notes = Warnings()
    sums = as_central_sums(state)
    constant = sums.scaled_central_moment(2) == 0.0
    note_degenerate(basis, constant, notes)

    descriptors: dict[str, Descriptor] = {}
    moment_based.moment_descriptors(
        descriptors,
        sums,
        basis,
        constant,
        notes,
        mean_label="arithmetic mean, merged from partial states (Chan, Golub & LeVeque 1979)",
        lowest=state.minimum,
    )
    descriptors["minimum"] = Descriptor(state.minimum, "smallest value")
    descriptors["maximum"] = Descriptor(state.maximum, "largest value")
    spread_range = None if basis.single else notes.finite(state.maximum - state.minimum, "range")
    descriptors["range"] = Descriptor(spread_range, "maximum - minimum")

    probabilities = np.array(options.probabilities, dtype=np.float64)
    undefined = "single" if basis.single else "constant" if constant else None
    if sketch is None:
        requested = np.full(probabilities.size, np.nan)
        for name, label in _QUANTILE_LABELS.items():
            descriptors[name] = Descriptor(None, median_rule if name == "median" else label)
    else:
        robust_probabilities = ROBUST_PROBABILITIES
        found = _sketch_quantiles(
            sketch, state, np.concatenate(([0.5, 0.25, 0.75], robust_probabilities, probabilities))
        )
        median, quartiles = float(found[0]), found[1:3]
        robust_values, requested = found[3 : 3 + robust_probabilities.size], found[3 + robust_probabilities.size :]
        descriptors["median"] = Descriptor(median, median_rule)
        iqr = None if basis.single else notes.finite(float(quartiles[1] - quartiles[0]), "interquartile_range")
        descriptors["interquartile_range"] = Descriptor(iqr, "Q(0.75) - Q(0.25), approximate quantiles (KLL sketches)")
        robust_shape.quantile_shape(descriptors, robust_values, "approximate quantiles (KLL sketches)", undefined, notes)
        robust_shape.mean_median_gap(descriptors)
        notes.add(
            WarningCode.APPROXIMATE_QUANTILES,
            f"the median and quantiles (and the IQR, quartile skewness, octile kurtosis and mean-median gap built "
            f"on them) come from KLL sketches of {sketch.n} values: each is a value whose true rank is within "
            f"{sketch.normalized_rank_error:.3g} x n of the requested p x n (the library's 99% bound for k = "
            f"{sketch.k}), not the exact order statistic"
            + ("; float sketches hold values rounded to float32" if "float" in sketch.item_types else ""),
            ["quantiles", *FROM_QUANTILES],
        )
        evidence.note_asymmetry(descriptors, found[:3][[1, 0, 2]], basis, notes)
    descriptors["median_absolute_deviation"] = Descriptor(None, "median of |x - median|")
    descriptors["median_absolute_deviation_normal"] = Descriptor(None, order_based.NORMAL_MAD_LABEL)
    descriptors["medcouple"] = Descriptor(None, robust_shape.MEDCOUPLE_LABEL)
    descriptors["half_sample_mode"] = Descriptor(None, robust_shape.HALF_SAMPLE_MODE_LABEL)
    for name in robust_shape.L_MOMENT_DESCRIPTORS:
        descriptors[name] = Descriptor(None, robust_shape.L_MOMENTS_LABEL)
    descriptors["lag1_autocorrelation"] = Descriptor(None, moment_based.LAG1_LABEL)
    for name in NEEDS_VALUES:  # the rest that needs the values (the tail and location means, Hill's index)
        descriptors.setdefault(name, Descriptor(None, "needs the values themselves"))
    missing = NEEDS_VALUES + (("quantiles",) + FROM_QUANTILES if sketch is None else ())
    notes.add(
        WarningCode.NOT_AVAILABLE_FROM_STATES,
        "partial states carry only counts, moments and extremes; these descriptors need the values themselves"
        + (" (send KLL sketches of the same data for approximate quantiles)" if sketch is None else ""),
        [*missing, "modes", "tail_contributions"],
    )
    # Keep the descriptor order of describe's responses.
    descriptors = {name: descriptors[name] for name in SCALAR_DESCRIPTORS}

    top = min(options.moment_order, state.order)
    moments = moment_based.moments_member(sums, top, basis.single, constant, notes)
    if options.moment_order > state.order:
        extra = options.moment_order - state.order
        moments.order = options.moment_order
        for column in (moments.raw, moments.central, moments.standardized):
            column.extend([None] * extra)
        notes.add(
            WarningCode.BEYOND_STATE_ORDER,
            f"the states carry central sums up to order {state.order} (the lowest order among them); "
            f"moments of order {state.order + 1} to {options.moment_order} are unknown",
            ["moments"],
        )
    reason = None if integer else "the tests need observations with whole counts"
    return assemble(
        kind=kind,
        size=Size(
            n=int(count) if integer else count,
            total_weight=count,
            omitted=0,
            distinct_values=None,
            zero_weight=0,
            effective_n=None,
        ),
        basis=basis,
        sums=sums,
        constant=constant,
        descriptors=descriptors,
        quantiles=quantiles_at(probabilities, requested),
        notes=notes,
        moments=lambda: moments,
        modes=None,
        normality=lambda: evidence.normality_tests(reason, sums, basis, constant, count, notes),
        central_moments=PLUG_IN_CENTRAL_MOMENTS + "; merged exactly from partial states (Pébay 2008)",
        weights=WeightMeaning.FREQUENCY,
        sketches=None
        if sketch is None
        else QuantileSketches(
            method="union of KLL sketches (Karnin, Lang & Liberty 2016; Apache DataSketches)",
            sketches=sketch.sketches,
            n=sketch.n,
            k=sketch.k,
            retained=sketch.retained,
            normalized_rank_error=sketch.normalized_rank_error,
            item_types=list(sketch.item_types),
        ),
    )


def _sketch_quantiles(sketch: SketchUnion, state: PartialState, probabilities: np.ndarray) -> np.ndarray:
    """Quantiles from the sketches; p = 0 and 1 are the state's exact extremes."""
    values = sketch.quantiles(probabilities)
    values[probabilities == 0.0] = state.minimum
    values[probabilities == 1.0] = state.maximum
    return values
