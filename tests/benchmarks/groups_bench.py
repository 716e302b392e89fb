"""The groups section of run.py: POST /v1/descriptors/groups in process, against the samples
endpoint called for the same values.

1. 1,000 groups of 1,000 values, options.descriptors = mean, standard_deviation, quantiles,
   against one samples request with the same 1e6 values (target: at most 2x). Both bodies are
   MessagePack with float64 bytes, so both decode alike.
2. 10,000 groups of 100 values, the same descriptors, in one groups request against 10,000
   separate samples requests in process (target: at least 10x faster). Both JSON.

Each side is the endpoint function itself (decode, limits, plan, compute, encode, and the memory
given back after a large request), as a worker thread runs it, without HTTP, after the objects
alive at start are frozen as a worker freezes its loaded app; the sides alternate within each
round (timing.alternate).
"""

from __future__ import annotations

import msgspec
import numpy as np
from timing import NA, alternate, record

BASIC = ["mean", "standard_deviation", "quantiles"]


def main(size: str = "", *, quick: bool = False) -> None:
    try:
        from tailgauge.api import endpoints, group_endpoints
        from tailgauge.api.media import JSON_CODEC, MSGPACK_CODEC
        from tailgauge.settings import Settings
    except ImportError as error:  # pragma: no cover - another tree
        print(f"  {NA}: {error}")
        return
    if not hasattr(group_endpoints, "describe_groups_request"):
        print(f"  {NA}: no groups endpoint")
        record("groups", "1,000 x 1,000 vs one request", None, "x", "<= 2x", NA)
        record("groups", "10,000 x 100 vs separate calls", None, "x", ">= 10x", NA)
        return
    settings = Settings()
    try:  # as a worker does once its app is loaded: later full collections skip those objects
        from tailgauge.runtime.memory import freeze_startup_objects

        freeze_startup_objects()
    except ImportError:  # pragma: no cover - another tree
        pass
    rng = np.random.default_rng(18)
    rounds = 3 if quick else 5

    # 1. 1,000 groups of 1,000 values against one request of the same 1e6 values.
    groups, size_each = (200, 1000) if quick else (1000, 1000)
    values = rng.normal(500.0, 0.8, (groups, size_each))
    grouped = msgspec.msgpack.encode({
        "groups": [{"key": f"head-{i}", "values": row.astype("<f8").tobytes()} for i, row in enumerate(values)],
        "options": {"descriptors": BASIC},
    })
    whole = msgspec.msgpack.encode({"values": values.ravel().astype("<f8").tobytes(), "options": {"descriptors": BASIC}})
    codec = MSGPACK_CODEC
    timed = alternate({
        "groups": lambda: group_endpoints.describe_groups_request(grouped, codec, codec, settings),
        "one request": lambda: endpoints.describe_samples(whole, codec, codec, settings),
    }, rounds)
    print(f"  {groups:,} groups x {size_each:,} values, descriptors {BASIC} (MessagePack, float64 bytes):")
    print(timed.show("one request"))
    print(timed.show("groups", "one request", target="<= 2x"))
    record("groups", f"{groups:,} groups x {size_each:,} values vs one request of the same values",
           timed.ratio("groups", "one request"), "x", "<= 2x")

    # 2. 10,000 groups of 100 values against 10,000 separate requests.
    count = 2_000 if quick else 10_000
    values = np.round(rng.normal(500.0, 0.8, (count, 100)), 2)
    grouped = msgspec.json.encode({
        "groups": [{"key": i, "values": row.tolist()} for i, row in enumerate(values)], "options": {"descriptors": BASIC},
    })
    separate = [msgspec.json.encode({"values": row.tolist(), "options": {"descriptors": BASIC}}) for row in values]
    codec = JSON_CODEC

    def one_by_one() -> None:
        for body in separate:
            endpoints.describe_samples(body, codec, codec, settings)

    timed = alternate({
        "groups": lambda: group_endpoints.describe_groups_request(grouped, codec, codec, settings),
        "separate": one_by_one,
    }, max(2, rounds - 2))
    ratio = timed.ratio("separate", "groups")
    print(f"  {count:,} groups x 100 values, descriptors {BASIC} (JSON):")
    print(timed.show("groups"))
    print(timed.show("separate", "groups", label=f"{count:,} separate in-process calls", target=">= 10x"))
    record("groups", f"{count:,} separate calls / one request of {count:,} groups x 100 values", ratio, "x", ">= 10x")
