"""OpenTelemetry tracing of every request, when the `otel` extra is installed and OTEL_* asks for it.

On only when an exporter is asked for by the standard variables: ``OTEL_TRACES_EXPORTER`` names
one or more (``otlp``, ``console``; ``none`` is off), or, without it, an OTLP endpoint is set
(``OTEL_EXPORTER_OTLP_TRACES_ENDPOINT`` or ``OTEL_EXPORTER_OTLP_ENDPOINT``); ``OTEL_SDK_DISABLED=true``
turns it off whatever else is set. Everything else is read by the SDK itself from the same
variables: ``OTEL_SERVICE_NAME`` and ``OTEL_RESOURCE_ATTRIBUTES`` (the service name defaults to
``tailgauge``), ``OTEL_TRACES_SAMPLER`` (default: follow the caller's sampling decision, sample
new traces), ``OTEL_PROPAGATORS`` (default W3C ``traceparent`` with baggage), the
``OTEL_EXPORTER_OTLP_*`` endpoint, headers and timeout (OTLP over HTTP/protobuf), and the batch
processor's ``OTEL_BSP_*``.

Off (the variables unset, or the extra not installed) nothing of OpenTelemetry is imported and no
exporter is made: :func:`from_environment` returns None and a request costs one ``is None`` test.
When on, each request gets one server span, a child of the caller's ``traceparent`` when it sent
one, named by method and route template, with the route, status, input size and resample count
as attributes; the answer carries the span's own ``traceparent``, and every log line written
while the request runs carries its trace id and span id (``tailgauge.runtime.logs.trace_context``).
"""

from __future__ import annotations

import logging
import os
from collections.abc import Callable, Mapping

import tailgauge
from tailgauge.runtime import logs

logger = logging.getLogger("tailgauge.tracing")

SERVICE_NAME = "tailgauge"
TRACEPARENT = "traceparent"
# Span attributes of our own, beside the semantic conventions' http.* ones.
VALUES_ATTRIBUTE = "tailgauge.values"
RESAMPLES_ATTRIBUTE = "tailgauge.resamples"
REQUEST_ID_ATTRIBUTE = "tailgauge.request_id"


def _otlp_exporter():
    """OTLP over HTTP/protobuf, configured by OTEL_EXPORTER_OTLP_* (the SDK reads them)."""
    protocol = (
        os.environ.get("OTEL_EXPORTER_OTLP_TRACES_PROTOCOL") or os.environ.get("OTEL_EXPORTER_OTLP_PROTOCOL") or ""
    )
    if protocol.strip() not in ("", "http/protobuf"):
        logger.warning("OTLP protocol %r is not installed; traces are sent as http/protobuf", protocol)
    from opentelemetry.exporter.otlp.proto.http.trace_exporter import OTLPSpanExporter

    return OTLPSpanExporter()


def _console_exporter():
    """Spans as JSON on stdout (a debugging aid: the service's own log lines are on stderr)."""
    from opentelemetry.sdk.trace.export import ConsoleSpanExporter

    return ConsoleSpanExporter()


# OTEL_TRACES_EXPORTER name -> a factory of its exporter. Tests put an in-memory exporter here.
EXPORTERS: dict[str, Callable[[], object]] = {"otlp": _otlp_exporter, "console": _console_exporter}


def exporter_names(environ: Mapping[str, str]) -> list[str]:
    """The exporters the OTEL_* variables ask for; empty when tracing is off."""
    if environ.get("OTEL_SDK_DISABLED", "").strip().lower() == "true":
        return []
    named = environ.get("OTEL_TRACES_EXPORTER")
    if named is not None:
        names = [name.strip().lower() for name in named.split(",") if name.strip()]
        return [] if not names or "none" in names else list(dict.fromkeys(names))
    if environ.get("OTEL_EXPORTER_OTLP_TRACES_ENDPOINT") or environ.get("OTEL_EXPORTER_OTLP_ENDPOINT"):
        return ["otlp"]
    return []


