"""Small requests without intervals compute on the event loop; the rest in a worker thread (endpoints.runs_inline)."""

from __future__ import annotations

import json
import threading

from tailgauge.api import endpoints

SAMPLES = "/v1/descriptors/samples"


def test_small_bodies_without_intervals_are_inline_and_the_rest_are_not():
    small = json.dumps({"values": list(range(100))}).encode()
    assert endpoints.runs_inline(small)
    assert not endpoints.runs_inline(json.dumps({"values": list(range(100)), "options": {"interval": None}}).encode())
    assert not endpoints.runs_inline(b"[" + b"1," * endpoints.INLINE_BODY_BYTES + b"1]")


def test_where_requests_compute(make_client, monkeypatch):
    seen = []
    original = endpoints.describe

    def describe(*args, **kwargs):
        seen.append(threading.current_thread().name)
        return original(*args, **kwargs)

    monkeypatch.setattr(endpoints, "describe", describe)
    client = make_client(request_log=False)
    values = [float(v % 17) for v in range(100)]
    assert client.post(SAMPLES, json={"values": values}).status_code == 200
    interval = {"method": "percentile", "resamples": 200, "seed": 1}
    assert client.post(SAMPLES, json={"values": values, "options": {"interval": interval}}).status_code == 200
    big = [float(v % 17) for v in range(5000)]
    assert client.post(SAMPLES, json={"values": big}).status_code == 200
    loop, resampled, large = seen
    assert not loop.startswith("AnyIO worker thread"), seen
    assert resampled.startswith("AnyIO worker thread") and large.startswith("AnyIO worker thread"), seen


def test_figures_are_always_drawn_in_a_worker_thread(make_client, monkeypatch):
    """A small body asking for a figure is not computed inline: drawing runs in the worker thread."""
    from tailgauge.api import pictures

    seen = []
    original = pictures.describing.draw

    def draw(*args, **kwargs):
        seen.append(threading.current_thread().name)
        return original(*args, **kwargs)

    monkeypatch.setattr(pictures.describing, "draw", draw)
    client = make_client(request_log=False)
    body = json.dumps({"values": [float(v % 17) for v in range(100)]}).encode()
    assert endpoints.runs_inline(body)
    answer = client.post(SAMPLES, content=body, headers={"content-type": "application/json", "accept": "image/svg+xml"})
    assert answer.status_code == 200 and answer.headers["content-type"].startswith("image/svg+xml")
    assert len(seen) == 1 and seen[0].startswith("AnyIO worker thread"), seen
