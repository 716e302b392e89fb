"""Asking only for what you need: which descriptors and members an answer shows, and what they
are computed from.

A caller names descriptors (``"mean"``), members (``"quantiles"``) and families (``"spread"``, from
the registry); everything else is absent from the answer and, where it costs anything, not
computed. A :class:`Selection` keeps two sets: ``shown`` (what the answer carries) and
``computed`` (``shown`` plus what those are computed from, plus what the caller itself reads,
e.g. the four values behind ``options.score``). ``None`` in place of a selection means everything.

What is computed from what follows the descriptors' definitions in the registry: the normal
MAD from the MAD, the MAD, the medcouple and the mean-median gap from the median, the range from
the extremes. The moments-based descriptors come from one pass of power sums and the order
statistics from one sort, so within each of those two a descriptor costs next to nothing; what a
selection saves is the sort, the medcouple, the half-sample mode, the L-moments, the members and
the intervals of what is not asked for.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any, TypeVar

from tailgauge.core.registry import DESCRIPTORS, SCALAR_DESCRIPTORS, names

Warned = TypeVar("Warned", bound=Any)  # a result or comparison warning: a dataclass with ``descriptors``

# The members of a description that can be asked for by name (the others, size, conventions,
# warnings and resampling, say what the answer is and are always there).
MEMBERS = (
    "moments", "quantiles", "modes", "shape_estimators", "tail_contributions", "grouping", "normality", "exceedances",
    "tail_means",
)
FAMILIES = tuple(dict.fromkeys(facts.family for facts in DESCRIPTORS))
# Every name options.descriptors accepts, in the order the schema lists them.
CHOICES = SCALAR_DESCRIPTORS + MEMBERS + FAMILIES

# A shown descriptor -> the descriptors its value is computed from.
_COMPUTED_FROM: dict[str, tuple[str, ...]] = {
    "median_absolute_deviation_normal": ("median_absolute_deviation",),
    "median_absolute_deviation": ("median",),
    "medcouple": ("median",),
    "mean_median_gap": ("mean", "standard_deviation", "median"),
    "coefficient_of_variation": ("mean", "standard_deviation"),
    "standard_deviation": ("variance",),
    "range": ("minimum", "maximum"),
}
# What needs the sorted values (or the support of weighted data): order statistics, extremes,
# and every descriptor computed from the observed values except the serial one.
_SORTED = frozenset(
    facts.name for facts in DESCRIPTORS if facts.needs & {"quantiles", "extremes", "values"} and "order" not in facts.needs
) | {"quantiles", "modes", "exceedances", "tail_means"}


@dataclass(frozen=True)
class Selection:
    """What an answer shows and what is computed for it (``computed`` includes ``shown``)."""

    shown: frozenset[str]
    computed: frozenset[str]

    def shows(self, name: str) -> bool:
        """Whether ``name`` (a descriptor, a member, or a warning's ``quantiles[i]``) is in the answer."""
        return name.split("[", 1)[0] in self.shown

    def computes(self, name: str) -> bool:
        return name in self.computed

    def computes_any(self, names: Iterable[str]) -> bool:
        return any(name in self.computed for name in names)

    @property
    def needs_sort(self) -> bool:
        """Whether anything computed needs the sorted values (or the support)."""
        return not self.computed.isdisjoint(_SORTED)

    def also(self, extra: Iterable[str]) -> Selection:
        """The same answer, with ``extra`` (descriptor names) computed for the caller's own use."""
        return dataclasses.replace(self, computed=_closure(self.computed | frozenset(extra)))

    @property
    def absent(self) -> tuple[str, ...]:
        """What the answer leaves out: descriptors in registry order, then members in response order."""
        return tuple(name for name in SCALAR_DESCRIPTORS + MEMBERS if name not in self.shown)


# Comparison members that follow a shown member (``quantile_shifts[2]`` follows ``quantiles``).
_FOLLOWS = {"quantile_shifts": "quantiles", "standardized_quantiles": "quantiles"}


def _concerns_shown(name: str, selection: Selection) -> bool:
    """Whether a warning's ``name`` is shown: a descriptor or member (``quantiles[3]``), a contrast of
    one (``differences.mean``), or anything else (always shown)."""
    base = name.split("[", 1)[0]
    if base.startswith(("differences.", "ratios.")):
        base = base.split(".", 1)[1]
    base = _FOLLOWS.get(base, base)
    return base not in EVERYTHING.shown or base in selection.shown


def shown_warnings(warnings: list[Warned], selection: Selection) -> list[Warned]:
    """The warnings an answer restricted to ``selection`` keeps: each names only what is shown,
    and one that named only what is not shown goes (a warning naming nothing stays)."""
    kept: list[Warned] = []
    for warning in warnings:
        if not warning.descriptors:
            kept.append(warning)
            continue
        named = [name for name in warning.descriptors if _concerns_shown(name, selection)]
        if named:
            kept.append(warning if len(named) == len(warning.descriptors) else dataclasses.replace(warning, descriptors=named))
    return kept


class UnknownName(ValueError):
    """A name that is neither a descriptor, a member nor a family (the edge's schema lists the choices)."""


def _closure(chosen: frozenset[str]) -> frozenset[str]:
    found = set(chosen)
    pending = list(chosen)
    while pending:
        for needed in _COMPUTED_FROM.get(pending.pop(), ()):
            if needed not in found:
                found.add(needed)
                pending.append(needed)
    return frozenset(found)


def choose(requested: Iterable[str] | None, *, also: Iterable[str] = ()) -> Selection | None:
    """The selection for the names a caller sent (``None``: everything, and so ``None``).

    Families stand for their descriptors; ``also`` adds descriptors computed for the caller's
    own use (not shown). Raises :class:`UnknownName` for a name that is none of :data:`CHOICES`.
    """
    if requested is None:
        return None
    shown: set[str] = set()
    for name in requested:
        if name in FAMILIES:
            shown.update(names(name))  # type: ignore[arg-type]
        elif name in SCALAR_DESCRIPTORS or name in MEMBERS:
            shown.add(name)
        else:
            raise UnknownName(f"{name!r} is not a descriptor, member or family; choose from {', '.join(CHOICES)}")
    frozen = frozenset(shown)
    return Selection(shown=frozen, computed=_closure(frozen | frozenset(also)))


EVERYTHING = Selection(shown=frozenset(SCALAR_DESCRIPTORS + MEMBERS), computed=frozenset(SCALAR_DESCRIPTORS + MEMBERS))
