"""The full descriptor set of one input, with the conventions used and every warning.

This package is the only place where undefined results become ``None``: each ``None`` is paired
with a warning that names the descriptor and says why, and no NaN or infinity leaves it.
Nothing here knows which endpoint the data came from: the weighted form says what the weights
mean (unit, frequency, reliability, probability) and whether the support is bins.

Modules, in the order a description is made:

    options        DescribeOptions and the typed option values
    validation     the rules options and data must meet together, checked before computing
    basis          the estimator basis (conventions, divisors, quantile rule, families)
    warnings       the warnings collector and the warnings every description shares
    moment_based   mean, variance, shape families, moments, tail contributions, lag-1
    order_based    median, extremes, IQR, MAD, quantiles, modes, grouping
    robust_shape   quartile skewness, octile kurtosis, medcouple, half-sample mode, L-moments
    evidence       normality tests and the symmetry check
    intervals      bootstrap and classical intervals
    assembly       describe(), admit() and the Description assembly shared with partial states
    results        the result types
"""

from tailgauge.core.describe.assembly import admit, assemble, describe, quantiles_at, restricted
from tailgauge.core.describe.basis import Basis, basis_of, basis_of_data
from tailgauge.core.describe.evidence import POPULATION_SYMMETRY_THRESHOLD
from tailgauge.core.describe.moment_based import SAMPLE_CONTRIBUTORS
from tailgauge.core.describe.options import (
    DEFAULT_PROBABILITIES,
    Convention,
    DescribeOptions,
    KurtosisEstimator,
    QuantileType,
    SkewnessEstimator,
)
from tailgauge.core.describe.order_based import ROBUST_PROBABILITIES
from tailgauge.core.describe.results import (
    Contribution,
    Conventions,
    Description,
    Descriptor,
    Grouping,
    ModalClass,
    Modes,
    Moments,
    ResultWarning,
    NormalityTest,
    Quantile,
    QuantileSketches,
    Resampling,
    ShapeEstimate,
    ShapeEstimators,
    Size,
    TailContributions,
)
from tailgauge.core.describe.robust_shape import NORMAL_OCTILE_KURTOSIS
from tailgauge.core.describe.validation import check_description
from tailgauge.core.registry import (
    MOMENT_DESCRIPTORS,
    ROBUST_SHAPE_DESCRIPTORS,
    SCALAR_DESCRIPTORS,
    SHAPE_DESCRIPTORS,
    SPREAD_DESCRIPTORS,
)

__all__ = [
    "DEFAULT_PROBABILITIES",
    "MOMENT_DESCRIPTORS",
    "NORMAL_OCTILE_KURTOSIS",
    "POPULATION_SYMMETRY_THRESHOLD",
    "ROBUST_PROBABILITIES",
    "ROBUST_SHAPE_DESCRIPTORS",
    "SAMPLE_CONTRIBUTORS",
    "SCALAR_DESCRIPTORS",
    "SHAPE_DESCRIPTORS",
    "SPREAD_DESCRIPTORS",
    "Basis",
    "Contribution",
    "Convention",
    "Conventions",
    "DescribeOptions",
    "Description",
    "Descriptor",
    "Grouping",
    "KurtosisEstimator",
    "ModalClass",
    "Modes",
    "Moments",
    "NormalityTest",
    "ResultWarning",
    "Quantile",
    "QuantileSketches",
    "QuantileType",
    "Resampling",
    "ShapeEstimate",
    "ShapeEstimators",
    "Size",
    "SkewnessEstimator",
    "TailContributions",
    "admit",
    "assemble",
    "basis_of",
    "basis_of_data",
    "check_description",
    "describe",
    "quantiles_at",
    "restricted",
]
