"""What both clients share: operations from the table, bodies out, answers and problems in.

Nothing here sends anything: ``Client`` and ``AsyncClient`` differ only in how they wait.

* The operation of a method comes from ``tailgauge.api.operations`` (path, method, request and
  response types), and answers are decoded into the server's own response Structs, so the
  client follows the published contract by construction.
* A request is a request Struct of ``tailgauge.api.schemas`` (or its fields as keywords). A numpy
  array in a field the schema lets come as float64 bytes (``values``, ``weights``, ``counts``) is
  sent as little-endian float64 bytes; any other array as a list. A body holding bytes (those
  arrays, or KLL sketches) goes as MessagePack, any other as JSON (``media="auto"``).
* An answer that is not a success raises :class:`ProblemError`, one type for every problem.
* A connection reset (or closed) before any byte of an answer is resent once: every compute
  request is a pure function of its body. Nothing else is retried.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import cache
from typing import Any, Literal

import httpx
import msgspec
import msgspec.inspect as mi
import numpy as np

from tailgauge import __version__
from tailgauge.api import schemas
from tailgauge.api.media import JSON, MSGPACK, PROBLEM_JSON, PROBLEM_MSGPACK
from tailgauge.api.operations import OPERATIONS, Operation

Media = Literal["auto", "json", "msgpack"]
DEFAULT_URL = "http://127.0.0.1:8000"
# A request may compute for up to TAILGAUGE_MAX_REQUEST_SECONDS (30 s by default) before it answers.
DEFAULT_TIMEOUT = httpx.Timeout(60.0, connect=10.0)
USER_AGENT = f"tailgauge-client/{__version__}"


def method_name(operation_id: str) -> str:
    """The client method of an operation: its id in snake case (``describeSamples`` -> ``describe_samples``)."""
    return re.sub(r"(?<!^)(?=[A-Z])", "_", operation_id).lower()


OPERATIONS_BY_METHOD: dict[str, Operation] = {method_name(op.operation_id): op for op in OPERATIONS}
_BY_ID: dict[str, Operation] = {op.operation_id: op for op in OPERATIONS}


def operation_of(operation_id: str) -> Operation:
    try:
        return _BY_ID[operation_id]
    except KeyError:
        raise ValueError(f"no operation {operation_id!r}; the service has {sorted(_BY_ID)}") from None


def document_methods(kind: type, operations: dict[str, Operation]) -> None:
    """Each operation method's docstring starts with its method, path and summary from the table."""
    for name, operation in operations.items():
        function = getattr(kind, name, None)
        if function is not None:
            own = f"\n\n{function.__doc__}" if function.__doc__ else ""
            function.__doc__ = f"{operation.method.upper()} {operation.path}: {operation.summary}.{own}"


class ProblemError(Exception):
    """The service answered with a problem (RFC 9457): every field of it, and the HTTP details.

    ``errors`` locates each offending input by JSON path (``$.values[3]``). An error answer that
    is not a problem document (a proxy's page, say) is reported the same way with the type
    ``about:blank``, the status's reason as title and the start of the body as detail.
    """

    def __init__(self, problem: schemas.Problem, headers: httpx.Headers | dict[str, str] | list[tuple[str, str]] | None = None) -> None:
        self.problem = problem
        self.type = problem.type
        self.title = problem.title
        self.status = problem.status
        self.detail = problem.detail
        self.errors: list[schemas.ProblemLocation] = list(problem.errors)
        self.headers = httpx.Headers(headers)
        self.request_id: str | None = self.headers.get("x-request-id")
        super().__init__(self._text())

    def __reduce__(self) -> tuple:
        # Picklable (a Dask task may raise it): rebuilt from the problem and the headers.
        return (type(self), (self.problem, list(self.headers.multi_items())))

    @property
    def retry_after(self) -> float | None:
        """Seconds to wait before sending again, when the service said (503 ``server-busy``)."""
        value = self.headers.get("retry-after")
        try:
            return float(value) if value is not None else None
        except ValueError:
            return None

    def _text(self) -> str:
        located = "; ".join(f"{error.path}: {error.message}" for error in self.errors)
        return f"{self.status} {self.title}: {self.detail}" + (f" ({located})" if located else "")


# ---- bodies out ----


