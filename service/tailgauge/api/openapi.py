"""The OpenAPI 3.1 document, generated from the endpoint table and the wire Structs by msgspec.

msgspec's JSON Schema keeps every constraint of the Structs (item bounds, enumerations,
``additionalProperties: false``), so the published schema is exactly what the decoder
enforces. Operations come from :data:`tailgauge.api.operations.OPERATIONS`, the same table the
routes are built from.
"""

from __future__ import annotations

import msgspec

import tailgauge
from tailgauge.api import schemas
from tailgauge.api.media import JSON, PROBLEM_JSON, PROBLEM_MSGPACK
from tailgauge.api.operations import BODY_MEDIA_TYPES, OPERATIONS
from tailgauge.api.problems import PROBLEM_TYPES

_REF = "#/components/schemas/{name}"


def _content(schema: dict, media_types: tuple[str, ...]) -> dict:
    return {media: {"schema": schema} for media in media_types}


def build_document() -> dict:
    """The complete OpenAPI 3.1 document as a JSON-ready dict."""
    types = [schemas.Problem]
    for op in OPERATIONS:
        if op.response is not None:
            types.append(op.response)
        if op.request is not None:
            types.append(op.request)
    refs, components = msgspec.json.schema_components(types, ref_template=_REF)
    ref_of = dict(zip(types, refs))
    problem_ref = ref_of[schemas.Problem]

    paths: dict[str, dict] = {}
    for op in OPERATIONS:
        if op.response is None:
            success = _content({"type": "string"}, op.answers)
        else:
            success = _content(ref_of[op.response], op.answers)
        responses = {"200": {"description": "Success.", "content": success}}
        for status, description in op.other_answers.items():
            responses[str(status)] = {"description": description, "content": success}
        for status in op.problems:
            titles = sorted({title for code, title in PROBLEM_TYPES.values() if code == status})
            description = "; ".join(titles) + " (RFC 9457 problem details)."
            if status == 401:
                description += " Only when the server is configured with bearer tokens."
            if status == 503:
                description += " The worker's memory is taken by requests in progress; retry after Retry-After."
            responses[str(status)] = {
                "description": description,
                "content": _content(problem_ref, (PROBLEM_JSON, PROBLEM_MSGPACK)),
            }
        entry = {
            "operationId": op.operation_id,
            "summary": op.summary,
            "description": op.description,
            "tags": [op.tag],
            "responses": responses,
        }
        if op.protected:
            # Either no token (an open server) or a bearer token.
            entry["security"] = [{}, {"bearerToken": []}]
        if op.request is not None:
            content = _content(ref_of[op.request], BODY_MEDIA_TYPES)
            if op.example is not None:
                content[JSON]["example"] = op.example
            entry["requestBody"] = {"required": True, "content": content}
        paths.setdefault(op.path, {})[op.method] = entry

    return {
        "openapi": "3.1.0",
        "info": {
            "title": "Tailgauge",
            "version": tailgauge.__version__,
            "description": (
                "Descriptors of a distribution with named estimator conventions. "
                "Descriptors summarise data; they do not certify a process. Bodies may be JSON or "
                "MessagePack (by Content-Type) and answers either (by Accept); large arrays may be "
                "sent as little-endian float64 bytes."
            ),
        },
        "paths": paths,
        "components": {
            "schemas": components,
            "securitySchemes": {
                "bearerToken": {
                    "type": "http",
                    "scheme": "bearer",
                    "description": "Asked for only when the server is configured with TAILGAUGE_API_TOKENS.",
                }
            },
        },
    }


def document_bytes() -> bytes:
    """The document as canonical, indented JSON (the form committed under openapi/)."""
    return msgspec.json.format(msgspec.json.encode(build_document()), indent=2) + b"\n"

