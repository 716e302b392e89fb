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
_UNKNOWN_FIELD = re.compile(r"^Object contains unknown field `(?P<field>[^`]*)`")

logger = logging.getLogger("service.api")


class ApiProblem(Exception):
    """An error detected by the HTTP layer, already located."""

    def __init__(self, slug: str, detail: str, errors: list[ProblemLocation] | None = None) -> None:
        super().__init__(detail)
        self.slug = slug
        self.detail = detail
        self.errors = errors or []


def locate_msgspec_error(error: msgspec.MsgspecError) -> ProblemLocation:
    """Split msgspec's ``"<message> - at `$.path`"`` into a path and a message.

    An unknown field is reported at the field's own path, so the caller sees which name
    was misspelled.
    """
    text = str(error)
    match = _LOCATION.match(text)
    message, path = (match["message"], match["path"]) if match else (text, "$")
    unknown = _UNKNOWN_FIELD.match(message)
    if unknown:
        path = f"{path}.{unknown['field']}"
    return ProblemLocation(path=path, message=message)


def invalid_body(error: msgspec.MsgspecError) -> ApiProblem:
    location = locate_msgspec_error(error)
    kind = "does not match the schema" if isinstance(error, msgspec.ValidationError) else "is not valid JSON"
    return ApiProblem("invalid-body", f"The request body {kind}: {location.message}", [location])


def _response(slug: str, detail: str, errors: list[ProblemLocation]) -> Response:
    status, title = PROBLEM_TYPES[slug]
    problem = Problem(type=_TYPE_PREFIX + slug, title=title, status=status, detail=detail, errors=errors)
    return Response(
        content=msgspec.json.encode(problem), status_code=status, media_type=PROBLEM_MEDIA_TYPE
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
    return _response(slug, detail, [])


def handle_unexpected(request: Request, exc: Exception) -> Response:
    logger.exception("unhandled error on %s %s", request.method, request.url.path)
    return _response("internal-error", "The service failed to handle this request.", [])
