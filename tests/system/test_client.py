"""tailgauge.client against a real gunicorn (the shared 2-worker server on 127.0.0.1), and against a
tiny misbehaving server (tests/system/client_faults.py) for resets, cut answers and timeouts.

References: every answer the client decodes equals the server's answer to the same body sent
as plain JSON with httpx and decoded into the same Struct (the published contract); numeric
checks against numpy (mean, weighted mean) and against the core computing in process.
"""

from __future__ import annotations

import asyncio
import inspect
import pickle
import typing

import httpx
import msgspec
import numpy as np
import pytest

from tailgauge.api import schemas
from tailgauge.api.operations import OPERATIONS
from tailgauge.client import AsyncClient, Client, ProblemError
from tailgauge.client.wire import method_name

from .client_faults import FaultyServer, answer

COMPUTE = [op for op in OPERATIONS if op.request is not None]
SAMPLES = {"values": [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3]}


def _direct(server, op) -> typing.Any:
    """The server's answer to the operation's example sent as plain JSON, decoded into the table's type."""
    if op.request is None:
        reply = httpx.request(op.method.upper(), server.base_url + op.path, timeout=30)
    else:
        reply = httpx.post(server.base_url + op.path, json=op.example, timeout=30)
    assert reply.status_code == 200, reply.text
    return reply.text if op.response is None else msgspec.json.decode(reply.content, type=op.response)


def _recording() -> tuple[list[httpx.Request], dict]:
    sent: list[httpx.Request] = []
    return sent, {"request": [sent.append]}


def test_every_operation_has_a_method_of_both_clients_with_the_table_types():
    for op in OPERATIONS:
        name = method_name(op.operation_id)
        for kind in (Client, AsyncClient):
            method = getattr(kind, name, None)
            assert method is not None, f"{kind.__name__} has no method for {op.operation_id}"
            assert inspect.iscoroutinefunction(method) == (kind is AsyncClient), name
            hints = typing.get_type_hints(method)
            assert hints["return"] == (op.response if op.response is not None else str), name
            assert op.path in method.__doc__ and op.summary in method.__doc__, name
            if op.request is not None:
                assert op.request in typing.get_args(hints["request"]), name
            else:
                assert list(inspect.signature(method).parameters) == ["self"], name
    public = {name for name in vars(Client) if not name.startswith("_")}
    assert public - {"call", "close"} == {method_name(op.operation_id) for op in OPERATIONS}


@pytest.mark.parametrize("media", ["json", "msgpack"])
def test_every_operation_through_the_client_equals_the_plain_answer(shared_server, media):
    sent, hooks = _recording()
    with httpx.Client(event_hooks=hooks) as http, Client(shared_server.base_url, media=media, http_client=http) as client:
        for op in OPERATIONS:
            method = getattr(client, method_name(op.operation_id))
            got = method(**op.example) if op.example else method()
            if op.operation_id == "metrics":
                assert "tailgauge_http_requests_total" in got
                continue
            if op.operation_id in ("live", "ready"):
                assert isinstance(got, op.response) and got.status == "ok"
                continue
            assert isinstance(got, op.response)
            assert got == _direct(shared_server, op), op.operation_id
            if op.request is not None:  # the request as a Struct of the table's type: the same answer
                assert client.call(op.operation_id, msgspec.convert(op.example, op.request)) == got
    wanted = "application/msgpack" if media == "msgpack" else "application/json"
    posted = [request for request in sent if request.method == "POST"]
    assert len(posted) == 2 * len(COMPUTE)
    assert {request.headers["content-type"] for request in posted} == {wanted}


@pytest.mark.parametrize("media", ["json", "msgpack"])
def test_every_operation_through_the_async_client(shared_server, media):
    async def run() -> dict:
        answers = {}
        async with AsyncClient(shared_server.base_url, media=media) as client:
            for op in OPERATIONS:
                method = getattr(client, method_name(op.operation_id))
                answers[op.operation_id] = await (method(**op.example) if op.example else method())
            # Concurrent calls on one client.
            answers["concurrent"] = await asyncio.gather(*(client.describe_samples(**SAMPLES) for _ in range(4)))
        return answers

    answers = asyncio.run(run())
    for op in COMPUTE + [op for op in OPERATIONS if op.operation_id == "catalog"]:
        assert answers[op.operation_id] == _direct(shared_server, op), op.operation_id
    assert answers["live"].status == "ok" and "tailgauge_http_requests_total" in answers["metrics"]
    assert len({msgspec.json.encode(a) for a in answers["concurrent"]}) == 1


