"""The ``histogram`` section of run.py: a 200-bucket exponential histogram described in process.

Three sides alternate within each round: the same counts sent as bins on the same edges (the
baseline: what the histogram adds is its conversion), the core alone (``from_exponential`` and
``describe``), and the whole endpoint body in process (decode the JSON body, convert, describe,
encode the answer) as a worker thread runs it. Target (issue 17): under 2 ms in process.
"""

from __future__ import annotations

import numpy as np
from timing import NA, alternate, record


def bench_histogram(tree, quick: bool) -> None:
    try:
        from tailgauge.core import histograms
    except ImportError:
        print(f"histogram: {NA}: no tailgauge.core.histograms in this tree")
        record("histogram", "200-bucket exponential histogram described in process", None, "ms", "< 2 ms",
               "not in this tree")
        return
    import msgspec

    from tailgauge.api import endpoints
    from tailgauge.api.media import JSON_CODEC
    from tailgauge.core import DescribeOptions, describe, from_bins
    from tailgauge.settings import Settings

    # A latency histogram at scale 3 (base 2^(1/8)): 200 buckets from about 7.8 ms upward, counts
    # of a lognormal's shape scraped from an invented service.
    scale, offset, size = 3, -56, 200
    rng = np.random.default_rng(20261205)
    latencies = rng.lognormal(np.log(0.09), 0.6, 200_000)
    index = np.ceil(np.log2(latencies) * 2**scale).astype(np.int64) - 1 - offset  # bucket (base^k, base^(k+1)]
    inside = (index >= 0) & (index < size)
    latencies, index = latencies[inside], index[inside]
    counts = np.bincount(index, minlength=size).astype(float)
    total = float(latencies.sum())
    body = msgspec.json.encode({
        "layout": "exponential", "scale": scale, "zero_count": 0, "sum": total,
        "min": float(latencies.min()), "max": float(latencies.max()),
        "positive": {"offset": offset, "bucket_counts": counts.tolist()},
    })
    settings = Settings(request_log=False)
    options = DescribeOptions()
    side = histograms.Buckets(offset, counts.tolist())

    def core() -> object:
        data = histograms.from_exponential(scale, 0.0, positive=side, total=total,
                                           minimum=float(latencies.min()), maximum=float(latencies.max()))
        return describe(data, options, kind="histogram")

    edges = list(histograms.boundaries(scale, np.arange(offset, offset + size + 1)))

    def as_bins() -> object:
        return describe(from_bins(edges, counts.tolist()), options, kind="bins")

    def endpoint() -> object:
        return endpoints.describe_histogram(body, JSON_CODEC, JSON_CODEC, settings)

    rounds = 20 if quick else 100
    result = alternate({"bins": as_bins, "core": core, "endpoint": endpoint}, rounds)
    print(f"histogram: {size} exponential buckets at scale {scale}, sum, min and max; {rounds} alternating rounds")
    print(result.show("bins"))
    print(result.show("core", "bins", "from_exponential + describe (core)", "< 2 ms"))
    print(result.show("endpoint", "bins", "endpoint body in process (JSON in, JSON out)", "< 2 ms"))
    for name, label in (("core", "core"), ("endpoint", "endpoint body, JSON in and out")):
        best = result.best(name)
        if best is not None:
            print(f"  {label}: best {best * 1e3:.3f} ms")
        record("histogram", f"200-bucket exponential histogram described in process ({label})",
               None if best is None else best * 1e3, "ms", "< 2 ms", result.failed.get(name, ""))
