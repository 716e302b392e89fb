"""RFC 9457 problem details: the one table from every error to its HTTP status and problem type.

    DescriptorError (core)       mapped here by class:
    ├── UncomputableInput  -> 422 uncomputable-input
    └── LimitExceeded      -> 422 limit-exceeded
    ApiProblem             -> the status of its slug (400 invalid-header, 401, 404, 406, 413, 415, ...)
    msgspec errors         -> 400 invalid-body (DecodeError: unparseable; ValidationError: schema)
    litestar HTTPException -> its own status (404, 405, 413 from the body-size limit, ...)
    anything else          -> 500 internal-error, with no trace or path in the body
"""

from __future__ import annotations

import logging
import re

import msgspec
from litestar import Request, Response
from litestar.exceptions import HTTPException

from tailgauge.api import metrics, wording
from tailgauge.api.media import JSON_CODEC, PROBLEM_JSON, Codec, problem_codec
from tailgauge.api.schemas import Problem, ProblemLocation
from tailgauge.core.errors import DescriptorError, LimitExceeded

PROBLEM_MEDIA_TYPE = PROBLEM_JSON
_TYPE_PREFIX = "urn:tailgauge:problem:"

# slug -> (status, title). Slugs are part of the API: never rename one.
PROBLEM_TYPES: dict[str, tuple[int, str]] = {
    "invalid-body": (400, "The request body is not valid"),
    "invalid-header": (400, "A request header is not valid"),
    "unauthorized": (401, "Authentication is required"),
    "not-found": (404, "No such resource"),
    "method-not-allowed": (405, "Method not allowed"),
    "not-acceptable": (406, "No acceptable response media type"),
    "body-too-large": (413, "The request is too large"),
    "unsupported-media-type": (415, "Unsupported request media type"),
    "uncomputable-input": (422, "The input cannot be described"),
    "limit-exceeded": (422, "The request exceeds a configured limit"),
    "internal-error": (500, "Internal error"),
    "server-busy": (503, "The server is busy"),
}
# For litestar's own exceptions, which carry only a status: the first slug of each status.
_SLUG_BY_STATUS: dict[int, str] = {}
for _slug, (_status, _) in PROBLEM_TYPES.items():
    _SLUG_BY_STATUS.setdefault(_status, _slug)
_LOCATION = re.compile(r"^(?P<message>.*?) - at `(?P<path>\$[^`]*)`$", re.DOTALL)
_NAMED_FIELD = re.compile(r"^Object (?:contains unknown|missing required) field `(?P<field>[^`]*)`")
_BYTE = re.compile(r"\(byte (?P<offset>\d+)\)")

logger = logging.getLogger("tailgauge.api")


class ApiProblem(Exception):
    """An error detected by the HTTP layer, already located."""

    def __init__(
        self,
        slug: str,
        detail: str,
        errors: list[ProblemLocation] | None = None,
        headers: dict[str, str] | None = None,
    ) -> None:
        super().__init__(detail)
        self.slug = slug
        self.detail = detail
        self.errors = errors or []
        self.headers = headers


# The bytes that can change the path: a string's opening quote (a key, or a value whose commas
# must not count), brackets and the colon. Everything between two of them (numbers, literals,
# commas) is skipped at C speed: a character-class search, and commas counted by bytes.count.
_PATH_BYTE = re.compile(rb'[{}\[\]:"]')
# A body with more strings and brackets than this before the error is located coarsely, at "$"
# (the byte offset stays in the message): each costs a Python step, and a pathological body can
# hold millions of them.
MAX_LOCATED_TOKENS = 200_000


def _string_end(body: bytes, start: int) -> tuple[int, int]:
    """(index after the string opened at ``start``, its closing quote's length: 1, or 0 when unclosed)."""
    search = start + 1
    while (quote := body.find(b'"', search)) >= 0:
        backslashes = quote
        while backslashes > start + 1 and body[backslashes - 1] == 0x5C:
            backslashes -= 1
        if (quote - backslashes) % 2 == 0:  # not escaped
            return quote + 1, 1
        search = quote + 1
    return len(body), 0


def json_path_at(body: bytes, offset: int) -> str:
    """The JSON path of the value being read at byte ``offset`` of a (possibly malformed) body.

    msgspec reports a syntax error (a ``NaN`` token, a stray character) only by byte offset;
    this scan of the prefix tracks objects, arrays, keys and strings to name the field instead.
    A large array of numbers costs a few passes at C speed (about four times msgspec's failed
    parse of the same body); past ``MAX_LOCATED_TOKENS`` strings and brackets the answer is
    ``"$"``, so locating never costs more than a bounded multiple of parsing.
    """
    stack: list[list] = []  # each entry: ["object", key or None, expecting_key] or ["array", index]
    end = min(offset, len(body))
    previous = 0  # end of the previous token: commas between it and the next one belong to the top

    def count_commas(until: int) -> None:
        if stack and until > previous:
            commas = body.count(b",", previous, until)
            if commas:
                top = stack[-1]
                if top[0] == "array":
                    top[1] += commas
                else:
                    top[2] = True

    tokens = 0
    while (match := _PATH_BYTE.search(body, previous, end)) is not None:
        tokens += 1
        if tokens > MAX_LOCATED_TOKENS:
            return "$"
        start = match.start()
        count_commas(start)
        previous = start + 1
        token = body[start]
        if token == 0x22:  # '"'
            previous, closing = _string_end(body, start)
            if stack and stack[-1][0] == "object" and stack[-1][2]:
                stack[-1][1] = body[start + 1 : previous - closing].decode("utf-8", "replace")
        elif token == 0x7B:  # '{'
            stack.append(["object", None, True])
        elif token == 0x5B:  # '['
            stack.append(["array", 0])
        elif token in (0x7D, 0x5D):  # '}' ']'
            if stack:
                stack.pop()
        elif stack and stack[-1][0] == "object":  # ':'
            stack[-1][2] = False
    count_commas(end)
    path = "$"
    for entry in stack:
        if entry[0] == "array":
            path += f"[{entry[1]}]"
        elif entry[1] is not None:
            path += f".{entry[1]}"
    return path


