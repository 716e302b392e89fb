"""``AsyncClient``: the service's operations as coroutines (see ``tailgauge.client``)."""

from __future__ import annotations

from typing import Any

import httpx

from tailgauge.api import schemas
from tailgauge.client.wire import (
    DEFAULT_TIMEOUT,
    DEFAULT_URL,
    OPERATIONS_BY_METHOD,
    Call,
    Media,
    build_call,
    document_methods,
    headers_of,
    operation_of,
    read_answer,
    reset_before_answer,
)


class AsyncClient:
    """An asyncio client of one Tailgauge service; use it as ``async with``, or ``await aclose()``.

    ``base_url``: the service's address; ``token``: sent as ``Authorization: Bearer`` when the
    service asks for one; ``timeout``: seconds (or an ``httpx.Timeout``) for each request, also
    settable per call with ``call(..., timeout=)``; ``media``: ``"auto"`` (MessagePack when the
    body carries bytes, JSON otherwise), ``"json"`` or ``"msgpack"``; ``headers``: sent with every
    request; ``http_client``: an ``httpx.AsyncClient`` of your own (proxies, TLS, transports), which
    the client then does not close.
    """

    def __init__(
        self,
        base_url: str = DEFAULT_URL,
        *,
        token: str | None = None,
        timeout: float | httpx.Timeout | None = DEFAULT_TIMEOUT,
        media: Media = "auto",
        headers: dict[str, str] | None = None,
        http_client: httpx.AsyncClient | None = None,
    ) -> None:
        self.base_url = base_url.rstrip("/")
        self.media: Media = media
        self.timeout = timeout if isinstance(timeout, httpx.Timeout) else httpx.Timeout(timeout)
        self._headers = headers_of(token, headers)
        self._owned = http_client is None
        self._http = http_client if http_client is not None else httpx.AsyncClient(timeout=self.timeout)

    async def aclose(self) -> None:
        if self._owned:
            await self._http.aclose()

    async def __aenter__(self) -> AsyncClient:
        return self

    async def __aexit__(self, *exc_info: object) -> None:
        await self.aclose()

    async def call(
        self,
        operation_id: str,
        request: Any = None,
        /,
        *,
        timeout: float | httpx.Timeout | None = None,
        **fields: Any,
    ) -> Any:
        """Any operation of the table by its id (``"describeSamples"``), with its request whole
        (a request Struct or a dict) or as keyword fields; the decoded answer."""
        call = build_call(operation_of(operation_id), request, fields, self.media)
        return read_answer(call, await self._send(call, timeout))

    async def _send(self, call: Call, timeout: float | httpx.Timeout | None) -> httpx.Response:
        request = self._http.build_request(
            call.method,
            self.base_url + call.path,
            content=call.content,
            headers={**self._headers, **call.headers},
            timeout=self.timeout if timeout is None else timeout,
        )
        for attempt in (1, 2):
            try:
                response = await self._http.send(request, stream=True)
            except httpx.TransportError as error:
                if attempt == 1 and reset_before_answer(error):
                    continue  # reset before any answer: a pure request, sent once more
                raise
            try:
                await response.aread()
            finally:
                await response.aclose()
            return response
        raise AssertionError("unreachable")

    # One method per operation of tailgauge.api.operations (tests/system/test_client.py checks
    # that every operation has one, with the table's request and response types).

    async def describe_samples(
        self, request: schemas.SamplesRequest | dict | None = None, /, **fields: Any
    ) -> schemas.DescriptionResponse:
        return await self.call("describeSamples", request, **fields)

    async def describe_table(
        self, request: schemas.TableRequest | dict | None = None, /, **fields: Any
    ) -> schemas.DescriptionResponse:
        return await self.call("describeTable", request, **fields)

    async def describe_bins(
        self, request: schemas.BinsRequest | dict | None = None, /, **fields: Any
    ) -> schemas.DescriptionResponse:
        return await self.call("describeBins", request, **fields)

    async def describe_histogram(
        self, request: schemas.HistogramRequest | dict | None = None, /, **fields: Any
    ) -> schemas.DescriptionResponse:
        return await self.call("describeHistogram", request, **fields)

    async def describe_groups(
        self, request: schemas.GroupsRequest | dict | None = None, /, **fields: Any
    ) -> schemas.GroupsResponse:
        return await self.call("describeGroups", request, **fields)

    async def merge_states(
        self, request: schemas.MergeRequest | dict | None = None, /, **fields: Any
    ) -> schemas.MergedDescriptionResponse:
        return await self.call("mergeStates", request, **fields)

    async def compare(
        self, request: schemas.ComparisonRequest | dict | None = None, /, **fields: Any
    ) -> schemas.ComparisonResponse:
        return await self.call("compare", request, **fields)

    async def catalog(self) -> schemas.Catalog:
        return await self.call("catalog")

    async def metrics(self) -> str:
        return await self.call("metrics")

    async def live(self) -> schemas.Health:
        return await self.call("live")

    async def ready(self) -> schemas.Readiness:
        """The readiness of the worker that answered; a draining worker's 503 is returned, not raised."""
        return await self.call("ready")


document_methods(AsyncClient, OPERATIONS_BY_METHOD)

__all__ = ["AsyncClient"]
