"""Two distributions side by side, and scores of new observations against a described one.

:func:`compare` describes both inputs by the same options and contrasts them: differences
(second minus first) of every scalar descriptor, ratios of the scale descriptors, the
standardized mean difference (Cohen's d and Hedges' g), quantile shifts, both sets of quantiles
on the z scale, a two-sample test, and bootstrap intervals for every contrast from independent
resampling of the two inputs. :func:`standardize` turns values into z-scores, classical and
robust, relative to one description.

Like ``describe``, nothing here returns NaN: an undefined contrast is ``None`` with a warning
saying why.

References
----------
L. V. Hedges and I. Olkin, *Statistical Methods for Meta-Analysis*, Academic Press, 1985, ch. 5
(the standardized mean difference and its exact small-sample correction).
M. Borenstein, L. V. Hedges, J. P. T. Higgins and H. R. Rothstein, *Introduction to
Meta-Analysis*, Wiley, 2009, ch. 4 (the variance of d and of g = J d).
B. Efron and R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall, 1993:
ch. 2 and 8 (two-sample bootstrap: each sample resampled on its own), ch. 14 (BCa).
B. L. Welch, Biometrika 34, 1947 (the t interval for a difference of means with unequal variances).
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special, stats

from tailgauge.core import cost, resample
from tailgauge.core.classical import ClassicalInterval
from tailgauge.core.describe import SCALAR_DESCRIPTORS, Description, DescribeOptions, Note, Resampling, admit, describe
from tailgauge.core.errors import DescriptorError, LimitExceeded, Location
from tailgauge.core.resample import BootstrapResult, IntervalOptions, Interval, Replicates
from tailgauge.core.weighted import WeightedData, WeightMeaning

# Descriptors measuring spread in the data's own units: their ratio second / first is reported too.
SCALE_DESCRIPTORS = (
    "variance",
    "standard_deviation",
    "range",
    "interquartile_range",
    "median_absolute_deviation",
    "median_absolute_deviation_normal",
    "l_scale",
)
# scipy's ks_2samp uses the exact null distribution up to this many observations per sample
# (its method="auto"); beyond it, Smirnov's asymptotic distribution, as scipy does.
KS_EXACT_LIMIT = 10_000
# Cochran's rule of thumb for the chi-square approximation: expected counts of at least 5.
SMALL_EXPECTED_COUNT = 5.0

# Why some contrasts get no bootstrap interval (the rules ``describe`` applies to descriptors).
_EXTREMES = "the bootstrap is inconsistent for sample extremes (Bickel & Freedman 1981)"
_NOT_RESAMPLED = {
    "minimum": _EXTREMES,
    "maximum": _EXTREMES,
    "range": _EXTREMES,
    "lag1_autocorrelation": "resampling independent observations destroys the serial order it measures",
}
_NO_RULE = "the resampling engine does not resample this descriptor (describe gives it no interval either)"


@dataclass(frozen=True)
class Difference:
    """One contrast of the two inputs (a difference, second minus first, or a ratio, second / first).

    ``interval`` and ``standard_error`` come from independent resampling of both inputs;
    ``classical_interval`` and ``classical_standard_error`` are Welch's t interval and its
    standard error sqrt(s1^2/n1 + s2^2/n2), given for the difference of means only.
    """

    value: float | None
    interval: Interval | None = None
    standard_error: float | None = None
    classical_interval: ClassicalInterval | None = None
    classical_standard_error: float | None = None


@dataclass(frozen=True)
class QuantileShift:
    """q2(p) - q1(p), each quantile by the rule its description names."""

    probability: float
    value: float | None
    interval: Interval | None = None
    standard_error: float | None = None


@dataclass(frozen=True)
class StandardizedPair:
    """One quantile of each input on a standardized scale, and second minus first."""

    first: float | None
    second: float | None
    difference: float | None
    interval: Interval | None = None


@dataclass(frozen=True)
class StandardizedQuantile:
    """Quantiles at ``probability`` free of location and scale.

    ``z``: (q(p) - mean) / standard deviation of each input; ``robust_z``:
    (q(p) - median) / normal-consistent MAD. Equal shapes give equal values whatever the
    location and scale; the differences show where the shapes part.
    """

    probability: float
    z: StandardizedPair
    robust_z: StandardizedPair


@dataclass(frozen=True)
class StandardizedMeanDifference:
    """Hedges' g (``value``) and Cohen's d (``uncorrected``), second minus first over the pooled sd.

    ``standard_error_under_normality`` is the large-sample normal-theory standard error of g;
    ``interval`` and ``standard_error`` come from independent resampling of the two inputs.
    """

    value: float | None
    uncorrected: float | None
    correction_factor: float | None
    pooled_standard_deviation: float | None
    degrees_of_freedom: float | None
    first_n: float | None
    second_n: float | None
    standard_error_under_normality: float | None
    estimator: str
    interval: Interval | None = None
    standard_error: float | None = None


@dataclass(frozen=True)
class DistributionTest:
    """A two-sample test of equal distributions: its statistic and p-value, or why there is none."""

    test: str
    statistic: float | None
    p_value: float | None
    method: str | None
    degrees_of_freedom: int | None
    reference: str
    reason: str | None


@dataclass(frozen=True)
class ComparisonNote:
    """A warning of the comparison: ``side`` is "first" or "second" for a warning of that input's
    description (``descriptors`` name its members), or "comparison" for the contrasts' own
    (``descriptors`` name comparison members, e.g. "differences.mean", "quantile_shifts[2]")."""

    side: str
    code: str
    message: str
    descriptors: list[str]


@dataclass(frozen=True)
class Comparison:
    """Everything :func:`compare` returns; every contrast is second against first.

    ``differences`` has every name of ``SCALAR_DESCRIPTORS`` and ``ratios`` every name of
    ``SCALE_DESCRIPTORS`` (values ``None`` where undefined); ``quantile_shifts`` and
    ``standardized_quantiles`` follow the requested probabilities; ``resampling`` echoes the
    interval request (``None`` without one) while each input's own ``resampling`` names the
    seed spawned for it. ``warnings`` holds both inputs' warnings and the comparison's own.
    """

    first: Description
    second: Description
    differences: dict[str, Difference]
    ratios: dict[str, Difference]
    standardized_mean_difference: StandardizedMeanDifference
    quantile_shifts: list[QuantileShift]
    standardized_quantiles: list[StandardizedQuantile]
    distribution_test: DistributionTest
    warnings: list[ComparisonNote]
    resampling: Resampling | None


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
    warnings: list[Note]


class _Notes:
    """Warnings raised here (every ``add`` names its code as a literal, for the catalog check)."""

    def __init__(self) -> None:
        self.items: list[Note] = []

    def add(self, code: str, message: str, descriptors: Sequence[str] = ()) -> None:
        self.items.append(Note(code, message, list(descriptors)))

    def of_comparison(self) -> list[ComparisonNote]:
        return [ComparisonNote("comparison", n.code, n.message, n.descriptors) for n in self.items]


Stats = Mapping[str, "float | np.ndarray | None"]
Contrast = Callable[[Stats, Stats], "float | np.ndarray"]


# ----------------------------------------------------------------------------------------------
# Standardization
# ----------------------------------------------------------------------------------------------


def _standardized(x, centre, scale):
    """(x - centre) / scale, in halves so values near float64's limit do not overflow first."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        return (0.5 * x - 0.5 * centre) / (0.5 * scale)


