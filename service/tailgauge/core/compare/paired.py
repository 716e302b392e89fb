"""Bootstrap intervals of contrasts from the two inputs' own resamples.

Each input is resampled on its own (Efron & Tibshirani 1993, ch. 8: independent samples are
resampled independently); replicate k of a contrast is the contrast of the k-th resample of
each input, e.g. ``stat(second*_k) - stat(first*_k)``. BCa uses one jackknife per input, an
observation of that input left out and the other whole (the multi-sample acceleration,
:func:`tailgauge.core.resample.acceleration`). When an input is resampled by the bag of little
bootstraps (Kleiner et al. 2014), its rounds are paired with rounds cut from the other input's
replicates, and the per-round percentile or basic intervals are averaged.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping

import numpy as np

from tailgauge.core import resample
from tailgauge.core.resample import BootstrapResult, Interval, IntervalOptions, Replicates

# One input's statistics keyed as the resampling engine keys them ("mean", "quantile:0", ...):
# point values, or arrays of replicates.
Stats = Mapping[str, "float | np.ndarray | None"]
# A contrast of two inputs' statistics, elementwise on replicates.
Contrast = Callable[[Stats, Stats], "float | np.ndarray"]


class Resampled:
    """The two inputs' replicates, paired for contrasts, and their jackknives for BCa."""

    def __init__(
        self, first: Replicates, second: Replicates, estimates: tuple[Stats, Stats], options: IntervalOptions
    ) -> None:
        self.options = options
        self.estimates = estimates
        self.subsets = first.subsets or second.subsets
        # A statistic left out for either input leaves its contrasts without an interval, for that reason.
        self.left_out = {**first.left_out, **second.left_out}
        self.rounds = paired_rounds(first, second)
        self.jackknives = None
        if not self.subsets and first.jackknife is not None and second.jackknife is not None:
            self.jackknives = (
                first.jackknife, first.jackknife_weights, second.jackknife, second.jackknife_weights
            )

    def interval(self, contrast: Contrast, estimate: float) -> BootstrapResult:
        """The bootstrap interval of ``contrast`` (whose value on the data is ``estimate``)."""
        try:
            with np.errstate(all="ignore"):
                if not self.subsets:
                    replicates = np.asarray(contrast(*self.rounds[0]), dtype=np.float64)
                    jackknives = None
                    if self.jackknives is not None:
                        jack_first, weights_first, jack_second, weights_second = self.jackknives
                        first, second = self.estimates
                        # One jackknife per input: an observation of that input left out, the other whole.
                        jackknives = [
                            (np.asarray(contrast(jack_first, second), dtype=np.float64), weights_first),
                            (np.asarray(contrast(first, jack_second), dtype=np.float64), weights_second),
                        ]
                    return resample.interval_from_replicates(estimate, replicates, jackknives, self.options)
                return self._little_bootstraps(contrast, estimate)
        except KeyError:
            return BootstrapResult(None, None, "a statistic it needs was not resampled for one of the inputs")

    def _little_bootstraps(self, contrast: Contrast, estimate: float) -> BootstrapResult:
        """Percentile or basic interval per paired round, averaged (Kleiner et al. 2014)."""
        method = "basic" if self.options.method == "basic" else "percentile"
        per_round = dataclasses.replace(self.options, method=method)
        results = [
            resample.interval_from_replicates(
                estimate, np.asarray(contrast(a, b), dtype=np.float64), None, per_round
            )
            for a, b in self.rounds
        ]
        if any(r.interval is None or r.interval.low is None or r.interval.high is None for r in results):
            return BootstrapResult(None, None, "some resamples leave this descriptor undefined")
        interval = Interval(
            float(np.mean([r.interval.low for r in results])),
            float(np.mean([r.interval.high for r in results])),
            self.options.level,
            method,
        )
        errors = [r.standard_error for r in results if r.standard_error is not None]
        reason = None
        if self.options.method == "bca":
            reason = "BCa is not defined for the bag of little bootstraps"
        return BootstrapResult(interval, float(np.mean(errors)) if errors else None, reason)


def paired_rounds(first: Replicates, second: Replicates) -> list[tuple[dict, dict]]:
    """Rounds of replicates of both inputs, drawn independently and paired index by index.

    Ordinary bootstraps give one round of B each. When either input is resampled by the bag of
    little bootstraps (one round per subset), the other input's B replicates are split into as
    many rounds, and each pair of rounds is cut to the shorter.
    """

    def rounds_of(replicates: Replicates, count: int) -> list[dict]:
        if replicates.subsets:
            return [{name: values[r] for name, values in replicates.values.items()} for r in range(count)]
        pieces = {name: np.array_split(values[0], count) for name, values in replicates.values.items()}
        return [{name: pieces[name][r] for name in pieces} for r in range(count)]

    if not first.subsets and not second.subsets:
        return [(rounds_of(first, 1)[0], rounds_of(second, 1)[0])]
    count = next(r.values["mean"].shape[0] for r in (first, second) if r.subsets)
    paired = []
    for a, b in zip(rounds_of(first, count), rounds_of(second, count)):
        length = min(next(iter(a.values())).size, next(iter(b.values())).size)
        paired.append(({n: v[:length] for n, v in a.items()}, {n: v[:length] for n, v in b.items()}))
    return paired
