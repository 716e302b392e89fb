"""Where gzip pays for this service's answers: the figures behind compression.MIN_GZIP_BYTES.

    python tests/benchmarks/compression.py [--quick]        (or: run.py gzip [--tree PATH])

The answers are the service's own (in process, asked for without compression): a problem, a
one-descriptor answer, a three-descriptor one, default descriptions of 2 and 1,000 values,
1,000 quantiles, the catalog, the document and /metrics. For each, at zlib levels 1, 6 and 9:
the compressed size, the TCP segments of the answer with about 250 bytes of headers (MSS 1,448
bytes, Ethernet) plain and compressed, and the best time of compressing and of inflating it.
Figures only, never assertions.
"""

from __future__ import annotations

import gzip
import json
import math
import sys
import time

HEADERS = 250  # bytes of status line and headers of a typical answer (measured: 230 to 270)
MSS = 1448


def answers() -> dict[str, bytes]:
    import numpy as np
    from litestar.testing import TestClient

    from tailgauge.api import create_app
    from tailgauge.settings import Settings

    rng = np.random.default_rng(20)
    plain = {"accept-encoding": "identity"}
    path = "/v1/descriptors/samples"
    found = {}
    with TestClient(create_app(Settings(request_log=False))) as client:
        def post(body):
            return client.post(path, content=json.dumps(body), headers={**plain, "content-type": "application/json"})

        found["problem"] = post({"values": "x"}).content
        found["1 descriptor"] = post({"values": [1, 2, 3], "options": {"descriptors": ["mean"]}}).content
        found["3 descriptors"] = post({"values": [1, 2, 3], "options": {"descriptors": ["mean", "median", "variance"]}}).content
        found["default, n=2"] = post({"values": [1.5, 2.5]}).content
        found["default, n=1000"] = post({"values": rng.normal(size=1000).tolist()}).content
        found["1000 quantiles"] = post({"values": rng.normal(size=1000).tolist(),
                                        "options": {"probabilities": [i / 1001 for i in range(1, 1001)]}}).content
        found["catalog"] = client.get("/v1/catalog", headers=plain).content
        found["openapi.json"] = client.get("/openapi.json", headers=plain).content
        found["metrics"] = client.get("/metrics", headers=plain).content
    return found


def best(fn, rounds: int) -> float:
    times = []
    for _ in range(rounds):
        started = time.perf_counter()
        fn()
        times.append(time.perf_counter() - started)
    return min(times)


def segments(size: int) -> int:
    return math.ceil((size + HEADERS) / MSS)


def main(quick: bool = False) -> None:
    rounds = 20 if quick else 200
    print(f"{'answer':16s} {'bytes':>8s} {'lvl':>3s} {'gzip':>8s} {'ratio':>5s} {'segments':>9s} "
          f"{'compress':>10s} {'inflate':>9s}")
    for name, body in answers().items():
        for level in (1, 6, 9):
            packed = gzip.compress(body, level, mtime=0)
            pack = best(lambda: gzip.compress(body, level, mtime=0), rounds)
            unpack = best(lambda: gzip.decompress(packed), rounds)
            print(f"{name:16s} {len(body):8d} {level:3d} {len(packed):8d} {len(packed) / len(body):5.2f} "
                  f"{segments(len(body)):4d}->{segments(len(packed)):<4d} {pack * 1e6:8.1f}us {unpack * 1e6:7.1f}us")


if __name__ == "__main__":
    main("--quick" in sys.argv[1:])
