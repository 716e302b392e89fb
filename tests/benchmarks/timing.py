"""Timing helpers of the benchmarks: alternating loops, ratios taken within one round, and the
figures every section records for the closing summary (and ``--json``).

Every comparison runs its sides in turn inside one loop (a, b, c, a, b, c, ...), so a burst of
load from the machine's other users falls on all sides alike; a ratio is the median over rounds
of the ratio within a round, printed beside the best time of each side.
"""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from dataclasses import dataclass, field

NA = "n/a (not in this tree)"


@dataclass
class Figure:
    """One line of the summary: which row of the issue's table, what was measured, its target."""

    row: str
    figure: str
    value: float | None  # None: not measurable on this tree
    unit: str
    target: str
    note: str = ""

    def text(self) -> str:
        if self.value is None:
            return self.note or NA
        if self.unit == "x":
            shown = f"{self.value:.2f}x"
        elif self.unit == "ms":
            shown = f"{self.value:.1f} ms"
        elif self.unit == "s":
            shown = f"{self.value:.2f} s"
        elif self.unit == "MB":
            shown = f"{self.value:.0f} MB"
        elif self.unit == "%":
            shown = f"{self.value:.0f} %"
        elif self.unit == "req/s":
            shown = f"{self.value:.0f} req/s"
        else:
            shown = f"{self.value:g} {self.unit}".strip()
        return f"{shown} ({self.note})" if self.note else shown


FIGURES: list[Figure] = []


def record(row: str, figure: str, value: float | None, unit: str, target: str = "", note: str = "") -> None:
    FIGURES.append(Figure(row, figure, value, unit, target, note))


def best_of(fn: Callable[[], object], repeats: int = 7) -> float:
    """Smallest wall time of ``repeats`` calls: the least disturbed by other load."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


@dataclass
class Alternation:
    """Wall times of each side, round by round (a side that failed on its first call has none)."""

    times: dict[str, list[float]] = field(default_factory=dict)
    failed: dict[str, str] = field(default_factory=dict)

    def best(self, name: str) -> float | None:
        return min(self.times[name]) if self.times.get(name) else None

    def ratio(self, name: str, reference: str) -> float | None:
        """Median over rounds of (time of ``name`` / time of ``reference`` in the same round)."""
        a, b = self.times.get(name), self.times.get(reference)
        if not a or not b:
            return None
        return statistics.median(x / y for x, y in zip(a, b))

    def show(self, name: str, reference: str | None = None, label: str | None = None, target: str = "") -> str:
        """One printed line: best time, and the within-round ratio to ``reference``."""
        label = label or name
        if name in self.failed:
            return f"  {label:<44} {self.failed[name]}"
        best = self.best(name)
        line = f"  {label:<44} best {best * 1e3:10.1f} ms"
        if reference is not None and reference != name:
            ratio = self.ratio(name, reference)
            line += f"   {ratio:6.2f}x {reference}" if ratio is not None else f"   (no {reference})"
        if target:
            line += f"   (target {target})"
        return line


def alternate(sides: dict[str, Callable[[], object] | str], rounds: int) -> Alternation:
    """Call every side once per round, in order, ``rounds`` times.

    A side given as a string is not runnable on this tree (the string says why). A side that
    raises on its first call is dropped with the error as its reason; a later failure raises.
    """
    result = Alternation()
    live: dict[str, Callable[[], object]] = {}
    for name, fn in sides.items():
        if isinstance(fn, str):
            result.failed[name] = fn
        else:
            live[name] = fn
            result.times[name] = []
    for round_number in range(rounds):
        for name, fn in list(live.items()):
            start = time.perf_counter()
            try:
                fn()
            except Exception as error:
                if round_number:
                    raise
                result.failed[name] = f"n/a ({type(error).__name__}: {str(error)[:120]})"
                del live[name]
                result.times.pop(name)
                continue
            result.times[name].append(time.perf_counter() - start)
    return result


def traced_peak(fn: Callable[[], object]) -> tuple[float, object]:
    """Peak MB traced by tracemalloc over one call (numpy's buffers are traced; the call is slower),
    and the call's result."""
    import tracemalloc

    tracemalloc.start()
    try:
        result = fn()
        return tracemalloc.get_traced_memory()[1] / 2**20, result
    finally:
        tracemalloc.stop()
