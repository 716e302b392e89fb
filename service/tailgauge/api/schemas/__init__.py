"""Wire messages: one msgspec Struct per request and response, which is also the published schema.

API-change rules: a new field always has a default; a field's type is only ever widened (a list
may also come as float64 bytes), never changed; names are snake_case plain statistical terms.

Modules, by concept: ``common`` (the strict base and the constrained number types), ``options``
(option sets), ``pictures`` (options.figure and plot_data), ``inputs`` (request bodies: each input kind's fields declared once), ``results``
(descriptor responses), ``comparisons``, ``groups`` (many samples in one request), ``merge`` (partial states and sketches), ``problems``
(RFC 9457 bodies) and ``info`` (health, readiness, catalog). Import names from here.
"""

from tailgauge.api.schemas import common, comparisons, groups, info, inputs, merge, options, pictures, problems, results
from tailgauge.api.schemas.common import *  # noqa: F403
from tailgauge.api.schemas.comparisons import *  # noqa: F403
from tailgauge.api.schemas.groups import *  # noqa: F403
from tailgauge.api.schemas.info import *  # noqa: F403
from tailgauge.api.schemas.inputs import *  # noqa: F403
from tailgauge.api.schemas.merge import *  # noqa: F403
from tailgauge.api.schemas.options import *  # noqa: F403
from tailgauge.api.schemas.pictures import *  # noqa: F403
from tailgauge.api.schemas.problems import *  # noqa: F403
from tailgauge.api.schemas.results import *  # noqa: F403

__all__ = sorted(
    {
        *common.__all__,
        *options.__all__,
        *pictures.__all__,
        *inputs.__all__,
        *results.__all__,
        *comparisons.__all__,
        *groups.__all__,
        *merge.__all__,
        *problems.__all__,
        *info.__all__,
    }
)
