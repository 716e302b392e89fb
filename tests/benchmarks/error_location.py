"""Time of a failed parse against the time of naming the error's path, on a large malformed JSON body.

Run from the repository root: ``python -m tests.benchmarks.error_location [--values N]``. The body is
``{"values": [N numbers of about 20 bytes], ]}`` (a trailing comma: a syntax error at its very end,
so the location scan has to cross the whole body). Prints both times, best of three.
"""

from __future__ import annotations

import argparse
import time

import msgspec

from tailgauge.api.media import JSON_CODEC
from tailgauge.api.problems import invalid_body
from tailgauge.api.schemas import SamplesRequest


def body_of(count: int) -> bytes:
    numbers = b", ".join(b"%d.%015d" % (i % 1000, i * 7919 % 10**15) for i in range(count))
    return b'{"values": [' + numbers + b", ]}"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--values", type=int, default=1_600_000)
    args = parser.parse_args()
    body = body_of(args.values)
    parse_times, locate_times = [], []
    for _ in range(3):
        started = time.perf_counter()
        try:
            JSON_CODEC.decode(body, SamplesRequest)
        except msgspec.DecodeError as caught:
            error = caught
        parsed = time.perf_counter()
        problem = invalid_body(error, body)
        located = time.perf_counter()
        parse_times.append(parsed - started)
        locate_times.append(located - parsed)
    print(f"body: {len(body) / 2**20:.1f} MiB, {args.values} numbers; error: {error}")
    print(f"located at {problem.errors[0].path}")
    print(f"parse attempt: {min(parse_times) * 1000:.0f} ms; location: {min(locate_times) * 1000:.0f} ms "
          f"({min(locate_times) / min(parse_times):.1f} x)")


if __name__ == "__main__":
    main()