def locate_msgspec_error(
    error: msgspec.MsgspecError, body: bytes = b"", kind: type | None = None, codec: Codec = JSON_CODEC
) -> ProblemLocation:
    """Split msgspec's ``"<message> - at `$.path`"`` into a path and a message in plain words.

    An unknown or missing field is reported at the field's own path, so the caller sees which
    name was misspelled or left out; a syntax error at the path of the value being read (JSON
    only: MessagePack errors name their path already). ``kind``, the type the body was decoded
    as, tells the message what is allowed at the path (see :mod:`tailgauge.api.wording`).
    """
    text = str(error)
    match = _LOCATION.match(text)
    message, path = (match["message"], match["path"]) if match else (text, "$")
    named = _NAMED_FIELD.match(message)
    if named:
        path = f"{path}.{named['field']}"
    elif not match and isinstance(error, msgspec.DecodeError) and codec is JSON_CODEC:
        byte = _BYTE.search(message)
        if byte:
            path = json_path_at(body, int(byte["offset"]))
    return ProblemLocation(path=path, message=wording.plain(message, path, kind, body, codec.name))


def invalid_body(
    error: msgspec.MsgspecError, body: bytes = b"", codec: Codec = JSON_CODEC, kind: type | None = None
) -> ApiProblem:
    """The 400 of a body msgspec refused, decoded as ``kind`` (when known, the message says what is allowed)."""
    location = locate_msgspec_error(error, body, kind, codec)
    if isinstance(error, msgspec.ValidationError):
        kind_of = "does not match the schema"
    else:
        kind_of = f"is not valid {codec.name}"
    where = f" at {location.path}" if location.path != "$" else ""
    return ApiProblem("invalid-body", f"The request body {kind_of}{where}: {location.message}", [location])


def problem_response(
    slug: str,
    detail: str,
    errors: list[ProblemLocation],
    headers: dict[str, str] | None = None,
    codec: Codec = JSON_CODEC,
) -> Response:
    status, title = PROBLEM_TYPES[slug]
    problem = Problem(type=_TYPE_PREFIX + slug, title=title, status=status, detail=detail, errors=errors)
    return Response(
        content=codec.encode(problem), status_code=status, media_type=codec.problem_media_type, headers=headers
    )


def handle_api_problem(request: Request, exc: ApiProblem) -> Response:
    return problem_response(exc.slug, exc.detail, exc.errors, exc.headers, problem_codec(request))


def handle_descriptor_error(request: Request, exc: DescriptorError) -> Response:
    slug = "limit-exceeded" if isinstance(exc, LimitExceeded) else "uncomputable-input"
    if slug == "limit-exceeded":
        metrics.BUDGET_REJECTIONS.inc()
    errors = [ProblemLocation(path=json_path(loc.path), message=loc.message) for loc in exc.locations]
    return problem_response(slug, exc.detail, errors, codec=problem_codec(request))


def json_path(field: str, prefix: str = "$") -> str:
    """The JSON path of a core error's logical field (``options.interval`` -> ``$.options.interval``).

    The core names fields without knowing where the request put them; the edge places them under
    the request's own prefix (``$.first`` for a comparison's first input). A path that already
    starts with ``$`` was written by the edge itself and is kept.
    """
    if field.startswith("$"):
        return field
    if not field:
        return prefix
    return f"{prefix}{field}" if field.startswith("[") else f"{prefix}.{field}"


def handle_http_exception(request: Request, exc: HTTPException) -> Response:
    slug = _SLUG_BY_STATUS.get(exc.status_code)
    if slug is None:
        slug = "internal-error" if exc.status_code >= 500 else "invalid-body"
    detail = exc.detail if isinstance(exc.detail, str) and exc.detail else PROBLEM_TYPES[slug][1]
    errors = []
    if slug == "not-found":
        errors = [ProblemLocation(path="path", message="no resource at this path")]
    elif slug == "body-too-large":
        # litestar's body-size limit (request_max_body_size): the offending field is the whole body.
        limit = request.app.state.settings.max_body_bytes
        detail = f"the request body is larger than this server's limit of {limit} bytes"
        errors = [ProblemLocation(path="$", message=f"at most {limit} bytes")]
    # Keep the exception's headers: a 405 must say which methods are allowed (RFC 9110).
    return problem_response(slug, detail, errors, headers=dict(exc.headers or {}), codec=problem_codec(request))


def handle_unexpected(request: Request, exc: Exception) -> Response:
    logger.exception("unhandled error on %s %s", request.method, request.url.path)
    return problem_response(
        "internal-error", "The service failed to handle this request.", [], codec=problem_codec(request)
    )
