"""Round trip of 1e6 values through gunicorn on loopback, by body format, against in-process work.

    python tests/benchmarks/transport.py [n]        (or: run.py transport=1e6 [--tree PATH])

Starts gunicorn (deploy/gunicorn.conf.py of the tree, one worker) on a free 127.0.0.1 port, then
times, alternating the rows within each round (best of the rounds for each row):
  in-process   describe() of the same values in this process (the core alone, no HTTP);
  JSON list    body {"values": [...]} as JSON, answer JSON;
  msgpack list the same list as MessagePack, answer MessagePack;
  msgpack f64  the values as little-endian float64 bytes in MessagePack, answer MessagePack.
Each HTTP row is timed from a prepared body to a decoded answer ("wire"), and also including
the client's own encoding from a numpy array ("client"). Ratios are to the in-process row,
the median over rounds of the ratio within a round.
"""

from __future__ import annotations

import json
import statistics
import sys
import time
from pathlib import Path

import httpx
import msgspec
import numpy as np
from server import Server

ROOT = Path(__file__).resolve().parents[2]
PATH = "/v1/descriptors/samples"


def main(n: int = 1_000_000, repeats: int = 5, tree: Path = ROOT) -> None:
    from tailgauge.api.endpoints import describe_options
    from tailgauge.api.schemas import SampleOptions
    from tailgauge.core import describe, from_samples
    from tailgauge.settings import Settings

    values = np.random.default_rng(2026).lognormal(3.0, 0.4, size=n)

    # The server's own options for a request with no options (same limits on listed modes etc.).
    def in_process_once():
        options = describe_options(SampleOptions(), Settings())
        return describe(from_samples(values, omit_missing=False), options, kind="samples")

    with Server(tree, 1, {"TAILGAUGE_REQUEST_LOG": "false"}) as server:
        client = httpx.Client(base_url=server.base, timeout=120)
        variants = {
            "JSON list": (
                lambda: json.dumps({"values": values.tolist()}).encode(),
                "application/json", "application/json", msgspec.json.decode,
            ),
            "msgpack list": (
                lambda: msgspec.msgpack.encode({"values": values.tolist()}),
                "application/msgpack", "application/msgpack", msgspec.msgpack.decode,
            ),
            "msgpack f64": (
                lambda: msgspec.msgpack.encode({"values": values.astype("<f8", copy=False).tobytes()}),
                "application/msgpack", "application/msgpack", msgspec.msgpack.decode,
            ),
        }
        rows = {"in-process": in_process_once}
        sizes = {}
        reference = None
        for name, (encode, content_type, accept, decode) in variants.items():
            body = encode()
            sizes[name] = len(body)
            headers = {"content-type": content_type, "accept": accept}

            def wire(body=body, headers=headers, decode=decode):
                response = client.post(PATH, content=body, headers=headers)
                response.raise_for_status()
                return decode(response.content)

            def whole(encode=encode, headers=headers, decode=decode):
                response = client.post(PATH, content=encode(), headers=headers)
                response.raise_for_status()
                return decode(response.content)

            answer = wire()
            if reference is None:
                reference = answer["descriptors"]
            assert answer["descriptors"] == reference, f"{name} answers differently"
            rows[f"{name} wire"], rows[f"{name} client"] = wire, whole
        times = {name: [] for name in rows}
        for _ in range(repeats):
            for name, fn in rows.items():
                start = time.perf_counter()
                fn()
                times[name].append(time.perf_counter() - start)
        client.close()

    def ratio(name):
        return statistics.median(a / b for a, b in zip(times[name], times["in-process"]))

    print(f"n = {n:,} values; {repeats} alternating rounds; best time, ratio to the in-process computation")
    print(f"{'variant':<14}{'body MB':>9}{'wire s':>9}{'ratio':>7}{'client s':>10}{'ratio':>7}")
    print(f"{'in-process':<14}{'':>9}{min(times['in-process']):>9.3f}{1.0:>7.2f}")
    for name in variants:
        print(
            f"{name:<14}{sizes[name] / 1e6:>9.1f}{min(times[name + ' wire']):>9.3f}{ratio(name + ' wire'):>7.2f}"
            f"{min(times[name + ' client']):>10.3f}{ratio(name + ' client'):>7.2f}"
        )


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT / "service"))
    main(int(float(sys.argv[1])) if len(sys.argv) > 1 else 1_000_000)
