"""RFC 9457 problem details: the one table from every error to its HTTP status and problem type.

    DescriptorError (core)       mapped here by class:
    ├── UncomputableInput  -> 422 uncomputable-input
    └── LimitExceeded      -> 422 limit-exceeded
    ApiProblem             -> the status of its slug (400, 406, 413, 415, ...)
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

from service.api.schemas import Problem, ProblemLocation
from service.core.errors import DescriptorError, LimitExceeded

PROBLEM_MEDIA_TYPE = "application/problem+json"
_TYPE_PREFIX = "urn:tailgauge:problem:"

# slug -> (status, title). Slugs are part of the API: never rename one.
PROBLEM_TYPES: dict[str, tuple[int, str]] = {
    "invalid-body": (400, "The request body is not valid"),
    "unauthorized": (401, "Authentication is required"),
    "not-found": (404, "No such resource"),
    "method-not-allowed": (405, "Method not allowed"),
    "not-acceptable": (406, "No acceptable response media type"),
    "body-too-large": (413, "The request is too large"),
    "unsupported-media-type": (415, "Unsupported request media type"),
    "uncomputable-input": (422, "The input cannot be described"),
    "limit-exceeded": (422, "The request exceeds a configured limit"),
    "internal-error": (500, "Internal error"),
}
_SLUG_BY_STATUS = {status: slug for slug, (status, _) in PROBLEM_TYPES.items()}
_LOCATION = re.compile(r"^(?P<message>.*?) - at `(?P<path>\$[^`]*)`$", re.DOTALL)
_NAMED_FIELD = re.compile(r"^Object (?:contains unknown|missing required) field `(?P<field>[^`]*)`")
_BYTE = re.compile(r"\(byte (?P<offset>\d+)\)")

logger = logging.getLogger("service.api")


class ApiProblem(Exception):
    """An error detected by the HTTP layer, already located."""

    def __init__(self, slug: str, detail: str, errors: list[ProblemLocation] | None = None) -> None:
        super().__init__(detail)
        self.slug = slug
        self.detail = detail
        self.errors = errors or []


def json_path_at(body: bytes, offset: int) -> str:
    """The JSON path of the value being read at byte ``offset`` of a (possibly malformed) body.

    msgspec reports a syntax error (a ``NaN`` token, a stray character) only by byte offset;
    this scan of the prefix tracks objects, arrays, keys and strings to name the field instead.
    """
    stack: list[list] = []  # each entry: ["object", key or None, expecting_key] or ["array", index]
    i, end = 0, min(offset, len(body))
    while i < end:
        c = body[i : i + 1]
        if c == b'"':
            j = i + 1
            while j < len(body) and body[j : j + 1] != b'"':
                j += 2 if body[j : j + 1] == b"\\" else 1
            if stack and stack[-1][0] == "object" and stack[-1][2]:
                stack[-1][1] = body[i + 1 : j].decode("utf-8", "replace")
            i = j + 1
            continue
        if c == b"{":
            stack.append(["object", None, True])
        elif c == b"[":
            stack.append(["array", 0])
        elif c in (b"}", b"]") and stack:
            stack.pop()
        elif c == b":" and stack and stack[-1][0] == "object":
            stack[-1][2] = False
        elif c == b"," and stack:
            if stack[-1][0] == "array":
                stack[-1][1] += 1
            else:
                stack[-1][2] = True
        i += 1
    path = "$"
    for entry in stack:
        if entry[0] == "array":
            path += f"[{entry[1]}]"
        elif entry[1] is not None:
            path += f".{entry[1]}"
    return path


def locate_msgspec_error(error: msgspec.MsgspecError, body: bytes = b"") -> ProblemLocation:
    """Split msgspec's ``"<message> - at `$.path`"`` into a path and a message.

    An unknown or missing field is reported at the field's own path, so the caller sees which
    name was misspelled or left out; a syntax error at the path of the value being read.
    """
    text = str(error)
    match = _LOCATION.match(text)
    message, path = (match["message"], match["path"]) if match else (text, "$")
    named = _NAMED_FIELD.match(message)
    if named:
        path = f"{path}.{named['field']}"
    elif not match and isinstance(error, msgspec.DecodeError):
        byte = _BYTE.search(message)
        if byte:
            path = json_path_at(body, int(byte["offset"]))
    return ProblemLocation(path=path, message=message)


def invalid_body(error: msgspec.MsgspecError, body: bytes = b"") -> ApiProblem:
    location = locate_msgspec_error(error, body)
    kind = "does not match the schema" if isinstance(error, msgspec.ValidationError) else "is not valid JSON"
    return ApiProblem("invalid-body", f"The request body {kind}: {location.message}", [location])


def _response(
    slug: str, detail: str, errors: list[ProblemLocation], headers: dict[str, str] | None = None
) -> Response:
    status, title = PROBLEM_TYPES[slug]
    problem = Problem(type=_TYPE_PREFIX + slug, title=title, status=status, detail=detail, errors=errors)
    return Response(
        content=msgspec.json.encode(problem), status_code=status, media_type=PROBLEM_MEDIA_TYPE, headers=headers
    )


def handle_api_problem(_: Request, exc: ApiProblem) -> Response:
    return _response(exc.slug, exc.detail, exc.errors)


def handle_descriptor_error(_: Request, exc: DescriptorError) -> Response:
    slug = "limit-exceeded" if isinstance(exc, LimitExceeded) else "uncomputable-input"
    errors = [ProblemLocation(path=loc.path, message=loc.message) for loc in exc.locations]
    return _response(slug, exc.detail, errors)


def handle_http_exception(_: Request, exc: HTTPException) -> Response:
    slug = _SLUG_BY_STATUS.get(exc.status_code)
    if slug is None:
        slug = "internal-error" if exc.status_code >= 500 else "invalid-body"
    detail = exc.detail if isinstance(exc.detail, str) and exc.detail else PROBLEM_TYPES[slug][1]
    # Keep the exception's headers: a 405 must say which methods are allowed (RFC 9110).
    return _response(slug, detail, [], headers=dict(exc.headers or {}))


def handle_unexpected(request: Request, exc: Exception) -> Response:
    logger.exception("unhandled error on %s %s", request.method, request.url.path)
    return _response("internal-error", "The service failed to handle this request.", [])
