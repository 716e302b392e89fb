"""The comparison's warnings: the collector, why contrasts are undefined, and why they lack intervals.

Nothing in a comparison is NaN: an undefined or unrepresentable contrast is ``None``, and the
modules of this package say why through the collector here. Warnings of one cause are worded
once and name every member they concern.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from tailgauge.core.compare.vocabulary import COMPARISON_WARNINGS, CONVENTION_MEMBERS
from tailgauge.core.describe import Description
from tailgauge.core.describe.warnings import Warnings as DescriptionWarnings
from tailgauge.core.describe.warnings import finite_or_none
from tailgauge.core.resample import BootstrapResult
from tailgauge.core.registry import WarningCode


@dataclass(frozen=True)
class ComparisonWarning:
    """A warning of the comparison about its contrasts: ``side`` is "comparison" and ``descriptors``
    name comparison members, e.g. "differences.mean", "quantile_shifts[2]". (The values "first"
    and "second" remain in the schema; each input's warnings are in its own description.)"""

    side: str
    code: str
    message: str
    descriptors: list[str]


class Warnings(DescriptionWarnings):
    """The comparison's own warnings: the registry's codes that a comparison emits."""

    def __init__(self) -> None:
        super().__init__(COMPARISON_WARNINGS)

    def of_comparison(self) -> list[ComparisonWarning]:
        return [ComparisonWarning("comparison", n.code, n.message, n.descriptors) for n in self.items]


def side_of(a, b) -> str:
    """Which input leaves a contrast undefined, for the warning's wording."""
    if a is None and b is None:
        return "each input"
    return "the first input" if a is None else "the second input"


def undefined_by_side(missing: dict[str, list[str]], what: str, notes: Warnings) -> None:
    """One ``difference_undefined`` warning per cause (first, second or both inputs)."""
    for cause, members in missing.items():
        if members:
            notes.add(
                WarningCode.DIFFERENCE_UNDEFINED,
                f"these {what} are undefined because {cause} leaves the descriptor undefined "
                "(see its warnings)",
                members,
            )


def note_conventions(described: tuple[Description, Description], notes: Warnings) -> None:
    """Warn when the inputs' estimators differ, so their differences mix definitions."""
    a, b = described[0].conventions, described[1].conventions
    parts = []
    for attribute, label, affected in CONVENTION_MEMBERS:
        x, y = getattr(a, attribute), getattr(b, attribute)
        if x != y:
            parts.append((f"{label}: first {x!r}, second {y!r}", affected))
    if parts:
        notes.add(
            WarningCode.CONVENTIONS_DIFFER,
            "the inputs are described by different estimators, so these differences mix definitions ("
            + "; ".join(text for text, _ in parts) + ")",
            [n if n == "quantile_shifts" else f"differences.{n}" for _, names in parts for n in names],
        )


class IntervalWarnings:
    """Collects why contrasts lack an interval or fell back, then words the warnings once."""

    def __init__(self) -> None:
        self.fallbacks: dict[str, list[str]] = {}
        self.undefined: dict[str, list[str]] = {}
        self.not_offered: dict[str, list[str]] = {}

    def record(self, member: str, result: BootstrapResult) -> None:
        if result.reason is not None:
            target = self.fallbacks if result.interval is not None else self.undefined
            target.setdefault(result.reason, []).append(member)

    def skip(self, member: str, reason: str) -> None:
        self.not_offered.setdefault(reason, []).append(member)

    def emit(self, notes: Warnings) -> None:
        for reason, members in self.fallbacks.items():
            notes.add(
                WarningCode.BCA_FALLBACK,
                f"BCa could not be computed ({reason}); the percentile interval is given",
                members,
            )
        for reason, members in self.undefined.items():
            notes.add(WarningCode.INTERVAL_UNDEFINED, f"no bootstrap interval: {reason}", members)
        for reason, members in self.not_offered.items():
            notes.add(WarningCode.INTERVAL_NOT_OFFERED, f"no bootstrap interval: {reason}", members)
