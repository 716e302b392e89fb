"""Warnings of a description: the collector, and the warnings every description shares.

Every ``None`` a description carries is paired with a warning that names it and says why; no
NaN or infinity leaves the core. Codes come only from :class:`~tailgauge.core.registry.WarningCode`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from tailgauge.core.describe.basis import Basis
from tailgauge.core.describe.results import Descriptor, ResultWarning
from tailgauge.core.registry import UNDEFINED_FOR_CONSTANT, UNDEFINED_FOR_ONE, WarningCode


class Warnings:
    """Collects warnings; turns every non-finite number into ``None`` with a reason."""

    def __init__(self, allowed: frozenset[WarningCode] | None = None) -> None:
        """``allowed``: the codes this collector's owner may emit (every code when ``None``)."""
        self.items: list[ResultWarning] = []
        self.allowed = allowed

    def add(self, code: WarningCode, message: str, descriptors: Sequence[str] = ()) -> None:
        if not isinstance(code, WarningCode):
            raise TypeError(f"warning codes come from the registry's vocabulary, not {code!r}")
        if self.allowed is not None and code not in self.allowed:
            raise TypeError(f"{code.value!r} is not among the warnings this collector's owner emits")
        self.items.append(ResultWarning(code=code, message=message, descriptors=list(descriptors)))

    def finite(self, value: float | None, name: str) -> float | None:
        """``value`` if finite; otherwise ``None`` and a warning that float64 cannot hold it."""
        if value is None:
            return None
        if math.isfinite(value):
            return float(value)
        self.add(
            WarningCode.NOT_REPRESENTABLE,
            f"{name} is outside the range of float64 for these data (overflow or underflow)",
            [name],
        )
        return None


def finite_or_none(value: float) -> float | None:
    """``value`` as a float if finite, else ``None`` (the caller says why)."""
    return float(value) if math.isfinite(value) else None


def note_degenerate(basis: Basis, constant: bool, notes: Warnings) -> None:
    """Say why spread or shape is undefined: one observation (or one bin), or no spread at all."""
    if basis.single_bin:
        notes.add(
            WarningCode.SINGLE_BIN,
            "every count lies in one bin, so the spread and shape within it are unknown",
            UNDEFINED_FOR_ONE,
        )
    elif basis.single:
        notes.add(
            WarningCode.SINGLE_OBSERVATION,
            "a single observation carries no information on spread or shape",
            UNDEFINED_FOR_ONE,
        )
    elif constant:
        notes.add(
            WarningCode.CONSTANT_DATA,
            "all values are equal: the spread is zero, so shape (skewness, kurtosis), "
            "standardized moments and autocorrelation are undefined",
            UNDEFINED_FOR_CONSTANT + ("tail_contributions",),
        )


# Codes that speak of a descriptor's interval, not of its value: naming a descriptor they do not
# explain why its value is null.
_ABOUT_INTERVALS = frozenset((
    WarningCode.BCA_FALLBACK,
    WarningCode.INTERVAL_UNDEFINED,
    WarningCode.INTERVAL_NOT_OFFERED,
    WarningCode.RESAMPLING_SCHEME,
    WarningCode.SERIAL_DEPENDENCE,
    WarningCode.BOOTSTRAP_SMALL_SAMPLE,
    WarningCode.BOOTSTRAP_DISCRETE,
))


def explain_remaining_nulls(descriptors: dict[str, Descriptor], notes: Warnings) -> None:
    """Safety net of the contract "every null has a reason": name any null no warning about values
    covers (a warning about its interval alone does not)."""
    covered = {name for note in notes.items if note.code not in _ABOUT_INTERVALS for name in note.descriptors}
    silent = [name for name, d in descriptors.items() if d.value is None and name not in covered]
    if silent:
        notes.add(
            WarningCode.UNDEFINED_FOR_THESE_DATA,
            "these descriptors cannot be computed for these data (a quantity they divide by is zero "
            "or outside float64's range)",
            silent,
        )
