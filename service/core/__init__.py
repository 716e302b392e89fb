"""The numeric core: pure numpy/scipy functions on the one weighted form; no HTTP here."""

from service.core.describe import DEFAULT_PROBABILITIES, Description, DescribeOptions, describe
from service.core.errors import DescriptorError, LimitExceeded, Location, UncomputableInput
from service.core.moments import CentralSums, central_sums
from service.core.resample import IntervalOptions
from service.core.weighted import (
    PROBABILITY_TOLERANCE,
    WeightedData,
    WeightMeaning,
    from_array,
    from_bins,
    from_samples,
    from_table,
)

__all__ = [
    "DEFAULT_PROBABILITIES",
    "PROBABILITY_TOLERANCE",
    "CentralSums",
    "DescribeOptions",
    "Description",
    "DescriptorError",
    "IntervalOptions",
    "LimitExceeded",
    "Location",
    "UncomputableInput",
    "WeightMeaning",
    "WeightedData",
    "central_sums",
    "describe",
    "from_array",
    "from_bins",
    "from_samples",
    "from_table",
]
