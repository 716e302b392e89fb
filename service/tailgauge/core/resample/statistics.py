"""Every descriptor of many rows of weights at once, by the rules ``describe`` uses for one.

Moment descriptors of a whole batch come from one matrix product with the powers of the scaled
deviations (``Rows.sums``); order statistics from the rules of
:mod:`tailgauge.core.order_rules`, applied to all rows at once.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tailgauge.core import deviation_rules, grouped, order_rules, shape
from tailgauge.core.moments import variance_factor
from tailgauge.core.order_statistics import NORMAL_MAD_FACTOR
from tailgauge.core.resample import lmoment_rows, medcouple_rows, tail_rows
from tailgauge.core.resample.budget import (
    EVALUATION_PART_BYTES,
    LMOMENT_BYTES_PER_ELEMENT,
    deadline_check,
    evaluation_row_bytes,
)
from tailgauge.core.resample.draws import Plan
from tailgauge.core.resample.intervals import INTERVAL_DESCRIPTORS

QUANTILE_SHAPE = ("quartile_skewness", "octile_kurtosis", "octile_excess_kurtosis")
L_MOMENTS = ("l_location", "l_scale", "l_skewness", "l_kurtosis")


@dataclass(frozen=True, eq=False)
class QuantileShape:
    """What the quantile-based shape measures read, as ``describe`` defines them: the quantiles
    at ``probabilities`` (Q1, Q2, Q3, then the octiles E1, E2, E3, E5, E6, E7) by the quantile
    rule in use, and the octile kurtosis of any normal distribution (Moors 1988)."""

    probabilities: np.ndarray
    normal_octile_kurtosis: float

    def __post_init__(self) -> None:
        # Q1 and Q3 double as the quartiles of the interquartile range.
        assert self.probabilities.size == 9 and (self.probabilities[0], self.probabilities[2]) == (0.25, 0.75)


# What reads each row's median (besides the median itself).
_READ_MEDIAN = ("median", "median_absolute_deviation", "median_absolute_deviation_normal", "mean_median_gap", "medcouple")


class Statistics:
    """Every descriptor of a batch of weight rows, by the same rules as ``describe``."""

    def __init__(
        self,
        plan: Plan,
        families: tuple[str, str],
        quantile_type: int | None,
        factor_rule: str,
        sheppard_width: float | None = None,
        quantile_shape: QuantileShape | None = None,
        left_out: dict[str, str] | None = None,
        tails: tail_rows.TailSpec | None = None,
    ):
        self.plan = plan
        # The tail statistics' options (levels, trimming, Hill's k) and the columns they read.
        self.tails = tail_rows.TailSpec() if tails is None else tails
        self.tail_columns = tail_rows.TailColumns(plan)
        self.quantile_shape = quantile_shape
        self.left_out = {} if left_out is None else left_out  # name -> why it is not resampled
        # The data's own weights are whole counts (what robust.medcouple asks of the data): so are
        # every resample's and leave-one-out row's.
        self.whole_weights = order_rules.whole_counts(plan.base, float(np.sum(plan.base)))
        self.sheppard_width = sheppard_width  # in the scaled units of the plan's deviations
        self.skewness_family, self.kurtosis_family = families
        self.quantile_type = quantile_type
        self.factor_rule = factor_rule  # a tailgauge.core.moments.VarianceRule
        # Each median's sorted medcouple kernels over this plan's support, shared by the batches
        # and the jackknife (medcouple_rows.medcouples).
        self.medcouple_kernels = medcouple_rows.KernelCache()

    def wanted(self, estimates: dict[str, float | None]) -> tuple[str, ...]:
        """The descriptors to resample: those the engine resamples whose estimate is defined and
        that this request does not leave out (the quantile-based shape only with its definition at
        hand), in the registry's order."""
        return tuple(
            name
            for name in INTERVAL_DESCRIPTORS
            if estimates.get(name) is not None
            and name not in self.left_out
            and (self.quantile_shape is not None or name not in QUANTILE_SHAPE)
            and (name != "upper_tail_index" or self.tails.tail_count is not None)
        ) + tuple(
            name for name, value in estimates.items()
            if name.startswith((tail_rows.UPPER, tail_rows.LOWER)) and value is not None and self.tails.levels.size
        )

    def quantiles(self, view, p: np.ndarray) -> np.ndarray:
        plan = self.plan
        if plan.edges is not None:
            return order_rules.grouped_quantiles(view, plan.edges, p)
        if plan.integer:
            return order_rules.hf_quantiles(view, plan.values, p, self.quantile_type)
        return order_rules.cdf_quantiles(view, plan.values, p, average=self.quantile_type == 2)

    def median(self, view) -> np.ndarray:
        plan = self.plan
        if plan.edges is not None:
            return order_rules.grouped_quantiles(view, plan.edges, np.array([0.5]))[:, 0]
        # Resampled data are never a probability table: other weights average at an exact half.
        return order_rules.median(view, plan.values, whole=plan.integer, average=True)

    def mad(self, view, median: np.ndarray) -> np.ndarray:
        """Median absolute deviation of each row about its own median, by the rule of
        ``order_statistics.median_absolute_deviation`` (``grouped`` for bins)."""
        plan = self.plan
        if plan.edges is not None:
            return deviation_rules.grouped_median_absolute_deviations(view, plan.edges, median)
        return deviation_rules.median_absolute_deviations(
            view, plan.values, median, whole=plan.integer, average=True, part_bytes=EVALUATION_PART_BYTES
        )

    def part_rows(self, view, probabilities: int) -> int:
        """How many rows of ``view`` one part of ``evaluate`` takes: parts of at most
        ``EVALUATION_PART_BYTES`` of working memory (see ``evaluation_row_bytes``)."""
        row = evaluation_row_bytes(
            self.plan.values.size, probabilities, bins=self.plan.edges is not None
        )
        return max(1, EVALUATION_PART_BYTES // row)

    def evaluate(
        self,
        view,
        probabilities: np.ndarray,
        names: tuple[str, ...],
        deadline: float | None = None,
        ordered: dict[str, np.ndarray] | None = None,
    ) -> dict[str, np.ndarray]:
        """Every requested statistic for each row of ``view``; ``quantile:i`` for probabilities[i].

        Rows are taken a part at a time (``part_rows``), so the working memory of order
        statistics (rows x probabilities, and rows x bins for binned data) stays bounded
        whatever the batch; every statistic is per row, so parts change no value. The wall
        clock is checked before each part. ``ordered``: the rows' ``order_statistics``, when
        they were read beforehand (they are then taken as they are).
        """
        rows = view.count
        per_part = self.part_rows(view, probabilities.size)
        if rows <= per_part:
            deadline_check(deadline)
            return self._evaluate(view, probabilities, names, ordered)
        # Each part's values are copied into arrays of all rows at once: no list of parts is
        # held beside their concatenation.
        result: dict[str, np.ndarray] = {}
        for start in range(0, rows, per_part):
            deadline_check(deadline)
            span = slice(start, start + per_part)
            part = self._evaluate(
                view.rows(span), probabilities, names,
                None if ordered is None else {name: values[span] for name, values in ordered.items()},
            )
            for name, values in part.items():
                if ordered is not None and name in ordered:
                    result[name] = ordered[name]  # already every row's (no second copy)
                    continue
                if name not in result:
                    result[name] = np.empty(rows, dtype=values.dtype)
                result[name][start : start + values.size] = values
            del part
        return result

    def order_statistics(self, view, probabilities: np.ndarray, names: tuple[str, ...]) -> dict[str, np.ndarray]:
        """The statistics of ``evaluate`` read from each row's order alone (the median, the MADs,
        the quantiles, the interquartile range and the quantile-based shape), in its order.

        Every one of them is per row and searches integer or cumulative weights, so rows taken
        a few at a time give the same values as the batch taken at once (the bootstrap reads
        them from parts of a batch while the rest of it is being drawn)."""
        out: dict[str, np.ndarray] = {}
        if not any(name in names for name in _READ_MEDIAN) and not probabilities.size and "interquartile_range" not in names:
            if not any(name in names for name in QUANTILE_SHAPE):
                return out  # nothing asked of the order (options.descriptors): no lookup at all
        median = self.median(view)
        out["median"] = median
        if "median_absolute_deviation" in names or "median_absolute_deviation_normal" in names:
            mad = self.mad(view, median)
            out["median_absolute_deviation"] = mad
            out["median_absolute_deviation_normal"] = mad * NORMAL_MAD_FACTOR
        shaped = self.quantile_shape is not None and any(name in names for name in QUANTILE_SHAPE)
        if shaped:
            assert self.quantile_shape is not None
            # Each distinct probability is looked up once (the defaults share the quartiles and median).
            distinct, where = np.unique(
                np.concatenate((self.quantile_shape.probabilities, probabilities)), return_inverse=True
            )
            found = self.quantiles(view, distinct)[:, where]
            self._quantile_shape(out, found[:, :9])
            q1, q3, requested = found[:, 0], found[:, 2], found[:, 9:]
        else:
            found = self.quantiles(view, np.concatenate(([0.25, 0.75], probabilities)))
            q1, q3, requested = found[:, 0], found[:, 1], found[:, 2:]
        out["interquartile_range"] = q3 - q1
        for i in range(probabilities.size):
            out[f"quantile:{i}"] = requested[:, i]
        return out

    def medcouples(self, view, median: np.ndarray) -> np.ndarray:
        """The medcouple of each row about its ``median`` (rows with a NaN median: NaN, no work)."""
        return medcouple_rows.medcouples(
            view, self.plan.values, median, self.whole_weights, EVALUATION_PART_BYTES, self.medcouple_kernels
        )

    def _evaluate(
        self, view, probabilities: np.ndarray, names: tuple[str, ...], ordered: dict[str, np.ndarray] | None = None
    ) -> dict[str, np.ndarray]:
        plan = self.plan
        sums = view.sums
        weight = sums[:, 0]
        delta = sums[:, 1] / weight
        # Central moments of each row about its own mean, from sums about the full-sample mean.
        m = {}
        for k in (2, 3, 4):
            total = np.zeros_like(weight)
            for j in range(k + 1):
                total = total + math.comb(k, j) * sums[:, j] * (-delta) ** (k - j)
            m[k] = total / weight
        if self.sheppard_width is not None:
            m[2], m[4] = grouped.sheppard_corrected(m[2], m[4], self.sheppard_width)
        exponent = plan.sums.scale_exponent
        mean = plan.sums.mean + np.ldexp(delta, exponent)
        out: dict[str, np.ndarray] = {}
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            # A jackknife row of a two-point sample has weight 1: its variance is undefined (inf/NaN).
            inverse_effective = (
                view.sum_squared_weights() / (weight * weight) if self.factor_rule == "reliability" else None
            )
            factor = variance_factor(self.factor_rule, weight, inverse_effective)
            # Sheppard's correction applies to the variance itself (s^2 - h^2/12), by describe's rule.
            variance_scaled = (
                m[2] * factor if self.sheppard_width is None
                else grouped.sheppard_variance(m[2], self.sheppard_width, factor)
            )
            out["mean"] = mean
            out["variance"] = np.ldexp(variance_scaled, 2 * exponent)
            sd = np.ldexp(np.sqrt(variance_scaled), exponent)
            out["standard_deviation"] = sd
            out["coefficient_of_variation"] = sd / mean
            g1 = m[3] / m[2] ** 1.5
            g2 = m[4] / (m[2] * m[2]) - 3.0
            # n of the bias corrections: each row's total weight (one fewer observation in a
            # jackknife row); reliability weights use the plug-in g1/g2. Each family's smallest n
            # is describe's (shape.SKEWNESS_MIN_N, KURTOSIS_MIN_N).
            n = np.full_like(weight, float(plan.draws)) if plan.reliability else weight
            skew_min = shape.SKEWNESS_MIN_N[self.skewness_family]
            kurt_min = shape.KURTOSIS_MIN_N[self.kurtosis_family]
            skew = np.where(n >= skew_min, shape.skewness(g1, n, self.skewness_family).value, np.nan)
            kurt = np.where(n >= kurt_min, shape.excess_kurtosis(g2, n, self.kurtosis_family).value, np.nan)
            out["skewness"] = skew
            out["excess_kurtosis"] = kurt
            out["kurtosis"] = kurt + 3.0
        given = self.order_statistics(view, probabilities, names) if ordered is None else ordered
        out.update((name, values) for name, values in given.items() if name != "medcouple")
        median = out.get("median")  # absent only when nothing asked reads the order
        if "mean_median_gap" in names:
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                # As describe: halves first, so values near float64's limit do not overflow.
                out["mean_median_gap"] = (0.5 * out["mean"] - 0.5 * median) / (0.5 * out["standard_deviation"])
        if any(name in names for name in L_MOMENTS):
            self._lmoments(out, view)
        if "medcouple" in names:
            out["medcouple"] = given["medcouple"] if "medcouple" in given else self.medcouples(view, median)
        tail_rows.evaluate(plan, self.tails, self.tail_columns, view, names, out)
        return out

    def _quantile_shape(self, out: dict[str, np.ndarray], found: np.ndarray) -> None:
        """Quartile skewness (Bowley) and octile kurtosis (Moors) by describe's arithmetic."""
        assert self.quantile_shape is not None
        q1, q2, q3, e1, e2, e3, e5, e6, e7 = found.T
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            out["quartile_skewness"] = (0.5 * q3 + 0.5 * q1 - q2) / (0.5 * q3 - 0.5 * q1)
            moors = ((0.5 * e7 - 0.5 * e5) + (0.5 * e3 - 0.5 * e1)) / (0.5 * e6 - 0.5 * e2)
        out["octile_kurtosis"] = moors
        out["octile_excess_kurtosis"] = moors - self.quantile_shape.normal_octile_kurtosis

    def _lmoments(self, out: dict[str, np.ndarray], view) -> None:
        """l1, l2, t3, t4 of each row (see :mod:`tailgauge.core.resample.lmoment_rows`); bins'
        rows are taken in dense parts of at most ``EVALUATION_PART_BYTES``."""
        plan = self.plan
        rows = view.count
        moments = np.empty((rows, 4))
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            if plan.edges is None:  # tiles of their own (lmoment_rows.TILE_ELEMENTS)
                pwms = lmoment_rows.sample_pwms(view, plan.powers[:, 1], unbiased=plan.integer)
                moments[:] = lmoment_rows.lmoments_of(pwms)
            else:  # dense parts of the bins holding data
                held = np.flatnonzero(plan.base > 0)
                span = slice(int(held[0]), int(held[-1]) + 1)
                edges = plan.sums.scaled_deviations(plan.edges[span.start : span.stop + 1])
                width = span.stop - span.start
                per_part = max(1, EVALUATION_PART_BYTES // (LMOMENT_BYTES_PER_ELEMENT * width))
                for start in range(0, rows, per_part):
                    part = view if per_part >= rows else view.rows(slice(start, start + per_part))
                    pwms = lmoment_rows.binned_pwms(part, edges, span)
                    moments[start : start + part.count] = lmoment_rows.lmoments_of(pwms)
            exponent = plan.sums.scale_exponent
            scale = moments[:, 1]
            defined = scale > 0.0
            out["l_location"] = plan.sums.mean + np.ldexp(moments[:, 0], exponent)
            out["l_scale"] = np.ldexp(scale, exponent)
            out["l_skewness"] = np.where(defined, moments[:, 2] / scale, np.nan)
            out["l_kurtosis"] = np.where(defined, moments[:, 3] / scale, np.nan)
