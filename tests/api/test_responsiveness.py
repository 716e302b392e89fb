"""Heavy computation runs off the event loop: health checks answer while a large request computes."""

import time

import anyio
import httpx
import numpy as np

from tailgauge.api import create_app
from tailgauge.settings import Settings


def test_health_answers_while_a_large_resampling_request_computes():
    app = create_app(Settings())
    values = np.random.default_rng(11).gamma(3.0, 2.0, 20_000).tolist()
    body = {"values": values, "options": {"interval": {"method": "bca", "resamples": 4000, "seed": 1}}}
    timings = {}

    async def main():
        transport = httpx.ASGITransport(app=app)
        async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1") as client:

            async def heavy():
                start = time.perf_counter()
                response = await client.post("/v1/descriptors/samples", json=body)
                timings["heavy"] = (start, time.perf_counter(), response.status_code)

            async def health():
                await anyio.sleep(0.2)  # let the heavy request start computing
                start = time.perf_counter()
                response = await client.get("/health/live")
                timings["health"] = (start, time.perf_counter(), response.status_code)

            async with anyio.create_task_group() as group:
                group.start_soon(heavy)
                group.start_soon(health)

    anyio.run(main)
    heavy_start, heavy_end, heavy_status = timings["heavy"]
    health_start, health_end, health_status = timings["health"]
    assert heavy_status == 200 and health_status == 200
    # Ordering, not speed: the health answer arrived while the heavy request was still running.
    assert heavy_start < health_start and health_end < heavy_end
