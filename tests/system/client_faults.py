"""A tiny TCP server on 127.0.0.1 that misbehaves on purpose, for the client's resend and timeout tests.

Each accepted connection takes the next behaviour of a list (then ``after``): read the request,
then ``"reset"`` (RST, by SO_LINGER 0), ``"close"`` (FIN without a byte of answer), ``"hang"``
(answer nothing until stopped), bytes (a canned answer, then close), or ``"forward"`` (relay the
connection to ``upstream``, a real server). Everything is bounded: reads time out, threads stop
when the context exits.
"""

from __future__ import annotations

import select
import socket
import struct
import threading
from collections.abc import Sequence

HOST = "127.0.0.1"
READ_SECONDS = 5.0


def _read_request(connection: socket.socket) -> bytes:
    """One HTTP/1.1 request: headers, then Content-Length bytes of body (bounded in time)."""
    connection.settimeout(READ_SECONDS)
    data = b""
    try:
        while b"\r\n\r\n" not in data:
            chunk = connection.recv(65536)
            if not chunk:
                return data
            data += chunk
        head, _, body = data.partition(b"\r\n\r\n")
        length = 0
        for line in head.split(b"\r\n")[1:]:
            name, _, value = line.partition(b":")
            if name.strip().lower() == b"content-length":
                length = int(value.strip())
        while len(body) < length:
            chunk = connection.recv(65536)
            if not chunk:
                break
            body += chunk
            data += chunk
    except (TimeoutError, OSError):
        pass
    return data


class FaultyServer:
    def __init__(self, behaviours: Sequence[str | bytes], after: str | bytes = "reset",
                 upstream: tuple[str, int] | None = None) -> None:
        self.behaviours = list(behaviours)
        self.after = after
        self.upstream = upstream
        self.connections = 0
        self.requests: list[bytes] = []
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._listener = socket.create_server((HOST, 0))
        self._listener.settimeout(0.1)
        self.port = self._listener.getsockname()[1]

    @property
    def base_url(self) -> str:
        return f"http://{HOST}:{self.port}"

    def __enter__(self) -> FaultyServer:
        accepting = threading.Thread(target=self._accept, daemon=True)
        accepting.start()
        self._threads.append(accepting)
        return self

    def __exit__(self, *exc_info: object) -> None:
        self._stop.set()
        for thread in list(self._threads):
            thread.join(timeout=READ_SECONDS + 2)
        self._listener.close()

    def _accept(self) -> None:
        while not self._stop.is_set():
            try:
                connection, _ = self._listener.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            behaviour = self.behaviours.pop(0) if self.behaviours else self.after
            self.connections += 1
            handler = threading.Thread(target=self._handle, args=(connection, behaviour), daemon=True)
            handler.start()
            self._threads.append(handler)

    def _handle(self, connection: socket.socket, behaviour: str | bytes) -> None:
        try:
            if behaviour == "forward":
                self._forward(connection)
                return
            self.requests.append(_read_request(connection))
            if behaviour == "reset":
                connection.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0))
            elif behaviour == "close":
                connection.shutdown(socket.SHUT_RDWR)
            elif behaviour == "hang":
                self._stop.wait(30)
            else:
                assert isinstance(behaviour, bytes), behaviour
                connection.sendall(behaviour)
        except OSError:
            pass
        finally:
            connection.close()

    def _forward(self, connection: socket.socket) -> None:
        assert self.upstream is not None, "forward needs an upstream"
        with socket.create_connection(self.upstream, timeout=READ_SECONDS) as upstream:
            ends = {connection: upstream, upstream: connection}
            while not self._stop.is_set():
                readable, _, _ = select.select(list(ends), [], [], 0.1)
                for source in readable:
                    data = source.recv(65536)
                    if not data:
                        return
                    ends[source].sendall(data)


def answer(status: int, reason: str, body: bytes, content_type: str, extra: dict[str, str] | None = None,
           length: int | None = None) -> bytes:
    """A canned HTTP/1.1 answer (``length`` may claim more than ``body`` holds, to cut it short)."""
    headers = {"Content-Type": content_type, "Content-Length": str(len(body) if length is None else length),
               "Connection": "close", **(extra or {})}
    head = f"HTTP/1.1 {status} {reason}\r\n" + "".join(f"{k}: {v}\r\n" for k, v in headers.items()) + "\r\n"
    return head.encode() + body