def standardize(description: Description, points: Sequence[float]) -> Scores:
    """Score ``points`` against ``description``: z and robust z for each.

    Degenerate references are a documented outcome: a standard deviation (or normal-consistent
    MAD) that is zero or undefined leaves every z (or robust z) ``None`` with a
    ``score_undefined`` warning; a score beyond float64's range is ``None`` with
    ``not_representable``.
    """
    notes = _Notes()
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
        notes.add("score_undefined", f"{member} cannot be computed: {why}", [member])
        return False

    z_ok = usable(mean, sd, "scores.z", "mean", "standard deviation")
    robust_ok = usable(median, mad, "scores.robust_z", "median", "normal-consistent MAD")
    scored, overflowed = [], []
    for i, x in enumerate(points):
        z = robust = None
        if z_ok:
            z = float(_standardized(np.float64(x), mean, sd))
        if robust_ok:
            robust = float(_standardized(np.float64(x), median, mad))
        if (z is not None and not math.isfinite(z)) or (robust is not None and not math.isfinite(robust)):
            overflowed.append(f"scores.points[{i}]")
            z = z if z is not None and math.isfinite(z) else None
            robust = robust if robust is not None and math.isfinite(robust) else None
        scored.append(Score(float(x), z, robust))
    if overflowed:
        notes.add("not_representable", "a score is outside the range of float64", overflowed)
    return Scores(mean, sd, median, mad, scored, notes.items)


# ----------------------------------------------------------------------------------------------
# Comparison
# ----------------------------------------------------------------------------------------------


def side_seeds(seed: int) -> tuple[int, int]:
    """The seeds of the two inputs' resamples: two children spawned from ``seed``
    (``numpy.random.SeedSequence.spawn``), each reduced to 53 bits so it survives JSON.

    Each input is then described with its own seed, so ``first.resampling.seed`` reproduces
    that input's intervals on the descriptor endpoints, and the same comparison seed gives the
    same comparison bit for bit.
    """
    children = np.random.SeedSequence(seed).spawn(2)
    first, second = (int(child.generate_state(1, np.uint64)[0] >> np.uint64(11)) for child in children)
    return first, second


