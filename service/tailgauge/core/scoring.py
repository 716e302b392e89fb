"""Scores of new observations against one description: z and robust z.

Scoring compares nothing: it reads four values of one :class:`~tailgauge.core.describe.Description`
(mean, standard deviation, median and normal-consistent MAD) and places each point on their
scales. :func:`standardized` is the one rule of a standard score, also used for the
comparison's standardized quantiles (:mod:`tailgauge.core.compare.contrasts`).

Like ``describe``, nothing here returns NaN: an undefined score is ``None`` with a warning
saying why.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tailgauge.core.describe import Description, ResultWarning
from tailgauge.core.describe.warnings import Warnings
from tailgauge.core.registry import WarningCode

# What scoring reads of a description (computed even where options.descriptors does not show them).
READ_BY_SCORES = ("mean", "standard_deviation", "median", "median_absolute_deviation_normal")
# The registry's warning codes that scoring emits.
SCORE_WARNINGS: frozenset[WarningCode] = frozenset({WarningCode.SCORE_UNDEFINED, WarningCode.NOT_REPRESENTABLE})


@dataclass(frozen=True)
class Score:
    value: float
    z: float | None
    robust_z: float | None


@dataclass(frozen=True)
class Scores:
    """Values scored against one description.

    ``z = (x - mean) / standard_deviation`` with the description's own standard deviation
    (its convention: sample unless asked otherwise, population for a probability table);
    ``robust_z = (x - median) / median_absolute_deviation_normal``. The reference values used
    are repeated here so a caller can check them; ``warnings`` say why a score is ``None``.
    """

    mean: float | None
    standard_deviation: float | None
    median: float | None
    median_absolute_deviation_normal: float | None
    points: list[Score]
    warnings: list[ResultWarning]


def standardized(x, centre, scale):
    """(x - centre) / scale, in halves so values near float64's limit do not overflow first.

    Elementwise on arrays (replicates of a bootstrap); non-finite results are left for the
    caller to report (no floating-point warning is raised here).
    """
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return (0.5 * x - 0.5 * centre) / (0.5 * scale)


def standardize(description: Description, points: Sequence[float]) -> Scores:
    """Score ``points`` against ``description``: z and robust z for each.

    Degenerate references are a documented outcome: a standard deviation (or normal-consistent
    MAD) that is zero or undefined leaves every z (or robust z) ``None`` with a
    ``score_undefined`` warning; a score beyond float64's range is ``None`` with
    ``not_representable``.
    """
    notes = Warnings(SCORE_WARNINGS)
    descriptors = description.descriptors
    mean, sd = descriptors["mean"].value, descriptors["standard_deviation"].value
    median, mad = descriptors["median"].value, descriptors["median_absolute_deviation_normal"].value

    def usable(centre, scale, member: str, centre_name: str, scale_name: str) -> bool:
        if centre is None or scale is None:
            why = f"the reference leaves its {centre_name} or {scale_name} undefined (see its warnings)"
        elif scale == 0.0:
            why = f"the reference's {scale_name} is zero, so no value can be scaled by it"
        else:
            return True
        notes.add(WarningCode.SCORE_UNDEFINED, f"{member} cannot be computed: {why}", [member])
        return False

    z_ok = usable(mean, sd, "scores.z", "mean", "standard deviation")
    robust_ok = usable(median, mad, "scores.robust_z", "median", "normal-consistent MAD")
    scored, overflowed = [], []
    for i, x in enumerate(points):
        z = robust = None
        if z_ok:
            z = float(standardized(np.float64(x), mean, sd))
        if robust_ok:
            robust = float(standardized(np.float64(x), median, mad))
        if (z is not None and not math.isfinite(z)) or (robust is not None and not math.isfinite(robust)):
            overflowed.append(f"scores.points[{i}]")
            z = z if z is not None and math.isfinite(z) else None
            robust = robust if robust is not None and math.isfinite(robust) else None
        scored.append(Score(float(x), z, robust))
    if overflowed:
        notes.add(WarningCode.NOT_REPRESENTABLE, "a score is outside the range of float64", overflowed)
    return Scores(mean, sd, median, mad, scored, notes.items)


__all__ = ["SCORE_WARNINGS", "Score", "Scores", "standardize", "standardized"]