def _options(info: mi.Type) -> list[mi.Type]:
    """The alternatives a type allows, constraints and Optional unwrapped."""
    while isinstance(info, mi.Metadata):
        info = info.type
    if isinstance(info, mi.UnionType):
        return [alternative for member in info.types for alternative in _options(member)]
    return [info]


@cache
def _struct_info(kind: type) -> mi.StructType:
    info = mi.type_info(kind)
    assert isinstance(info, mi.StructType), kind
    return info


def _struct_for(info: mi.Type, body: dict) -> mi.StructType | None:
    """The Struct a dict stands for at a place of type ``info`` (a tagged union: by its tag)."""
    structs = [option for option in _options(info) if isinstance(option, mi.StructType)]
    if len(structs) == 1:
        return structs[0]
    for struct in structs:
        if struct.tag_field is not None and body.get(struct.tag_field) == struct.tag:
            return struct
    return None


def _fields(struct: mi.StructType) -> dict[str, mi.Type]:
    return {field.encode_name: field.type for field in struct.fields}


def _worth_walking(info: mi.Type) -> bool:
    """Whether items of this type can hold an array or bytes to find (lists of numbers are skipped)."""
    return any(isinstance(option, (mi.StructType, mi.BytesType, mi.DictType)) for option in _options(info))


@dataclass
class Prepared:
    body: Any
    binary: bool  # bytes somewhere in the body: MessagePack carries them without base64


def float64_bytes(array: np.ndarray) -> bytes:
    """Every element of ``array`` (C order) as little-endian float64 bytes, the schema's fast path."""
    return np.ascontiguousarray(array, dtype="<f8").tobytes()


def prepare(body: Any, info: mi.Type) -> Prepared:
    """``body`` with numpy arrays turned into float64 bytes where the schema at their place takes them."""
    found = [False]

    def walk(value: Any, info: mi.Type) -> Any:
        if isinstance(value, np.ndarray):
            if any(isinstance(option, mi.BytesType) for option in _options(info)):
                found[0] = True
                return float64_bytes(value)
            return value
        if isinstance(value, (bytes, bytearray, memoryview)):
            found[0] = True
            return value
        if isinstance(value, msgspec.Struct):
            fields = _fields(_struct_info(type(value)))
            changed = {}
            for name in value.__struct_fields__:
                item = getattr(value, name)
                new = walk(item, fields.get(name, mi.AnyType()))
                if new is not item:
                    changed[name] = new
            return msgspec.structs.replace(value, **changed) if changed else value
        if isinstance(value, dict):
            struct = _struct_for(info, value)
            if struct is None:
                return value
            fields = _fields(struct)
            return {key: walk(item, fields.get(key, mi.AnyType())) for key, item in value.items()}
        if isinstance(value, (list, tuple)):
            items = [option for option in _options(info) if isinstance(option, mi.ListType)]
            if items and _worth_walking(items[0].item_type):
                return [walk(item, items[0].item_type) for item in value]
        return value

    return Prepared(walk(body, info), found[0])


