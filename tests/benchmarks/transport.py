"""Round trip of 1e6 values through gunicorn on loopback, by body format, against in-process work.

    python tests/benchmarks/transport.py [n]

Starts gunicorn (deploy/gunicorn.conf.py, one worker) on a free 127.0.0.1 port, then times, in
one run and best of several repeats each:
  in-process   describe() of the same values in this process (the core alone, no HTTP);
  JSON list    body {"values": [...]} as JSON, answer JSON;
  msgpack list the same list as MessagePack, answer MessagePack;
  msgpack f64  the values as little-endian float64 bytes in MessagePack, answer MessagePack.
Each HTTP row is timed from a prepared body to a decoded answer ("wire"), and also including
the client's own encoding from a numpy array ("client"). Ratios are to the in-process row.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import msgspec
import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tailgauge.api.endpoints import describe_options  # noqa: E402
from tailgauge.api.schemas import SampleOptions  # noqa: E402
from tailgauge.core import describe, from_samples  # noqa: E402
from tailgauge.settings import Settings  # noqa: E402

PATH = "/v1/descriptors/samples"


def _free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def _best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return min(times)


def main(n: int = 1_000_000, repeats: int = 5) -> None:
    values = np.random.default_rng(2026).lognormal(3.0, 0.4, size=n)
    # The server's own options for a request with no options (same limits on listed modes etc.).
    def in_process_once():
        options = describe_options(SampleOptions(), Settings())
        return describe(from_samples(values, omit_missing=False), options, kind="samples")

    in_process = _best(in_process_once, repeats)

    port = _free_port()
    env = {k: v for k, v in os.environ.items() if not k.startswith("TAILGAUGE_")}
    env.update(BIND=f"127.0.0.1:{port}", WEB_CONCURRENCY="1", TAILGAUGE_REQUEST_LOG="false")
    server = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--config", "deploy/gunicorn.conf.py", "tailgauge.asgi:app"],
        cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )
    base = f"http://127.0.0.1:{port}"
    try:
        for _ in range(300):
            try:
                if httpx.get(base + "/health/ready", timeout=1).status_code == 200:
                    break
            except httpx.HTTPError:
                time.sleep(0.1)
        client = httpx.Client(base_url=base, timeout=120)
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
        print(f"n = {n:,} values; best of {repeats}; ratios to the in-process computation")
        print(f"{'variant':<14}{'body MB':>9}{'wire s':>9}{'ratio':>7}{'client s':>10}{'ratio':>7}")
        print(f"{'in-process':<14}{'':>9}{in_process:>9.3f}{1.0:>7.2f}")
        reference = None
        for name, (encode, content_type, accept, decode) in variants.items():
            body = encode()
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
            t_wire, t_whole = _best(wire, repeats), _best(whole, repeats)
            print(
                f"{name:<14}{len(body) / 1e6:>9.1f}{t_wire:>9.3f}{t_wire / in_process:>7.2f}"
                f"{t_whole:>10.3f}{t_whole / in_process:>7.2f}"
            )
        client.close()
    finally:
        server.send_signal(signal.SIGTERM)
        server.wait(timeout=40)


if __name__ == "__main__":
    main(int(float(sys.argv[1])) if len(sys.argv) > 1 else 1_000_000)
