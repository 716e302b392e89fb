"""Many samples in one request, each described as the samples endpoint describes it alone.

Modules (each imports only those above it):

    keys          the order of keys (``by_key``) and each group's seed, from the request's seed
                  and the key alone
    vectorised    the basic descriptors of every ordinary group at once (stacked rows, one sort,
                  the shared arithmetic of moments.py and order_rules.py)
    describing    describe_groups(): the plan, the vectorised groups, every other group by
                  ``describe``, contrasts with a baseline group (``compare.contrast``), the order
"""

from tailgauge.core.groups.columns import from_columns
from tailgauge.core.groups.describing import (
    Described,
    Group,
    GroupDescription,
    GroupOrder,
    Shared,
    admit_groups,
    describe_groups,
    group_options,
)
from tailgauge.core.groups.keys import Key, group_seed, sort_key
from tailgauge.core.groups.vectorised import VECTORISED

__all__ = [
    "VECTORISED",
    "Described",
    "Group",
    "GroupDescription",
    "GroupOrder",
    "Key",
    "Shared",
    "admit_groups",
    "describe_groups",
    "from_columns",
    "group_options",
    "group_seed",
    "sort_key",
]