def test_numpy_arrays_travel_as_float64_bytes_over_messagepack(shared_server):
    rng = np.random.default_rng(20261205)
    values = rng.normal(250.0, 1.2, size=5000)
    weights = rng.integers(1, 4, size=5000).astype(float)
    sent, hooks = _recording()
    with httpx.Client(event_hooks=hooks) as http, Client(shared_server.base_url, http_client=http) as client:
        got = client.describe_samples(values=values, weights=weights, options={"descriptors": ["mean"]})
        listed = client.describe_samples(values=values.tolist(), weights=weights.tolist(),
                                         options={"descriptors": ["mean"]})
        compared = client.compare(first={"kind": "samples", "values": values[:100]},
                                  second={"kind": "bins", "edges": [240, 250, 260], "counts": np.array([3, 4])},
                                  options={"descriptors": ["mean"]})
    binary, plain, comparison = sent
    assert binary.headers["content-type"] == "application/msgpack"
    body = msgspec.msgpack.decode(binary.content)
    assert body["values"] == values.astype("<f8").tobytes() and body["weights"] == weights.astype("<f8").tobytes()
    assert plain.headers["content-type"] == "application/json"
    assert isinstance(msgspec.json.decode(plain.content)["values"], list)
    # numpy's weighted mean as the reference; both transports agree bit for bit.
    assert got.descriptors.mean.value == pytest.approx(np.average(values, weights=weights), rel=1e-13)
    assert got == listed
    compared_body = msgspec.msgpack.decode(comparison.content)
    assert compared_body["first"]["values"] == values[:100].tobytes()
    assert compared_body["second"]["counts"] == np.array([3.0, 4.0]).tobytes()
    assert compared.first.descriptors.mean.value == pytest.approx(np.mean(values[:100]), rel=1e-13)
    # bins [240, 250) x3 and [250, 260) x4 at their midpoints: (3 * 245 + 4 * 255) / 7
    assert compared.second.descriptors.mean.value == pytest.approx((3 * 245 + 4 * 255) / 7, rel=1e-15)


@pytest.mark.parametrize("media", ["json", "msgpack"])
def test_a_problem_raises_one_exception_with_its_fields_and_located_errors(shared_server, media):
    with Client(shared_server.base_url, media=media) as client:
        with pytest.raises(ProblemError) as missing:
            client.describe_samples(values=[250.1, None, 249.7])
        with pytest.raises(ProblemError) as invalid:
            client.describe_samples(values=[1.0, 2.0, 3.0], options={"skewness_estimator": "G3"})
    error = missing.value
    assert error.status == 422 and error.type.startswith("urn:tailgauge:problem:")
    assert error.title and error.detail and error.request_id
    assert [location.path for location in error.errors] == ["$.values[1]"]
    assert error.problem == schemas.Problem(type=error.type, title=error.title, status=422, detail=error.detail,
                                            errors=error.errors)
    assert "$.values[1]" in str(error)
    copy = pickle.loads(pickle.dumps(error))  # a Dask task may raise it
    assert (copy.problem, copy.request_id, str(copy)) == (error.problem, error.request_id, str(error))
    assert invalid.value.status == 400
    assert [location.path for location in invalid.value.errors] == ["$.options.skewness_estimator"]
    wanted = "application/problem+msgpack" if media == "msgpack" else "application/problem+json"
    assert invalid.value.headers["content-type"].startswith(wanted)


def test_an_error_answer_without_a_problem_document_is_the_same_exception():
    page = answer(502, "Bad Gateway", b"<html>upstream down</html>", "text/html")
    with FaultyServer([page]) as faulty, Client(faulty.base_url) as client:
        with pytest.raises(ProblemError) as caught:
            client.describe_samples(**SAMPLES)
    assert faulty.connections == 1
    assert (caught.value.status, caught.value.type, caught.value.title) == (502, "about:blank", "Bad Gateway")
    assert "upstream down" in caught.value.detail and caught.value.errors == []


@pytest.mark.parametrize("how", ["reset", "close"])
def test_a_connection_reset_before_any_answer_is_sent_once_more(shared_server, how):
    upstream = ("127.0.0.1", shared_server.port)
    op = COMPUTE[0]
    with FaultyServer([how], after="forward", upstream=upstream) as faulty, Client(faulty.base_url) as client:
        got = client.call(op.operation_id, **op.example)
    assert faulty.connections == 2
    assert faulty.requests[0].startswith(b"POST " + op.path.encode())  # the first one was sent, then lost
    assert got == _direct(shared_server, op)


@pytest.mark.parametrize("how", ["reset", "close"])
def test_the_async_client_sends_once_more_after_a_reset(shared_server, how):
    upstream = ("127.0.0.1", shared_server.port)

    async def run(url: str) -> schemas.DescriptionResponse:
        async with AsyncClient(url) as client:
            return await client.describe_samples(**SAMPLES)

    with FaultyServer([how], after="forward", upstream=upstream) as faulty:
        got = asyncio.run(run(faulty.base_url))
    assert faulty.connections == 2
    assert got.descriptors.mean.value == pytest.approx(np.mean(SAMPLES["values"]), rel=1e-14)