def _encode_other(value: Any) -> Any:
    """What msgspec cannot encode by itself: numpy arrays (as lists) and numpy scalars."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    raise NotImplementedError(f"cannot send a {type(value).__name__}")


_JSON_ENCODER = msgspec.json.Encoder(enc_hook=_encode_other)
_MSGPACK_ENCODER = msgspec.msgpack.Encoder(enc_hook=_encode_other)


@dataclass(frozen=True)
class Call:
    """One request, ready to send (and to send again)."""

    operation: Operation
    method: str
    path: str
    content: bytes | None
    headers: dict[str, str]


def request_body(operation: Operation, request: Any, fields: dict[str, Any]) -> Any:
    """The body to send: the request as given (a Struct or a dict), or the keyword fields as a dict.

    Fields are not checked here: the service checks every body in one pass and answers a
    problem naming each offending field by path.
    """
    name = method_name(operation.operation_id)
    if operation.request is None:
        if request is not None or fields:
            raise TypeError(f"{name}() takes no request body")
        return None
    if request is not None and fields:
        raise TypeError(f"{name}(): give the request either whole or as keyword fields, not both")
    if request is None and not fields:
        raise TypeError(f"{name}() needs a request: a {operation.request.__name__} or its fields as keywords")
    return request if request is not None else dict(fields)


def build_call(operation: Operation, request: Any, fields: dict[str, Any], media: Media) -> Call:
    body = request_body(operation, request, fields)
    method, path = operation.method.upper(), operation.path
    if body is None:
        if media == "msgpack" and MSGPACK in operation.answers:
            return Call(operation, method, path, None, {"Accept": f"{MSGPACK}, {PROBLEM_MSGPACK}"})
        return Call(operation, method, path, None, {"Accept": f"{operation.answers[0]}, {PROBLEM_JSON}"})
    prepared = prepare(body, mi.type_info(operation.request))
    if media == "msgpack" or (media == "auto" and prepared.binary):
        content = _MSGPACK_ENCODER.encode(prepared.body)
        headers = {"Content-Type": MSGPACK, "Accept": f"{MSGPACK}, {PROBLEM_MSGPACK}"}
    else:
        content = _JSON_ENCODER.encode(prepared.body)
        headers = {"Content-Type": JSON, "Accept": f"{JSON}, {PROBLEM_JSON}"}
    return Call(operation, method, path, content, headers)


# ---- answers in ----


@cache
def _decoder(media: str, kind: Any) -> Any:
    return msgspec.msgpack.Decoder(kind) if media == "msgpack" else msgspec.json.Decoder(kind)


def _media_of(response: httpx.Response) -> str:
    content_type = response.headers.get("content-type", "").split(";")[0].strip().lower()
    return "msgpack" if "msgpack" in content_type else "json" if "json" in content_type else content_type


def read_answer(call: Call, response: httpx.Response) -> Any:
    """The decoded answer of a success (or of a documented non-problem status); ProblemError otherwise."""
    operation = call.operation
    if response.status_code == 200 or response.status_code in operation.other_answers:
        if operation.response is None:
            return response.text
        media = _media_of(response)
        if media in ("json", "msgpack"):
            try:
                return _decoder(media, operation.response).decode(response.content)
            except msgspec.DecodeError:
                pass  # not the documented answer: reported below as what it is
    raise problem_of(response)


def problem_of(response: httpx.Response) -> ProblemError:
    media = _media_of(response)
    if "problem" in response.headers.get("content-type", "") and media in ("json", "msgpack"):
        try:
            return ProblemError(_decoder(media, schemas.Problem).decode(response.content), response.headers)
        except msgspec.DecodeError:
            pass
    text = response.content[:500].decode("utf-8", "replace")
    problem = schemas.Problem(
        type="about:blank",
        title=response.reason_phrase or "HTTP error",
        status=response.status_code,
        detail=text or "no problem document in the answer",
    )
    return ProblemError(problem, response.headers)


# ---- the one resend ----

_NO_ANSWER = "Server disconnected without sending a response."
_RESETS = (ConnectionResetError, BrokenPipeError, ConnectionAbortedError)


def reset_before_answer(error: BaseException) -> bool:
    """Whether ``error`` (raised before the answer's status line arrived) is a reset or closed connection.

    httpx says so with ``RemoteProtocolError("Server disconnected without sending a response.")``
    for a closed connection and a ``ReadError`` / ``WriteError`` caused by ECONNRESET or EPIPE for
    a reset one. A timeout, a refused connection or a malformed answer is not a reset.
    """
    if isinstance(error, httpx.RemoteProtocolError):
        return str(error) == _NO_ANSWER
    if not isinstance(error, (httpx.ReadError, httpx.WriteError)):
        return False
    seen: BaseException | None = error
    for _ in range(8):
        if seen is None:
            break
        if isinstance(seen, _RESETS):
            return True
        seen = seen.__cause__ or seen.__context__
    return False


def headers_of(token: str | None, extra: dict[str, str] | None) -> dict[str, str]:
    headers = {"User-Agent": USER_AGENT, **(extra or {})}
    if token:
        headers["Authorization"] = f"Bearer {token}"
    return headers


__all__ = [
    "DEFAULT_TIMEOUT",
    "DEFAULT_URL",
    "OPERATIONS_BY_METHOD",
    "Call",
    "Media",
    "ProblemError",
    "build_call",
    "document_methods",
    "float64_bytes",
    "headers_of",
    "method_name",
    "operation_of",
    "prepare",
    "problem_of",
    "read_answer",
    "reset_before_answer",
]
