"""Limits and switches of the service, read from ``TAILGAUGE_*`` environment variables and validated."""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field, fields

PREFIX = "TAILGAUGE_"
# Ceilings of the published schema (the request Structs use them as maxima); the settings of the
# same name may only lower them, since a higher setting could never be reached.
SCHEMA_MAX_MOMENT_ORDER = 12
SCHEMA_MAX_PROBABILITIES = 1000
SCHEMA_MAX_SCORES = 10_000
SCHEMA_MAX_STATES = 100_000
MIN_TOKEN_LENGTH = 16
_TOKEN = re.compile(r"[A-Za-z0-9\-._~+/]+=*")
_ORIGIN = re.compile(r"https?://[A-Za-z0-9.\-]+(:[0-9]{1,5})?")


class SettingsError(ValueError):
    """A setting from the environment is missing its type, malformed or out of bounds."""


@dataclass(frozen=True)
class Settings:
    """Every limit the service enforces; defaults are safe for a shared deployment.

    Each field is read from ``TAILGAUGE_<FIELD NAME IN CAPITALS>``.
    """

    # Largest request body accepted, in bytes (413 beyond). 1e6 values as JSON is ~20 MB.
    max_body_bytes: int = 32 * 1024 * 1024
    # Most observations (values, nulls included) in one request (413 beyond).
    max_values: int = 2_000_000
    # Most groups in one POST /v1/descriptors/groups (422 beyond); their values count against
    # max_values together.
    max_groups: int = 10_000
    # Highest moment order a caller may request.
    max_moment_order: int = 12
    # Most quantile probabilities in one request.
    max_probabilities: int = 1_000
    # Most tied modes listed in a response (the count of ties is always given).
    max_modes_listed: int = 100
    # Most outcomes (bins) listed in tail_contributions before only the largest are listed.
    max_contributions_listed: int = 1_000
    # Resampling budget: bootstrap resamples x support rows per request (422 beyond).
    max_resample_work: int = 1_000_000_000
    # Wall-clock limit of one request's computation, in seconds (422 beyond).
    max_request_seconds: int = 30
    # Memory one request may plan, decoding included (422, or 413 for a body, beyond).
    max_request_memory_bytes: int = 384 * 1024 * 1024
    # The most a worker process plans at once over its requests in progress: a request that does
    # not fit beside them answers 503 server-busy at once, with Retry-After. At least
    # max_request_memory_bytes; the 128 MiB above it keep smaller requests admitted beside the
    # largest one. The default keeps two workers of a 1.5 GiB pod safe: 768 MiB each, less an
    # idle worker (~130 MiB), leaves room for 512 MiB planned plus the allocator's and the
    # estimates' slack. Four 2e6-value BCa requests arriving together at one worker: one runs
    # (321 MiB planned), three get 503; its peak RSS was about 520 MB (tests/system/test_memory.py).
    max_worker_memory_bytes: int = 512 * 1024 * 1024
    # After a request that planned at least this many bytes, the worker gives the allocator's free
    # pages back to the system (glibc malloc_trim), so its resident size returns near idle.
    # 0: never.
    trim_after_bytes: int = 64 * 1024 * 1024
    # Above this many support rows the bag of little bootstraps replaces the ordinary bootstrap.
    bootstrap_subset_rows: int = 100_000
    # Threads one request's resampling may use (numpy releases the GIL in its loops).
    resample_threads: int = 2
    # Bearer tokens accepted on /v1/* (comma-separated in the environment). Empty: no token
    # is asked for (local use). Health endpoints, /docs and /openapi.json are always open.
    api_tokens: tuple[str, ...] = field(default=(), repr=False)
    # Whether GET /metrics also asks for one of api_tokens (when any are set).
    metrics_require_token: bool = False
    # Origins allowed by CORS (comma-separated). Empty: no CORS headers at all.
    cors_origins: tuple[str, ...] = ()
    # One JSON log line per request on stderr (with its request id).
    request_log: bool = True

    _BOUNDS = {
        "max_body_bytes": (1024, 1024**3),
        "max_values": (1, 100_000_000),
        "max_groups": (1, 1_000_000),
        "max_moment_order": (4, SCHEMA_MAX_MOMENT_ORDER),
        "max_probabilities": (1, SCHEMA_MAX_PROBABILITIES),
        "max_modes_listed": (1, 100_000),
        "max_contributions_listed": (1, 100_000),
        "max_resample_work": (1_000, 10**12),
        "max_request_seconds": (1, 3600),
        "max_request_memory_bytes": (16 * 1024 * 1024, 1024**4),
        "max_worker_memory_bytes": (16 * 1024 * 1024, 1024**4),
        "trim_after_bytes": (0, 1024**4),
        "bootstrap_subset_rows": (1_000, 100_000_000),
        "resample_threads": (1, 64),
    }

    def __post_init__(self) -> None:
        for name, (low, high) in self._BOUNDS.items():
            value = getattr(self, name)
            if not isinstance(value, int) or isinstance(value, bool) or not low <= value <= high:
                raise SettingsError(f"{name} must be an integer in [{low}, {high}], got {value!r}")
        if self.max_worker_memory_bytes < self.max_request_memory_bytes:
            raise SettingsError(
                f"max_worker_memory_bytes ({self.max_worker_memory_bytes}) must be at least "
                f"max_request_memory_bytes ({self.max_request_memory_bytes}): a request of that size could never run"
            )
        for token in self.api_tokens:
            if not isinstance(token, str) or len(token) < MIN_TOKEN_LENGTH or not _TOKEN.fullmatch(token):
                raise SettingsError(
                    f"each api token must be at least {MIN_TOKEN_LENGTH} characters of A-Z a-z 0-9 - . _ ~ + /"
                )
        for origin in self.cors_origins:
            if origin != "*" and not _ORIGIN.fullmatch(origin):
                raise SettingsError(f"cors origin {origin!r} must look like https://host[:port], or be *")
        for name in ("metrics_require_token", "request_log"):
            if not isinstance(getattr(self, name), bool):
                raise SettingsError(f"{name} must be true or false")

    @classmethod
    def from_env(cls, environ: Mapping[str, str] | None = None) -> Settings:
        """Settings from ``environ`` (default ``os.environ``); unknown TAILGAUGE_ names are errors."""
        environ = os.environ if environ is None else environ
        known = {f.name for f in fields(cls)}
        values: dict[str, object] = {}
        for key, raw in environ.items():
            if not key.startswith(PREFIX):
                continue
            name = key[len(PREFIX) :].lower()
            if name not in known:
                raise SettingsError(f"unknown setting {key}")
            values[name] = _parse(key, name, raw)
        return cls(**values)


def _parse(key: str, name: str, raw: str) -> object:
    default = next(f.default for f in fields(Settings) if f.name == name)
    if isinstance(default, bool):
        lowered = raw.strip().lower()
        if lowered in ("1", "true", "yes", "on"):
            return True
        if lowered in ("0", "false", "no", "off"):
            return False
        raise SettingsError(f"{key} must be true or false, got {raw!r}")
    if isinstance(default, tuple):
        # Values are never echoed: a token must not reach a log through an error message.
        return tuple(part.strip() for part in raw.split(",") if part.strip())
    try:
        return int(raw.replace("_", ""))
    except ValueError:
        raise SettingsError(f"{key} must be an integer, got {raw!r}") from None
