"""A small HTTP/1.1 client on asyncio streams, for the load run and the fault tests.

Pooled clients hide what these tests must see: which connection a request went on and when it
was opened, whether the server acknowledged a request (``100 Continue``) before a signal, and
sending a request one byte at a time. Responses must carry ``Content-Length`` (the service's
always do); anything else is a ``ProtocolError``, so a parsing gap shows up as an error, never
as a silently truncated answer.
"""

from __future__ import annotations

import asyncio
import time
from collections.abc import Awaitable, Callable
from dataclasses import dataclass


class ProtocolError(Exception):
    """The server's bytes are not an HTTP/1.1 response this client understands."""


class ConnectionLost(Exception):
    """The connection ended before a complete response.

    ``received`` says whether any byte of the response had arrived: a request that got no byte
    back on a connection the server had already closed is the only kind a caller may honestly
    retry on a new connection.
    """

    def __init__(self, message: str, *, received: bool) -> None:
        super().__init__(message)
        self.received = received


@dataclass(frozen=True)
class Response:
    status: int
    headers: dict[str, str]  # names in lower case
    body: bytes


def encode_request(method: str, path: str, host: str, body: bytes | None, headers: dict[str, str]) -> bytes:
    """The request head (and nothing of the body) as bytes."""
    lines = [f"{method} {path} HTTP/1.1", f"Host: {host}"]
    lines += [f"{name}: {value}" for name, value in headers.items()]
    if body is not None:
        lines.append(f"Content-Length: {len(body)}")
    return ("\r\n".join(lines) + "\r\n\r\n").encode("latin-1")


class Connection:
    """One keep-alive connection; requests on it are sequential."""

    def __init__(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter, host: str) -> None:
        self.reader = reader
        self.writer = writer
        self.host = host
        self.opened_at = time.monotonic()
        self.closed = False
        self.heads_read = 0  # response heads (interim ones included) read so far

    @classmethod
    async def open(cls, host: str, port: int) -> Connection:
        # Responses of about 15 kB and heads well under the default 64 kB stream limit.
        reader, writer = await asyncio.open_connection(host, port)
        return cls(reader, writer, f"{host}:{port}")

    async def request(
        self,
        method: str,
        path: str,
        body: bytes | None = None,
        headers: dict[str, str] | None = None,
        *,
        expect_continue: bool = False,
        on_accepted: Callable[[], None] | None = None,
        before_body: Callable[[], Awaitable[None]] | None = None,
    ) -> Response:
        """Send one request and read its whole response.

        With ``expect_continue`` the body is held back until the server answers ``100 Continue``,
        which uvicorn sends only when the application starts reading the body: from then on the
        request is accepted, and ``on_accepted`` is called at that moment. ``before_body``, if
        given, is awaited after that and before the body is sent.
        """
        headers = dict(headers or {})
        if expect_continue:
            headers["Expect"] = "100-continue"
        heads_before = self.heads_read
        try:
            self.writer.write(encode_request(method, path, self.host, body, headers))
            if body is not None and not expect_continue:
                self.writer.write(body)
            await self.writer.drain()
            if expect_continue:
                status, response_headers = await self.read_head()
                if status == 100:
                    if on_accepted is not None:
                        on_accepted()
                    if before_body is not None:
                        await before_body()
                    self.writer.write(body or b"")
                    await self.writer.drain()
                else:
                    # A final answer before the body was read (e.g. a media-type error); the unsent
                    # body would desynchronise the connection, so it is not reused.
                    response = Response(status, response_headers, await self._read_body(response_headers))
                    self.close()
                    return response
            response = await self.read_response()
        except (ConnectionError, asyncio.IncompleteReadError, OSError) as error:
            self.close()
            received = self.heads_read > heads_before or bool(getattr(error, "partial", b""))
            raise ConnectionLost(f"{type(error).__name__}: {error}", received=received) from error
        except BaseException:
            self.close()
            raise
        if response.headers.get("connection", "").lower() == "close":
            self.close()
        return response

    async def read_response(self) -> Response:
        """The next final response (status and body) on this connection."""
        status, headers = await self.read_head()
        return Response(status, headers, await self._read_body(headers))

    async def read_head(self) -> tuple[int, dict[str, str]]:
        """Status and lower-cased headers of the next response (interim ones such as 100 included)."""
        head = await self.reader.readuntil(b"\r\n\r\n")
        self.heads_read += 1
        status_line, *header_lines = head[:-4].decode("latin-1").split("\r\n")
        parts = status_line.split(" ", 2)
        if len(parts) < 2 or not parts[0].startswith("HTTP/1.") or not parts[1].isdigit():
            raise ProtocolError(f"not an HTTP/1.1 status line: {status_line!r}")
        headers = {}
        for line in header_lines:
            name, _, value = line.partition(":")
            headers[name.strip().lower()] = value.strip()
        return int(parts[1]), headers

    async def _read_body(self, headers: dict[str, str]) -> bytes:
        if "content-length" not in headers:
            raise ProtocolError(f"response without Content-Length (headers {headers})")
        return await self.reader.readexactly(int(headers["content-length"]))

    def close(self) -> None:
        if not self.closed:
            self.closed = True
            self.writer.close()