def test_a_second_reset_is_not_resent():
    with FaultyServer([], after="reset") as faulty, Client(faulty.base_url) as client:
        with pytest.raises(httpx.ReadError):
            client.describe_samples(**SAMPLES)
    assert faulty.connections == 2


def test_nothing_but_a_reset_is_resent():
    busy = msgspec.json.encode(schemas.Problem(type="urn:tailgauge:problem:server-busy", title="Busy", status=503,
                                               detail="the worker's memory is taken"))
    refusal = answer(503, "Service Unavailable", busy, "application/problem+json", {"Retry-After": "3"})
    cut = answer(200, "OK", b'{"kind": "sam', "application/json", length=400)
    with FaultyServer([refusal]) as faulty, Client(faulty.base_url) as client:
        with pytest.raises(ProblemError) as caught:
            client.describe_samples(**SAMPLES)
        assert faulty.connections == 1
    assert caught.value.status == 503 and caught.value.retry_after == 3.0
    assert caught.value.type == "urn:tailgauge:problem:server-busy"
    with FaultyServer([cut]) as faulty, Client(faulty.base_url) as client:
        with pytest.raises(httpx.RemoteProtocolError):  # the answer had begun: not resent
            client.describe_samples(**SAMPLES)
        assert faulty.connections == 1
    with FaultyServer([b"not an answer at all\r\n\r\n"]) as faulty, Client(faulty.base_url) as client:
        with pytest.raises(httpx.RemoteProtocolError):  # malformed before any answer, but no reset
            client.describe_samples(**SAMPLES)
        assert faulty.connections == 1


def test_a_timeout_raises_and_is_not_resent():
    with FaultyServer([], after="hang") as faulty:
        with Client(faulty.base_url, timeout=0.5) as client, pytest.raises(httpx.ReadTimeout):
            client.describe_samples(**SAMPLES)
        assert faulty.connections == 1
        with Client(faulty.base_url) as client, pytest.raises(httpx.ReadTimeout):
            client.call("describeSamples", timeout=0.3, **SAMPLES)  # per call
        assert faulty.connections == 2

        async def run() -> None:
            async with AsyncClient(faulty.base_url, timeout=0.5) as client:
                await client.describe_samples(**SAMPLES)

        with pytest.raises(httpx.ReadTimeout):
            asyncio.run(run())
        assert faulty.connections == 3


def test_a_token_and_headers_are_sent_and_bad_calls_are_refused_before_sending():
    sent, hooks = _recording()
    ok = answer(200, "OK", b'{"status": "ok"}', "application/json")
    with FaultyServer([ok]) as faulty, httpx.Client(event_hooks=hooks) as http:
        client = Client(faulty.base_url + "/", token="a-token-of-sixteen-chars", headers={"X-Request-ID": "abc"},
                        http_client=http)
        assert client.live() == schemas.Health(status="ok")
        with pytest.raises(TypeError):
            client.describe_samples()  # no request at all
        with pytest.raises(TypeError):
            client.describe_samples(schemas.SamplesRequest(values=[1.0]), values=[2.0])
        with pytest.raises(ValueError):
            client.call("describeEverything")
    (request,) = sent
    assert request.url == faulty.base_url + "/health/live"
    assert request.headers["authorization"] == "Bearer a-token-of-sixteen-chars"
    assert request.headers["x-request-id"] == "abc" and request.headers["user-agent"].startswith("tailgauge-client/")


def test_the_dask_recipe_sends_its_chunks_through_the_client(shared_server):
    da = pytest.importorskip("dask.array")
    from tailgauge.recipes.dask_states import describe_chunks

    weights = da.random.default_rng(11).normal(250.0, 4.0, size=60_000, chunks=7_000)
    with Client(shared_server.base_url) as client:
        got = describe_chunks(client, weights, options={"probabilities": [0.5]}, scheduler="synchronous")
    values = weights.compute(scheduler="synchronous")
    assert got.size.n == 60_000 and got.sketches.sketches == weights.numblocks[0] == 9
    assert got.descriptors.mean.value == pytest.approx(np.mean(values), rel=1e-13)
    assert got.descriptors.standard_deviation.value == pytest.approx(np.std(values, ddof=1), rel=1e-12)
    (median,) = got.quantiles
    rank = np.searchsorted(np.sort(values), median.value) / values.size
    assert abs(rank - 0.5) <= 2 * got.sketches.normalized_rank_error