def _check_budget(first: WeightedData, second: WeightedData, options: DescribeOptions) -> None:
    """Both inputs' resamples count against one budget, checked before any is drawn."""
    interval = options.interval
    assert interval is not None
    (work_first, per_first), (work_second, per_second) = (
        _for_side(side, resample.resampling_work, data, interval.resamples, options.subset_rows)
        for data, side in ((first, "first"), (second, "second"))
    )
    work = work_first + work_second
    if work > options.max_resample_work:
        allowed = int(options.max_resample_work // (per_first + per_second))
        if any(cost.shape_of(data, options.subset_rows).subset_rows for data in (first, second)):
            allowed -= allowed % resample.SUBSETS  # little bootstraps round resamples up to a multiple
        raise LimitExceeded(
            detail=(
                f"resampling both inputs touches {work:.3g} rows ({work_first:.3g} + {work_second:.3g}), "
                f"beyond this server's resampling budget of {options.max_resample_work:.3g}; lower "
                f"options.interval.resamples to at most {allowed}"
            ),
            locations=[Location("options.interval.resamples", f"at most {allowed} for these inputs")],
        )


def _for_side(side: str, function, *args, **kwargs):
    """``function(*args, **kwargs)``, with any core error's detail saying which input it concerns."""
    try:
        return function(*args, **kwargs)
    except DescriptorError as error:
        raise type(error)(detail=f"{side} input: {error.detail}", locations=error.locations) from None


def _estimates(description: Description) -> dict[str, float | None]:
    """Point values keyed as the resampling engine keys its statistics."""
    out: dict[str, float | None] = {name: d.value for name, d in description.descriptors.items()}
    for i, quantile in enumerate(description.quantiles):
        out[f"quantile:{i}"] = quantile.value
    return out


def _finite(value) -> float | None:
    value = float(value)
    return value if math.isfinite(value) else None


class _Resampled:
    """The two inputs' replicates, paired for contrasts, and their jackknives for BCa."""

    def __init__(
        self, first: Replicates, second: Replicates, estimates: tuple[Stats, Stats], options: IntervalOptions
    ) -> None:
        self.options = options
        self.estimates = estimates
        self.subsets = first.subsets or second.subsets
        self.rounds = _paired_rounds(first, second)
        self.jackknives = None
        if not self.subsets and first.jackknife is not None and second.jackknife is not None:
            self.jackknives = (
                first.jackknife, first.jackknife_weights, second.jackknife, second.jackknife_weights
            )

    def interval(self, contrast: Contrast, estimate: float) -> BootstrapResult:
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


def _paired_rounds(first: Replicates, second: Replicates) -> list[tuple[dict, dict]]:
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


def _difference_of(name: str) -> Contrast:
    return lambda a, b: b[name] - a[name]


def _ratio_of(name: str) -> Contrast:
    return lambda a, b: b[name] / a[name]


def _standardized_gap(quantile: str, centre: str, scale: str) -> Contrast:
    def gap(a: Stats, b: Stats):
        second = _standardized(b[quantile], b[centre], b[scale])
        return second - _standardized(a[quantile], a[centre], a[scale])

    return gap


class _IntervalNotes:
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

    def emit(self, notes: _Notes) -> None:
        for reason, members in self.fallbacks.items():
            notes.add(
                "bca_fallback",
                f"BCa could not be computed ({reason}); the percentile interval is given",
                members,
            )
        for reason, members in self.undefined.items():
            notes.add("interval_undefined", f"no bootstrap interval: {reason}", members)
        for reason, members in self.not_offered.items():
            notes.add("interval_not_offered", f"no bootstrap interval: {reason}", members)


def compare(
    first: WeightedData, second: WeightedData, options: DescribeOptions, *, kinds: tuple[str, str]
) -> Comparison:
    """Describe both inputs by ``options`` and contrast them, second against first.

    With ``options.interval`` each input is resampled on its own (independent bootstraps, as
    for two samples in Efron & Tibshirani 1993, ch. 8), with seeds spawned from the one seed
    (:func:`side_seeds`); replicate k of a contrast is the contrast of the k-th resample of each
    input, e.g. ``stat(second*_k) - stat(first*_k)``, so the inputs' own intervals and those of
    their contrasts come from the same resamples. Percentile and basic intervals follow
    directly; BCa uses the two-sample acceleration from both inputs' jackknives
    (:func:`tailgauge.core.resample.acceleration`), and falls back to percentile, with a warning,
    where it cannot be computed or an input is resampled by the bag of little bootstraps. The
    compute budget ``options.max_resample_work`` covers both inputs together.

    Degenerate input is a documented outcome, never NaN: a contrast is ``None`` with a warning
    when either input leaves a descriptor undefined (``difference_undefined``), when a ratio's
    first value is zero (``ratio_undefined``), when the standardized mean difference has no
    sample sizes or no spread (``effect_size_undefined``) or when a result overflows float64
    (``not_representable``); the two-sample test is ``None`` with its ``reason`` where it does
    not apply.
    """
    interval = options.interval
    if not options.admitted:
        admit([first, second], options)
    options = dataclasses.replace(options, admitted=True)
    side_options = (options, options)
    if interval is not None:
        _check_budget(first, second, options)
        side_options = tuple(
            dataclasses.replace(options, interval=dataclasses.replace(interval, seed=seed))
            for seed in side_seeds(interval.seed)
        )
    described = (
        _for_side("first", describe, first, side_options[0], kind=kinds[0]),
        _for_side("second", describe, second, side_options[1], kind=kinds[1]),
    )
    estimates = (_estimates(described[0]), _estimates(described[1]))
    notes = _Notes()
    pending = _IntervalNotes()
    resampled = None
    if interval is not None:
        replicates = [d.resampling.replicates if d.resampling is not None else None for d in described]
        assert replicates[0] is not None and replicates[1] is not None
        resampled = _Resampled(replicates[0], replicates[1], estimates, interval)

    differences = _differences(estimates, resampled, notes, pending)
    ratios = _ratios(estimates, resampled, notes, pending)
    _welch(differences, described, (first, second), interval)
    shifts = _quantile_shifts(described, resampled, notes, pending)
    standardized = _standardized_quantiles(described, estimates, resampled, notes, pending)
    effect = _standardized_mean_difference(described, estimates, resampled, notes, pending)
    test = _distribution_test(first, second, notes)
    _note_conventions(described, notes)
    pending.emit(notes)

    inherited = [
        ComparisonNote(side, note.code, note.message, list(note.descriptors))
        for side, description in zip(("first", "second"), described)
        for note in description.warnings
    ]
    resampling = None
    if interval is not None:
        schemes = [d.resampling.scheme for d in described if d.resampling is not None]
        resampling = Resampling(
            method=interval.method,
            level=interval.level,
            resamples=interval.resamples,
            seed=interval.seed,
            scheme=f"each input resampled independently (first: {schemes[0]}; second: {schemes[1]})",
        )
    return Comparison(
        first=described[0],
        second=described[1],
        differences=differences,
        ratios=ratios,
        standardized_mean_difference=effect,
        quantile_shifts=shifts,
        standardized_quantiles=standardized,
        distribution_test=test,
        warnings=inherited + notes.of_comparison(),
        resampling=resampling,
    )


def _undefined_by_side(missing: dict[str, list[str]], what: str, notes: _Notes) -> None:
    """One ``difference_undefined`` warning per cause (first, second or both inputs)."""
    for cause, members in missing.items():
        if members:
            notes.add(
                "difference_undefined",
                f"these {what} are undefined because {cause} leaves the descriptor undefined "
                "(see its warnings)",
                members,
            )


def _side_of(a, b) -> str:
    if a is None and b is None:
        return "each input"
    return "the first input" if a is None else "the second input"


def _differences(
    estimates: tuple[Stats, Stats], resampled: _Resampled | None, notes: _Notes, pending: _IntervalNotes
) -> dict[str, Difference]:
    first, second = estimates
    out: dict[str, Difference] = {}
    missing: dict[str, list[str]] = {}
    overflowed = []
    for name in SCALAR_DESCRIPTORS:
        a, b = first[name], second[name]
        member = f"differences.{name}"
        if a is None or b is None:
            missing.setdefault(_side_of(a, b), []).append(member)
            out[name] = Difference(None)
            continue
        with np.errstate(over="ignore"):
            value = _finite(np.float64(b) - np.float64(a))
        if value is None:
            overflowed.append(member)
            out[name] = Difference(None)
            continue
        out[name] = _with_interval(
            Difference(value), _difference_of(name), value, name, member, resampled, pending
        )
    _undefined_by_side(missing, "differences", notes)
    if overflowed:
        notes.add("not_representable", "the difference is outside the range of float64", overflowed)
    return out


def _ratios(
    estimates: tuple[Stats, Stats], resampled: _Resampled | None, notes: _Notes, pending: _IntervalNotes
) -> dict[str, Difference]:
    first, second = estimates
    out: dict[str, Difference] = {}
    missing: dict[str, list[str]] = {}
    zero, overflowed = [], []
    for name in SCALE_DESCRIPTORS:
        a, b = first[name], second[name]
        member = f"ratios.{name}"
        if a is None or b is None:
            missing.setdefault(_side_of(a, b), []).append(member)
            out[name] = Difference(None)
            continue
        if a == 0.0:
            zero.append(member)
            out[name] = Difference(None)
            continue
        with np.errstate(over="ignore", under="ignore"):
            value = _finite(np.float64(b) / np.float64(a))
        if value is None:
            overflowed.append(member)
            out[name] = Difference(None)
            continue
        out[name] = _with_interval(
            Difference(value), _ratio_of(name), value, name, member, resampled, pending
        )
    _undefined_by_side(missing, "ratios", notes)
    if zero:
        notes.add(
            "ratio_undefined",
            "the first input's value is zero, so the ratio second / first is undefined",
            zero,
        )
    if overflowed:
        notes.add("not_representable", "the ratio is outside the range of float64", overflowed)
    return out


def _with_interval(
    result: Difference,
    contrast: Contrast,
    value: float,
    name: str,
    member: str,
    resampled: _Resampled | None,
    pending: _IntervalNotes,
) -> Difference:
    """``result`` with the bootstrap interval of ``contrast`` where the engine resamples ``name``."""
    if resampled is None:
        return result
    if name not in resample.INTERVAL_DESCRIPTORS:
        pending.skip(member, _NOT_RESAMPLED.get(name, _NO_RULE))
        return result
    bootstrapped = resampled.interval(contrast, value)
    pending.record(member, bootstrapped)
    return dataclasses.replace(
        result, interval=bootstrapped.interval, standard_error=bootstrapped.standard_error
    )


def _sample_size(description: Description) -> float | None:
    """n of the effect size and of Welch's interval: the count of observations (the total count for
    tables and bins), Kish's effective size for reliability weights, none for probabilities."""
    meaning = description.conventions.weights
    if meaning == WeightMeaning.PROBABILITY.value:
        return None
    if meaning == WeightMeaning.RELIABILITY.value:
        return description.size.effective_n
    return description.size.n


def _sample_sd(sd, n: float, population: bool):
    """The sample standard deviation (divisor n - 1) from a description's sd (either convention)."""
    return sd * math.sqrt(n / (n - 1.0)) if population else sd


def _welch(
    differences: dict[str, Difference],
    described: tuple[Description, Description],
    data: tuple[WeightedData, WeightedData],
    interval: IntervalOptions | None,
) -> None:
    """Welch's t interval for the difference of means, beside the bootstrap one (Welch 1947).

    se = sqrt(s1^2/n1 + s2^2/n2) with the sample variances; degrees of freedom by
    Welch-Satterthwaite. Only for counted observations (raw samples, count tables, bins), n >= 2
    each, and when intervals are asked for, as ``describe`` does for the t interval of a mean.
    """
    mean = differences["mean"]
    if interval is None or mean.value is None:
        return
    if not all(d.meaning in (WeightMeaning.UNIT, WeightMeaning.FREQUENCY) for d in data):
        return
    sizes = [_sample_size(d) for d in described]
    sds = [d.descriptors["standard_deviation"].value for d in described]
    if any(n is None or n < 2 for n in sizes) or any(sd is None for sd in sds):
        return
    errors = [
        _sample_sd(sd, n, d.conventions.convention == "population") / math.sqrt(n)
        for sd, n, d in zip(sds, sizes, described)
    ]
    largest = max(errors)
    if largest == 0.0 or not math.isfinite(largest):
        return
    r1, r2 = errors[0] / largest, errors[1] / largest
    se = largest * math.hypot(r1, r2)
    dof = (r1 * r1 + r2 * r2) ** 2 / (r1**4 / (sizes[0] - 1.0) + r2**4 / (sizes[1] - 1.0))
    half = float(stats.t.ppf(0.5 + interval.level / 2.0, dof)) * se
    low, high = _finite(mean.value - half), _finite(mean.value + half)
    if low is None or high is None or not math.isfinite(se):
        return
    differences["mean"] = dataclasses.replace(
        mean,
        classical_interval=ClassicalInterval(
            low, high, interval.level, "welch_t", None,
            "normal data, or samples large enough for each mean to be normal; variances may differ",
        ),
        classical_standard_error=se,
    )


def _quantile_shifts(
    described: tuple[Description, Description],
    resampled: _Resampled | None,
    notes: _Notes,
    pending: _IntervalNotes,
) -> list[QuantileShift]:
    out = []
    missing: dict[str, list[str]] = {}
    overflowed = []
    for i, (qa, qb) in enumerate(zip(described[0].quantiles, described[1].quantiles)):
        member = f"quantile_shifts[{i}]"
        if qa.value is None or qb.value is None:
            missing.setdefault(_side_of(qa.value, qb.value), []).append(member)
            out.append(QuantileShift(qa.probability, None))
            continue
        with np.errstate(over="ignore"):
            value = _finite(np.float64(qb.value) - np.float64(qa.value))
        if value is None:
            overflowed.append(member)
            out.append(QuantileShift(qa.probability, None))
            continue
        shift = QuantileShift(qa.probability, value)
        if resampled is not None:
            if qa.probability in (0.0, 1.0):
                pending.skip(member, _EXTREMES)
            else:
                result = resampled.interval(_difference_of(f"quantile:{i}"), value)
                pending.record(member, result)
                shift = dataclasses.replace(
                    shift, interval=result.interval, standard_error=result.standard_error
                )
        out.append(shift)
    _undefined_by_side(missing, "quantile shifts", notes)
    if overflowed:
        notes.add("not_representable", "the quantile shift is outside the range of float64", overflowed)
    return out


def _standardized_quantiles(
    described: tuple[Description, Description],
    estimates: tuple[Stats, Stats],
    resampled: _Resampled | None,
    notes: _Notes,
    pending: _IntervalNotes,
) -> list[StandardizedQuantile]:
    first, second = estimates
    undefined: dict[str, list[str]] = {}
    overflowed = []

    def pair(i: int, probability: float, centre: str, scale: str, member: str) -> StandardizedPair:
        quantile = f"quantile:{i}"
        values = []
        for side, stats_ in (("first", first), ("second", second)):
            q, c, s = stats_[quantile], stats_[centre], stats_[scale]
            if q is None or c is None or s is None:
                why = f"the {side} input leaves its quantile, {centre} or {scale} undefined"
                undefined.setdefault(why, []).append(f"{member}.{side}")
                values.append(None)
            elif s == 0.0:
                undefined.setdefault(f"the {side} input's {scale} is zero", []).append(f"{member}.{side}")
                values.append(None)
            else:
                z = _finite(_standardized(np.float64(q), c, s))
                if z is None:
                    overflowed.append(f"{member}.{side}")
                values.append(z)
        a, b = values
        if a is None or b is None:
            return StandardizedPair(a, b, None)
        difference = _finite(np.float64(b) - np.float64(a))
        if difference is None:
            overflowed.append(f"{member}.difference")
            return StandardizedPair(a, b, None)
        result = StandardizedPair(a, b, difference)
        if resampled is not None:
            if probability in (0.0, 1.0):
                pending.skip(f"{member}.interval", _EXTREMES)
            else:
                bootstrapped = resampled.interval(_standardized_gap(quantile, centre, scale), difference)
                pending.record(f"{member}.interval", bootstrapped)
                result = dataclasses.replace(result, interval=bootstrapped.interval)
        return result

    out = []
    for i, quantile in enumerate(described[0].quantiles):
        p, member = quantile.probability, f"standardized_quantiles[{i}]"
        out.append(
            StandardizedQuantile(
                p,
                pair(i, p, "mean", "standard_deviation", f"{member}.z"),
                pair(i, p, "median", "median_absolute_deviation_normal", f"{member}.robust_z"),
            )
        )
    for reason, members in undefined.items():
        notes.add("difference_undefined", f"standardized quantiles are undefined where {reason}", members)
    if overflowed:
        notes.add("not_representable", "a standardized quantile is outside the range of float64", overflowed)
    return out


def hedges_correction(m: float) -> float:
    """Hedges' exact small-sample factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m > 1.

    Hedges & Olkin (1985), ch. 5; close to the usual approximation 1 - 3/(4m - 1). The gamma
    ratio is Pochhammer's symbol (x)_(1/2) = Gamma(x + 1/2) / Gamma(x), x = (m - 1)/2, which
    stays accurate for large m (a difference of log-gammas loses the factor's closeness to 1).
    """
    if m > 1e8:
        # The approximation's error is O(m^-2): below float64's resolution here, where the
        # gamma ratio itself would overflow for m near float64's limit.
        return 1.0 - 3.0 / (4.0 * m - 1.0)
    return float(special.poch((m - 1.0) / 2.0, 0.5)) / math.sqrt(m / 2.0)


_EFFECT_ESTIMATOR = (
    "Hedges' g = J(m) (mean2 - mean1) / s_pooled, s_pooled^2 = ((n1 - 1) s1^2 + (n2 - 1) s2^2) / m, "
    "m = n1 + n2 - 2, J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)) (Hedges & Olkin 1985); "
    "uncorrected: Cohen's d = g / J(m)"
)


def _standardized_mean_difference(
    described: tuple[Description, Description],
    estimates: tuple[Stats, Stats],
    resampled: _Resampled | None,
    notes: _Notes,
    pending: _IntervalNotes,
) -> StandardizedMeanDifference:
    """Cohen's d and Hedges' g of second minus first.

    d = (mean2 - mean1) / s_pooled with the pooled sample variance
    s_pooled^2 = ((n1 - 1) s1^2 + (n2 - 1) s2^2) / (n1 + n2 - 2), s_i the sample standard
    deviations (divisor n_i - 1, whatever convention the descriptors use); g = J(m) d with
    Hedges' exact factor J(m) = Gamma(m/2) / (sqrt(m/2) Gamma((m-1)/2)), m = n1 + n2 - 2
    (Hedges & Olkin 1985, ch. 5, who call the uncorrected ratio g and the corrected one d; here
    the names follow the now usual Cohen's d and Hedges' g). J(m) is close to the usual
    approximation 1 - 3/(4m - 1). n is the count of observations for raw samples, the total
    count for tables and bins, Kish's effective size for reliability weights; probabilities
    have no sample size, so nothing is defined for them.

    ``standard_error_under_normality`` is J sqrt((n1 + n2)/(n1 n2) + d^2 / (2 (n1 + n2)))
    (the large-sample variance of d, Hedges & Olkin 1985, ch. 5; Var(g) = J^2 Var(d),
    Borenstein et al. 2009, ch. 4). The bootstrap interval resamples both inputs with n1, n2
    and J fixed at the data's values.
    """
    n1, n2 = (_sample_size(description) for description in described)

    def undefined(why: str) -> StandardizedMeanDifference:
        notes.add("effect_size_undefined", f"the standardized mean difference is undefined: {why}",
                  ["standardized_mean_difference"])
        m = None if n1 is None or n2 is None else n1 + n2 - 2.0
        return StandardizedMeanDifference(None, None, None, None, m, n1, n2, None, _EFFECT_ESTIMATOR)

    if n1 is None or n2 is None:
        return undefined("a probability table is a population and has no sample size for the pooled variance")
    m = n1 + n2 - 2.0
    if not math.isfinite(m):
        notes.add("not_representable", "n1 + n2 is beyond float64's range, so the standardized mean "
                  "difference is not computed", ["standardized_mean_difference"])
        return StandardizedMeanDifference(None, None, None, None, None, n1, n2, None, _EFFECT_ESTIMATOR)
    if m <= 1.0:
        return undefined(f"Hedges' correction needs n1 + n2 - 2 > 1; here it is {m:g}")
    first, second = estimates
    means = (first["mean"], second["mean"])
    sds = (first["standard_deviation"], second["standard_deviation"])
    if None in means or None in sds:
        return undefined("a mean or standard deviation of an input is undefined (see its warnings)")
    populations = tuple(d.conventions.convention == "population" for d in described)
    sizes = (n1, n2)

    def pooled(a: Stats, b: Stats):
        # A defined standard deviation implies n > 1 (one observation leaves it undefined).
        s1 = _sample_sd(a["standard_deviation"], n1, populations[0])
        s2 = _sample_sd(b["standard_deviation"], n2, populations[1])
        largest = np.maximum(s1, s2)
        r1, r2 = s1 / largest, s2 / largest
        return largest * np.sqrt(((n1 - 1.0) * r1 * r1 + (n2 - 1.0) * r2 * r2) / m)

    correction = hedges_correction(m)

    def hedges_g(a: Stats, b: Stats):
        return correction * (b["mean"] - a["mean"]) / pooled(a, b)

    if sds[0] == 0.0 and sds[1] == 0.0:
        return undefined("both inputs have zero spread, so there is no standard deviation to scale by")
    with np.errstate(all="ignore"):
        spread = float(pooled(first, second))
        d = float((np.float64(second["mean"]) - np.float64(first["mean"])) / spread)
    if not (math.isfinite(spread) and math.isfinite(d)):
        notes.add("not_representable", "the standardized mean difference is outside the range of float64",
                  ["standardized_mean_difference"])
        return StandardizedMeanDifference(
            None, None, correction, _finite(spread), m, n1, n2, None, _EFFECT_ESTIMATOR
        )
    g = correction * d
    total = sizes[0] + sizes[1]
    # 1/n1 + 1/n2 and (d / sqrt(2 total))^2: neither n1 n2 nor d^2 is formed, so huge counts
    # or a huge d cannot overflow into inf / inf.
    q = d / math.sqrt(2.0 * total)
    error = correction * math.sqrt(1.0 / sizes[0] + 1.0 / sizes[1] + q * q)
    if not math.isfinite(error):
        notes.add("not_representable", "the standard error of the standardized mean difference is outside "
                  "float64's range", ["standardized_mean_difference"])
        error = None
    result = StandardizedMeanDifference(g, d, correction, spread, m, n1, n2, error, _EFFECT_ESTIMATOR)
    if resampled is not None:
        bootstrapped = resampled.interval(hedges_g, g)
        pending.record("standardized_mean_difference", bootstrapped)
        result = dataclasses.replace(
            result, interval=bootstrapped.interval, standard_error=bootstrapped.standard_error
        )
    return result


# ----------------------------------------------------------------------------------------------
# Two-sample tests
# ----------------------------------------------------------------------------------------------

_KS_REFERENCE = (
    "Kolmogorov-Smirnov two-sample test; scipy.stats.ks_2samp (Hodges, Arkiv for Matematik 3, 1958)"
)
_CHI_SQUARE_REFERENCE = (
    "Pearson chi-square test of homogeneity, no continuity correction; scipy.stats.chi2_contingency"
)


def _distribution_test(first: WeightedData, second: WeightedData, notes: _Notes) -> DistributionTest:
    """Kolmogorov-Smirnov for observations with whole counts; chi-square for bins on the same edges."""
    if first.binned or second.binned:
        if not (first.binned and second.binned):
            return _no_test(
                "chi_square_homogeneity",
                "bins can only be tested against bins on the same edges (values within bins are unknown)",
            )
        return _chi_square(first, second, notes)
    for data, side in ((first, "first"), (second, "second")):
        if data.meaning is WeightMeaning.PROBABILITY:
            return _no_test(
                "kolmogorov_smirnov",
                f"the {side} input is a probability table, a population with no sample size, so no "
                "sampling test applies",
            )
        if data.meaning is WeightMeaning.RELIABILITY:
            return _no_test(
                "kolmogorov_smirnov",
                f"the {side} input has reliability weights, which give no count of observations for "
                "the test's null distribution",
            )
        if not data.integer_weights:
            return _no_test(
                "kolmogorov_smirnov", f"the {side} input's weights are not whole counts of observations"
            )
    return _kolmogorov_smirnov(first, second, notes)


def _no_test(test: str, reason: str) -> DistributionTest:
    reference = _KS_REFERENCE if test == "kolmogorov_smirnov" else _CHI_SQUARE_REFERENCE
    return DistributionTest(test, None, None, None, None, reference, reason)


def _kolmogorov_smirnov(first: WeightedData, second: WeightedData, notes: _Notes) -> DistributionTest:
    """Two-sided two-sample KS test; counts stand for repeated observations.

    Up to ``KS_EXACT_LIMIT`` observations per input: scipy.stats.ks_2samp on the repeated
    observations with its exact null distribution. Beyond: D = max |F1 - F2| over the union of
    the supports, exactly from the cumulative counts, and Smirnov's asymptotic p-value
    ``kstwo.sf(D, round(n m / (n + m)))`` -- what ks_2samp(method="asymp") computes.
    """
    a, b = first.support, second.support
    n, m = int(round(a.total)), int(round(b.total))
    if max(n, m) <= KS_EXACT_LIMIT:
        with warnings.catch_warnings(record=True) as caught:
            # scipy switches to the asymptotic distribution, with a RuntimeWarning, where the exact
            # computation fails in floating point; the method reported says which was used.
            warnings.simplefilter("always", RuntimeWarning)
            result = stats.ks_2samp(
                np.repeat(a.values, a.weights.astype(np.int64)),
                np.repeat(b.values, b.weights.astype(np.int64)),
                method="exact",
            )
        switched = any(issubclass(w.category, RuntimeWarning) for w in caught)
        statistic, p_value = float(result.statistic), float(result.pvalue)
        method = "asymptotic" if switched else "exact"
    else:
        union = np.union1d(a.values, b.values)

        def cdf(support, total):
            index = np.searchsorted(support.values, union, side="right") - 1
            return np.where(index >= 0, support.cumulative[np.maximum(index, 0)], 0.0) / total

        statistic = float(np.max(np.abs(cdf(a, n) - cdf(b, m))))
        larger, smaller = max(n, m), min(n, m)
        effective = np.round(larger * smaller / (larger + smaller))
        p_value = float(np.clip(stats.kstwo.sf(statistic, effective), 0.0, 1.0))
        method = "asymptotic"
    distinct = np.union1d(a.values, b.values).size
    if distinct < n + m:
        notes.add(
            "distribution_test_ties",
            f"the pooled observations hold ties ({distinct} distinct values among {n + m}); the "
            "Kolmogorov-Smirnov p-value assumes continuous data and is conservative (too large) for tied "
            "or discrete data",
            ["distribution_test"],
        )
    return DistributionTest("kolmogorov_smirnov", statistic, p_value, method, None, _KS_REFERENCE, None)


def _bin_columns(data: WeightedData) -> np.ndarray:
    """Counts below the finite edges (open bin), in each closed bin, and above (open bin)."""
    assert data.edges is not None and data.weights is not None
    edges, weights = data.edges, data.weights
    open_low, open_high = bool(np.isinf(edges[0])), bool(np.isinf(edges[-1]))
    closed = weights[int(open_low): weights.size - int(open_high)]
    return np.concatenate(([weights[0] if open_low else 0.0], closed, [weights[-1] if open_high else 0.0]))


def _chi_square(first: WeightedData, second: WeightedData, notes: _Notes) -> DistributionTest:
    """Pearson's chi-square test of homogeneity on the 2 x k table of bin counts.

    The bins must share their finite edges; an open-ended bin present in one input only counts
    zero in the other (it holds nothing beyond that edge). Columns empty in both are dropped.
    """
    assert first.edges is not None and second.edges is not None
    if not np.array_equal(first.edges[np.isfinite(first.edges)], second.edges[np.isfinite(second.edges)]):
        return _no_test("chi_square_homogeneity", "the two inputs' bins have different edges")
    if not (first.integer_weights and second.integer_weights):
        return _no_test("chi_square_homogeneity", "the bin counts are not whole numbers of observations")
    table = np.vstack((_bin_columns(first), _bin_columns(second)))
    table = table[:, np.any(table > 0.0, axis=0)]
    if table.shape[1] < 2:
        return _no_test(
            "chi_square_homogeneity", "every count of both inputs lies in one bin: nothing to compare"
        )
    result = stats.chi2_contingency(table, correction=False)
    if float(np.min(result.expected_freq)) < SMALL_EXPECTED_COUNT:
        notes.add(
            "chi_square_small_expected",
            f"some expected counts are below {SMALL_EXPECTED_COUNT:g} (smallest "
            f"{float(np.min(result.expected_freq)):.3g}): the chi-square approximation may be poor "
            "(Cochran 1954); merging sparse bins helps",
            ["distribution_test"],
        )
    return DistributionTest(
        "chi_square_homogeneity", float(result.statistic), float(result.pvalue), "pearson", int(result.dof),
        _CHI_SQUARE_REFERENCE, None,
    )


def _note_conventions(described: tuple[Description, Description], notes: _Notes) -> None:
    """Warn when the inputs' estimators differ, so their differences mix definitions."""
    a, b = described[0].conventions, described[1].conventions
    parts = []
    for label, x, y, affected in (
        ("convention", a.convention, b.convention,
         ("variance", "standard_deviation", "coefficient_of_variation")),
        ("skewness estimator", a.skewness, b.skewness, ("skewness",)),
        ("kurtosis estimator", a.kurtosis, b.kurtosis, ("kurtosis", "excess_kurtosis")),
        ("quantile definition", a.quantile_definition, b.quantile_definition,
         ("median", "interquartile_range", "quantile_shifts")),
    ):
        if x != y:
            parts.append((f"{label}: first {x!r}, second {y!r}", affected))
    if parts:
        notes.add(
            "conventions_differ",
            "the inputs are described by different estimators, so these differences mix definitions ("
            + "; ".join(text for text, _ in parts) + ")",
            [n if n == "quantile_shifts" else f"differences.{n}" for _, names in parts for n in names],
        )
