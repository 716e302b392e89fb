"""The OpenAPI 3.1 document, generated from the endpoint table and the wire Structs by msgspec.

msgspec's JSON Schema keeps every constraint of the Structs (item bounds, enumerations,
``additionalProperties: false`` on requests), so the published request schemas are exactly
what the decoder enforces. Operations come from :data:`tailgauge.api.operations.OPERATIONS`,
the same table the routes are built from; response examples are the app's real answers
(:mod:`tailgauge.api.examples`).

What the document adds to msgspec's schemas, so that code generated from it works:

* every answer's schema is open (no ``additionalProperties: false``): a client generated today
  must accept tomorrow's answer with one more member; requests stay strict. Every member of an
  answer is listed as required (the server always sends it, null when undefined), except the
  descriptors and members that ``options.descriptors`` can leave out (absent, never null);
* a request member's default is said in its description, not as ``default``: generators make a
  member with a ``default`` required in request types (openapi-typescript) or send the default
  of the day they ran; the server applies its own default to an absent member;
* every named enumeration carries ``x-enum-varnames``, its Python member names, so generators
  name values that differ only in case (``g1``, ``G1``) apart;
* a tag value (``kind`` of a comparison input, of a merged answer) is a ``const``, not a
  one-value enumeration;
* the token scheme is declared once, at the top, as optional (``[{}, {bearerToken: []}]``:
  enforced only when the server is configured with tokens), and operations that never ask
  for one say ``security: []``.
"""

from __future__ import annotations

import enum

import msgspec

import tailgauge
from tailgauge.api import examples as recorded
from tailgauge.api import schemas
from tailgauge.api.media import FIGURE_TYPES, JSON, PROBLEM_JSON, PROBLEM_MSGPACK
from tailgauge.api.operations import BODY_MEDIA_TYPES, OPERATIONS, Operation
from tailgauge.api.problems import PROBLEM_TYPES

_REF = "#/components/schemas/{name}"
# The project has not chosen a licence for others; the document says so rather than guess one.
LICENSE = {"name": "Proprietary: no licence to reuse is granted (none has been chosen)"}
TAGS = (
    ("descriptors", "Describe one input: raw samples, a table of outcomes, binned counts, or merged partial states."),
    ("comparisons", "Contrast two inputs of any kind, second against first."),
    ("catalog", "What every descriptor, response member and warning code means."),
    ("operations", "What the people running the service watch."),
    ("health", "Probes for the orchestrator: liveness and readiness."),
)
BEARER = "bearerToken"
# Problem types that only a request body can cause.
_BODY_PROBLEMS = {"invalid-body", "body-too-large", "unsupported-media-type", "uncomputable-input", "limit-exceeded"}
_STATUS_NOTES = {
    401: " Only when the server is configured with bearer tokens (TAILGAUGE_API_TOKENS).",
    503: " The worker's memory is taken by requests in progress; retry after Retry-After.",
}


def _content(schema: dict, media_types: tuple[str, ...]) -> dict:
    """Each media type with ``schema``; a figure type with its own (the image's bytes)."""
    return {
        media: {"schema": {"type": "string", "contentMediaType": media} if media in FIGURE_TYPES else schema}
        for media in media_types
    }


def _enums() -> dict[str, type[enum.Enum]]:
    """Every enumeration of the wire messages by its component name (its class name)."""
    found = {}
    for value in vars(schemas).values():
        if isinstance(value, type) and issubclass(value, enum.Enum) and value is not enum.Enum:
            found[value.__name__] = value
    return found


def _walk(node):
    if isinstance(node, dict):
        yield node
        for value in node.values():
            yield from _walk(value)
    elif isinstance(node, list):
        for value in node:
            yield from _walk(value)


def _referenced(node, components: dict) -> set[str]:
    """Names of the components ``node`` reaches, directly or through other components."""
    seen: set[str] = set()
    pending = [node]
    while pending:
        for schema in _walk(pending.pop()):
            ref = schema.get("$ref")
            if isinstance(ref, str):
                name = ref.rsplit("/", 1)[-1]
                if name not in seen:
                    seen.add(name)
                    pending.append(components[name])
    return seen


def _finish_components(components: dict, requests: list[dict], answers: list[dict]) -> None:
    enums = _enums()
    for name, schema in components.items():
        if "enum" in schema and "properties" not in schema:
            if name not in enums:
                raise RuntimeError(f"enum component {name} has no enumeration class among the schemas")
            schema["x-enum-varnames"] = [enums[name](value).name for value in schema["enum"]]
    for schema in _walk(components):
        values = schema.get("enum")
        if isinstance(values, list) and len(values) == 1 and "x-enum-varnames" not in schema:
            schema["const"] = schema.pop("enum")[0]
    asked = set().union(*(_referenced(node, components) for node in requests))
    answered = set().union(*(_referenced(node, components) for node in answers))
    shared = {name for name in asked & answered if components[name].get("type") == "object"}
    if shared:
        raise RuntimeError(
            f"objects both sent and answered cannot be strict and open at once: {sorted(shared)}; "
            "give the request its own strict Struct"
        )
    for name in answered - asked:
        schema = components[name]
        if schema.get("type") == "object":
            schema.pop("additionalProperties", None)
            # Every member is always sent (null when undefined), defaulted or not, except those
            # options.descriptors may leave out (UNSET by default: absent, never null).
            leaves_out = _may_be_absent(name)
            schema["required"] = [member for member in schema.get("properties", {}) if member not in leaves_out]
    for name in asked:
        for prop in components[name].get("properties", {}).values():
            if "default" in prop:
                # Said in words: a `default` would make generated request types demand the member
                # (openapi-typescript) or send the default of the day the client was generated.
                value = msgspec.json.encode(prop.pop("default")).decode()
                prop["description"] = f"{prop.get('description', '').rstrip()} Default: {value}.".lstrip()


