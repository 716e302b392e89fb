"""Mergeable partial states: the count, mean, central sums and extremes of one part of the data.

A state is what a task computes where its part of the data lives (a Dask chunk, a Spark
partition); states of disjoint parts merge exactly into the state of their union, and the
moment descriptors of the union follow from the merged state alone. Everything that needs the
values themselves (median, quantiles, MAD, modes, L-moments, resampling) is not in a state;
quantiles may come instead from KLL sketches of the same parts (``tailgauge.core.sketches``).

    state        PartialState and its order
    validation   every rule a state input must meet (values, sources, callers' states, requests)
    building     states of values or of a sample in the internal form
    merging      Pébay's exact pairwise merge and the tree reduction
    describing   describe_state: the descriptors of a merged state, by describe's assembly
"""

from tailgauge.core.partial.building import partial_state, state_of
from tailgauge.core.partial.describing import describe_state
from tailgauge.core.partial.merging import merge, merge_states
from tailgauge.core.partial.state import MAX_ORDER, MIN_ORDER, PartialState
from tailgauge.core.partial.validation import check_states

__all__ = [
    "MAX_ORDER",
    "MIN_ORDER",
    "PartialState",
    "check_states",
    "describe_state",
    "merge",
    "merge_states",
    "partial_state",
    "state_of",
]