class Tracing:
    """The tracer provider of this process and what a request needs from it."""

    def __init__(self, provider, tracer, propagator) -> None:
        self.provider = provider
        self.tracer = tracer
        self.propagator = propagator
        from opentelemetry import context, trace

        self._context = context
        self._trace = trace
        self._server = trace.SpanKind.SERVER
        self._error = trace.Status(trace.StatusCode.ERROR)

    def begin(self, scope, method: str, request_id: str) -> RequestSpan:
        """Start the server span of a request (a child of its ``traceparent``, if valid) and make it current."""
        carrier: dict[str, str] = {}
        for name, value in scope.get("headers", []):
            key = name.decode("latin-1").lower()
            if key not in carrier:  # the first of repeated header lines
                carrier[key] = value.decode("latin-1")
        parent = self.propagator.extract(carrier)
        span = self.tracer.start_span(
            method, context=parent, kind=self._server,
            attributes={"http.request.method": method, REQUEST_ID_ATTRIBUTE: request_id},
        )
        token = self._context.attach(self._trace.set_span_in_context(span, parent))
        span_context = span.get_span_context()
        ids = (f"{span_context.trace_id:032x}", f"{span_context.span_id:016x}")
        log_token = logs.trace_context.set(ids)
        headers: dict[str, str] = {}
        self.propagator.inject(headers, self._trace.set_span_in_context(span))
        answer = [(key.encode("latin-1"), value.encode("latin-1")) for key, value in headers.items()
                  if key == TRACEPARENT]
        return RequestSpan(self, span, token, log_token, answer)


class RequestSpan:
    """One request's span: headers for its answer, then :meth:`end` with what the request did."""

    def __init__(self, tracing: Tracing, span, token, log_token, headers) -> None:
        self._tracing, self.span, self._token, self._log_token = tracing, span, token, log_token
        self.headers = headers  # (name, value) pairs for the answer: the span's own traceparent

    def end(self, method: str, route: str, status: int, state: Mapping) -> None:
        span = self.span
        span.update_name(f"{method} {route}")
        span.set_attribute("http.route", route)
        span.set_attribute("http.response.status_code", status)
        for key, attribute in (("values", VALUES_ATTRIBUTE), ("resamples", RESAMPLES_ATTRIBUTE)):
            if key in state:
                span.set_attribute(attribute, int(state[key]))
        if status >= 500:
            span.set_status(self._tracing._error)
        span.end()
        self._tracing._context.detach(self._token)
        logs.trace_context.reset(self._log_token)


def from_environment(environ: Mapping[str, str] | None = None) -> Tracing | None:
    """The process's tracing as the OTEL_* variables ask; None when off or when the extra is missing."""
    environ = os.environ if environ is None else environ
    names = exporter_names(environ)
    if not names:
        return None
    try:
        from opentelemetry.propagate import get_global_textmap
        from opentelemetry.sdk.resources import Resource
        from opentelemetry.sdk.trace import TracerProvider
        from opentelemetry.sdk.trace.export import BatchSpanProcessor
    except ImportError:
        logger.warning(
            "OTEL_* variables ask for tracing (%s), but the otel extra is not installed "
            "(pip install 'tailgauge[otel]'): requests are not traced", ", ".join(names)
        )
        return None
    attributes = {"service.version": tailgauge.__version__}
    if not environ.get("OTEL_SERVICE_NAME") and "service.name=" not in environ.get("OTEL_RESOURCE_ATTRIBUTES", ""):
        attributes["service.name"] = SERVICE_NAME
    known = [name for name in names if name in EXPORTERS]
    for name in names:
        if name not in EXPORTERS:
            logger.warning("OTEL_TRACES_EXPORTER names %r, which is not one of %s: ignored", name, sorted(EXPORTERS))
    if not known:
        return None
    provider = TracerProvider(resource=Resource.create(attributes))
    for name in known:
        provider.add_span_processor(BatchSpanProcessor(EXPORTERS[name]()))
    return Tracing(provider, provider.get_tracer("tailgauge", tailgauge.__version__), get_global_textmap())


__all__ = ["EXPORTERS", "RequestSpan", "Tracing", "exporter_names", "from_environment"]
