"""Errors raised by the numeric core when an input cannot be described.

    DescriptorError                 base: the input is well-formed but cannot be computed
    ├── UncomputableInput           a located reason (e.g. a missing value under the reject policy)
    └── LimitExceeded               the input is larger than the configured limits allow

The core knows nothing of HTTP; the API layer maps each class to one problem type.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Location:
    """The offending part of the input, by its logical field, with why it is wrong.

    ``path`` names the field as the input kind defines it (``values[3]``, ``options.interval``,
    ``states[2].count``; ``""`` for the input as a whole), never as a JSON path: the API layer
    places it under the request's own prefix (``$.values[3]``, ``$.first.values[3]``).
    """

    path: str
    message: str


@dataclass
class DescriptorError(Exception):
    """Base class: the input cannot be described as given."""

    detail: str
    locations: list[Location] = field(default_factory=list)

    def __str__(self) -> str:
        return self.detail


class UncomputableInput(DescriptorError):
    """The input matches the schema but no descriptor set can be computed from it."""

    @classmethod
    def at(cls, path: str, message: str, detail: str | None = None) -> UncomputableInput:
        """The error of one located rule: ``detail`` defaults to ``"{path}: {message}"``."""
        return cls(detail=detail or f"{path}: {message}", locations=[Location(path, message)])


class LimitExceeded(DescriptorError):
    """The input exceeds a configured limit (number of values, moment order, ...)."""