def _may_be_absent(component: str) -> set[str]:
    """Members of an answer's Struct that default to UNSET: absent when not asked for."""
    struct = getattr(schemas, component, None)
    if not (isinstance(struct, type) and issubclass(struct, msgspec.Struct)):
        return set()
    return {f.encode_name for f in msgspec.structs.fields(struct) if f.default is msgspec.UNSET}


def _problem_description(op: Operation, status: int) -> str:
    titles = sorted(
        {
            title
            for slug, (code, title) in PROBLEM_TYPES.items()
            if code == status and (op.request is not None or slug not in _BODY_PROBLEMS)
        }
    )
    description = "; ".join(titles) + " (RFC 9457 problem details)."
    if op.protected_when is not None and status in (400, 401):
        description += f" Only when the server sets TAILGAUGE_{op.protected_when.upper()} and tokens."
    else:
        description += _STATUS_NOTES.get(status, "")
    return description


def _success(op: Operation) -> str:
    if not op.figures:
        return "Success."
    return (
        f"Success: the answer as {' or '.join(m for m in op.answers if m not in op.figures)}, or a figure of it as "
        f"{' or '.join(op.figures)} (by Accept; title, unit and size from options.figure)."
    )


def _example(content: dict, media: str, example) -> None:
    if example is not None:
        content[media]["example"] = example


def build_document(*, metrics_require_token: bool = False, examples: dict | None = None) -> dict:
    """The complete OpenAPI 3.1 document as a JSON-ready dict.

    ``metrics_require_token``: the server's setting of that name, which decides whether
    ``GET /metrics`` is under the token scheme. ``examples``: answers by operation id and
    status (default: the committed recording).
    """
    examples = recorded.load() if examples is None else examples
    settings = {"metrics_require_token": metrics_require_token}
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
        answers = examples.get(op.operation_id, {})
        schema = {"type": "string"} if op.response is None else ref_of[op.response]
        ok = {"description": _success(op), "content": _content(schema, op.answers)}
        if JSON in op.answers:
            _example(ok["content"], JSON, answers.get("200"))
        responses = {"200": ok}
        for status, description in op.other_answers.items():
            other = {"description": description, "content": _content(ref_of[op.response], op.answers)}
            _example(other["content"], JSON, answers.get(str(status)))
            responses[str(status)] = other
        for status in op.problems:
            problem = {
                "description": _problem_description(op, status),
                "content": _content(problem_ref, (PROBLEM_JSON, PROBLEM_MSGPACK)),
            }
            _example(problem["content"], PROBLEM_JSON, answers.get(str(status)))
            responses[str(status)] = problem
        entry = {
            "operationId": op.operation_id,
            "summary": op.summary,
            "description": op.description,
            "tags": [op.tag],
            "responses": responses,
        }
        protected = op.protected or (op.protected_when is not None and settings[op.protected_when])
        if not protected:
            entry["security"] = []  # never asks for a token; the document's optional token is for the rest
        if op.request is not None:
            content = _content(ref_of[op.request], BODY_MEDIA_TYPES)
            _example(content, JSON, op.example)
            entry["requestBody"] = {"required": True, "content": content}
        paths.setdefault(op.path, {})[op.method] = entry

    _finish_components(
        components,
        requests=[ref_of[op.request] for op in OPERATIONS if op.request is not None],
        answers=[problem_ref, *(ref_of[op.response] for op in OPERATIONS if op.response is not None)],
    )
    return {
        "openapi": "3.1.0",
        "info": {
            "title": "Tailgauge",
            "version": tailgauge.__version__,
            "description": (
                "Descriptors of a distribution with named estimator conventions. "
                "Descriptors summarise data; they do not certify a process. Bodies may be JSON or "
                "MessagePack (by Content-Type) and answers either (by Accept); large arrays may be "
                "sent as little-endian float64 bytes. Answers may gain members in later versions: "
                "ignore the ones you do not know."
            ),
            "license": LICENSE,
        },
        "servers": [{"url": "/", "description": "The server that serves this document."}],
        "tags": [{"name": name, "description": description} for name, description in TAGS],
        # Either no token or a bearer token: the server asks for one only when it is configured
        # with tokens. Operations that never ask say security: [].
        "security": [{}, {BEARER: []}],
        "paths": paths,
        "components": {
            "schemas": components,
            "securitySchemes": {
                BEARER: {
                    "type": "http",
                    "scheme": "bearer",
                    "description": (
                        "Enforced only when the server is configured with TAILGAUGE_API_TOKENS; "
                        "without tokens every operation is open and no Authorization header is needed."
                    ),
                }
            },
        },
    }


def document_bytes(*, metrics_require_token: bool = False, examples: dict | None = None) -> bytes:
    """The document as canonical, indented JSON (the form committed under openapi/)."""
    document = build_document(metrics_require_token=metrics_require_token, examples=examples)
    return msgspec.json.format(msgspec.json.encode(document), indent=2) + b"\n"


__all__ = ["build_document", "document_bytes"]
