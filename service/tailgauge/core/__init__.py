"""The numeric core: pure numpy/scipy functions on the one weighted form; no HTTP here."""

from tailgauge.core.compare import Comparison, compare, restricted_comparison
from tailgauge.core.cost import Estimate
from tailgauge.core.describe import DEFAULT_PROBABILITIES, Description, DescribeOptions, admit, describe, restricted
from tailgauge.core.errors import DescriptorError, LimitExceeded, Location, UncomputableInput
from tailgauge.core.groups import Group, GroupDescription, admit_groups, describe_groups, group_seed
from tailgauge.core.moments import CentralSums, central_sums
from tailgauge.core.partial import (
    PartialState,
    check_states,
    describe_state,
    merge,
    merge_states,
    partial_state,
    state_of,
)
from tailgauge.core.resample import IntervalOptions
from tailgauge.core.scoring import Scores, standardize
from tailgauge.core.selection import Selection, UnknownName, choose
from tailgauge.core.sketches import (
    KllSketchContents,
    SketchUnion,
    combine_sketches,
    kll_sketch_bytes,
    read_kll_sketch,
)
from tailgauge.core.weighted import (
    PROBABILITY_TOLERANCE,
    WeightedData,
    WeightMeaning,
    from_array,
    from_bins,
    from_complete_samples,
    from_samples,
    from_table,
)

__all__ = [
    "DEFAULT_PROBABILITIES",
    "PROBABILITY_TOLERANCE",
    "CentralSums",
    "Comparison",
    "DescribeOptions",
    "Description",
    "DescriptorError",
    "Estimate",
    "Group",
    "GroupDescription",
    "IntervalOptions",
    "KllSketchContents",
    "LimitExceeded",
    "Location",
    "PartialState",
    "Scores",
    "Selection",
    "SketchUnion",
    "UncomputableInput",
    "UnknownName",
    "WeightMeaning",
    "WeightedData",
    "admit",
    "admit_groups",
    "central_sums",
    "check_states",
    "choose",
    "combine_sketches",
    "compare",
    "describe",
    "describe_groups",
    "describe_state",
    "from_array",
    "from_bins",
    "from_complete_samples",
    "from_samples",
    "from_table",
    "group_seed",
    "kll_sketch_bytes",
    "merge",
    "merge_states",
    "partial_state",
    "read_kll_sketch",
    "restricted",
    "restricted_comparison",
    "standardize",
    "state_of",
]
