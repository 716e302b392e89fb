"""Histograms as metrics systems export them, turned into the one bins form.

Three layouts, each becoming k + 1 edges and k counts for :func:`tailgauge.core.weighted.from_bins`
(so every bins descriptor, warning and interval applies), with the histogram's own count, sum,
minimum and maximum kept beside the bins (:class:`~tailgauge.core.weighted.KnownSummary`):

* ``cumulative``: upper bounds (the last may be ``None``, +infinity) with cumulative counts, an
  optional lower bound (without it the first bucket is open below), optional sum and count;
* ``explicit``: m strictly increasing bounds and m + 1 bucket counts, bucket i covering
  (bounds[i - 1], bounds[i]] and the outer two open; optional sum, min and max;
* ``exponential``: bucket i of ``positive`` covers (base^(offset + i), base^(offset + i + 1)],
  base = 2^(2^-scale), ``negative`` mirrors it below zero, and the zero bucket
  [-zero_threshold, zero_threshold] holds ``zero_count``.

Every bucket is upper-inclusive, as these formats define them. Known ``min`` and ``max`` must lie
in the first and last buckets holding data; they close those buckets (an open end included) at
the observed extremes, and the buckets beyond, empty, are left out. A known ``sum`` must lie
within what the buckets allow; with every bin closed, each bin's representative value is its
midpoint moved by d = sum / count - (midpoint mean), the same d for every bin, so the mean and its
bootstrap are exact in location while the central moments stay those of the midpoints.

A zero bucket of threshold 0 holds values that are 0 (or too small to index): a bin of no width
cannot hold counts, so it is spread over [-w, w], w the nearest boundary of the buckets sent,
which keeps its midpoint at 0.

Exponential boundaries are the float64 nearest to base^k (correctly rounded): for scale <= 0
they are powers of two, exact; for scale > 0, base^k = 2^q 2^(r / 2^scale) with k = q 2^scale + r,
and 2^(r / 2^scale) is computed in extended precision and, where that cannot decide the rounding,
by exact integer arithmetic (:func:`rounded_power_of_two`). Boundaries are kept within float64's
normal range: the top boundary beyond it is taken as the largest float64 and the lowest below
it as 0 (true bounds of finite positive values); any other boundary outside is refused.

Errors name the request's fields (``upper_bounds[3]``, ``positive.offset``, ``min``).

Reference: OpenTelemetry metrics data model, histogram and exponential histogram data points
(bucket boundaries and the zero bucket as defined there).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from tailgauge.core.errors import UncomputableInput
from tailgauge.core.weighted import KnownSummary, WeightedData, from_bins

MIN_SCALE, MAX_SCALE = -10, 20
LARGEST = float(np.finfo(np.float64).max)
# Exponents of base^k kept as boundaries: the float64 normal range [2^-1022, 2^1024).
LOWEST_EXPONENT, HIGHEST_EXPONENT = -1022, 1024
# Relative tolerance of the bounds checks of a known sum (the producer summed in floating point).
SUM_TOLERANCE = 1e-9

# np.exp2 on long doubles with a 64-bit significand is within a few units of their last place
# (2^-63 relative); a value this close to a rounding midpoint is decided exactly instead.
_EXTENDED = np.finfo(np.longdouble).nmant >= 63
_UNDECIDED = 2.0**-60


@dataclass(frozen=True)
class Buckets:
    """One side of an exponential histogram: bucket_counts[i] has index offset + i."""

    offset: int
    counts: list[float]


def from_cumulative(
    upper_bounds: list[float | None],
    cumulative_counts: list[float],
    *,
    lower_bound: float | None = None,
    total: float | None = None,
    count: float | None = None,
) -> WeightedData:
    """The bins of a cumulative (``le``) histogram; ``total`` is its ``sum``."""
    if len(cumulative_counts) != len(upper_bounds):
        raise UncomputableInput.at(
            "cumulative_counts",
            f"has {len(cumulative_counts)} entries for {len(upper_bounds)} upper_bounds; give one per bound",
        )
    for i, bound in enumerate(upper_bounds[:-1]):
        if bound is None:
            raise UncomputableInput.at(f"upper_bounds[{i}]", "only the last upper bound may be null (+infinity)")
    uppers = [math.inf if b is None else float(b) for b in upper_bounds]
    _increasing(uppers, "upper_bounds")
    if lower_bound is not None and not lower_bound < uppers[0]:
        raise UncomputableInput.at("lower_bound", f"must be below upper_bounds[0] = {uppers[0]!r}")
    cumulative = np.asarray(cumulative_counts, dtype=np.float64)
    drops = np.flatnonzero(np.diff(cumulative) < 0.0)
    if drops.size:
        i = int(drops[0]) + 1
        raise UncomputableInput.at(
            f"cumulative_counts[{i}]",
            f"cumulative counts never decrease; {float(cumulative[i])!r} is below cumulative_counts[{i - 1}] = "
            f"{float(cumulative[i - 1])!r}",
        )
    if count is not None and count != cumulative[-1]:
        raise UncomputableInput.at(
            "count", f"is {count!r} but the last cumulative count is {float(cumulative[-1])!r}; they must be equal"
        )
    counts = np.diff(cumulative, prepend=0.0)
    edges = np.array([-math.inf if lower_bound is None else float(lower_bound), *uppers])
    return _binned(edges, counts, "cumulative_counts", KnownSummary(float(cumulative[-1]), total))


def from_explicit(
    explicit_bounds: list[float],
    bucket_counts: list[float],
    *,
    total: float | None = None,
    minimum: float | None = None,
    maximum: float | None = None,
) -> WeightedData:
    """The bins of an explicit-bounds histogram: m bounds, m + 1 buckets, the outer two open."""
    if len(bucket_counts) != len(explicit_bounds) + 1:
        raise UncomputableInput.at(
            "bucket_counts",
            f"has {len(bucket_counts)} entries for {len(explicit_bounds)} explicit_bounds; give one more "
            "count than bounds",
        )
    bounds = [float(b) for b in explicit_bounds]
    _increasing(bounds, "explicit_bounds")
    edges = np.array([-math.inf, *bounds, math.inf])
    counts = np.asarray(bucket_counts, dtype=np.float64)
    known = KnownSummary(_total(counts), total, minimum, maximum)
    return _binned(edges, counts, "bucket_counts", known)


def from_exponential(
    scale: int,
    zero_count: float,
    *,
    zero_threshold: float = 0.0,
    positive: Buckets | None = None,
    negative: Buckets | None = None,
    total: float | None = None,
    minimum: float | None = None,
    maximum: float | None = None,
) -> WeightedData:
    """The bins of an exponential histogram: negative buckets (mirrored), the zero bucket, positive buckets."""
    if not MIN_SCALE <= scale <= MAX_SCALE:
        raise UncomputableInput.at("scale", f"must be within {MIN_SCALE}..{MAX_SCALE}")
    sides = {}
    for name, side in (("positive", positive), ("negative", negative)):
        if side is not None and side.counts:
            sides[name] = (side_boundaries(scale, side.offset, len(side.counts), name), np.asarray(side.counts, float))
    nearest = min((b[0] for b, _ in sides.values()), default=math.inf)
    width = zero_threshold
    if zero_threshold > nearest:
        raise UncomputableInput.at(
            "zero_threshold", f"reaches above the lowest bucket boundary sent ({float(nearest)!r}); buckets may not overlap"
        )
    if zero_threshold == 0.0 and zero_count > 0.0:
        if math.isinf(nearest):
            raise UncomputableInput.at(
                "zero_count",
                "every observation is in the zero bucket, of zero width (zero_threshold 0) and no buckets beside "
                "it: there are no bins to describe; send the values as a table",
            )
        width = nearest
    if zero_count > 0.0 and width == 0.0:
        raise UncomputableInput.at("zero_count", "the zero bucket has no width between the buckets beside it")
    segments: list[tuple[np.ndarray, np.ndarray]] = []  # (edges, counts) of each part, in ascending order
    if "negative" in sides:
        bounds, counts = sides["negative"]
        segments.append((-bounds[::-1], counts[::-1]))
    if width > 0.0:
        segments.append((np.array([-width, width]), np.array([float(zero_count)])))
    if "positive" in sides:
        segments.append(sides["positive"])
    if not segments:
        raise UncomputableInput.at("zero_count", "no buckets were sent and the zero bucket is empty: nothing to describe")
    edges, counts = [segments[0][0]], [segments[0][1]]
    for seg_edges, seg_counts in segments[1:]:
        if seg_edges[0] > edges[-1][-1]:  # an empty gap between the parts
            edges.append(seg_edges[:1])
            counts.append(np.zeros(1))
        edges.append(seg_edges[1:])
        counts.append(seg_counts)
    known = KnownSummary(_total(np.concatenate(counts)), total, minimum, maximum)
    return _binned(np.concatenate(edges), np.concatenate(counts), _counts_field(sides), known)


def _total(terms: np.ndarray) -> float:
    """The exactly rounded sum of ``terms`` (math.fsum), or +-inf where it leaves float64's range."""
    try:
        return math.fsum(terms)
    except OverflowError:
        with np.errstate(over="ignore"):
            return float(np.sum(terms))


def _counts_field(sides: dict) -> str:
    if len(sides) == 1:
        return f"{next(iter(sides))}.bucket_counts"
    return "zero_count" if not sides else "positive.bucket_counts"


def _increasing(bounds: list[float], field: str) -> None:
    for i in range(1, len(bounds)):
        if not bounds[i] > bounds[i - 1]:
            raise UncomputableInput.at(
                f"{field}[{i}]", f"bounds must increase strictly; {bounds[i]!r} is not above {field}[{i - 1}]"
            )


def _binned(edges: np.ndarray, counts: np.ndarray, counts_field: str, known: KnownSummary) -> WeightedData:
    """Check the known min, max and sum against the bins, close the outer bins, build the bins form."""
    occupied = np.flatnonzero(counts > 0.0)
    if occupied.size == 0:
        raise UncomputableInput.at(counts_field, "every count is zero, so there is nothing to describe")
    first, last = int(occupied[0]), int(occupied[-1])
    low, high = known.minimum, known.maximum
    if low is not None and high is not None and low > high:
        raise UncomputableInput.at("min", f"is above max ({high!r})")
    if low is not None:
        if not edges[first] <= low <= edges[first + 1]:
            raise UncomputableInput.at(
                "min",
                f"{low!r} is not in the lowest bucket holding data, ({float(edges[first])!r}, {float(edges[first + 1])!r}]",
            )
        edges, counts = edges[first:], counts[first:]
        last -= first
        first = 0
        if low < edges[1]:  # closed at the observed minimum (a bin of no width could hold nothing)
            edges = edges.copy()
            edges[0] = low
    if high is not None:
        if not edges[last] <= high <= edges[last + 1]:
            raise UncomputableInput.at(
                "max",
                f"{high!r} is not in the highest bucket holding data, ({float(edges[last])!r}, {float(edges[last + 1])!r}]",
            )
        edges, counts = edges[: last + 2], counts[: last + 1]
        if high > edges[-2]:
            edges = edges.copy()
            edges[-1] = high
    if known.sum is not None:
        _check_sum(known.sum, edges, counts)
    try:
        data = from_bins([None if math.isinf(e) else float(e) for e in edges], counts)
    except UncomputableInput as error:  # the only rule left to it: not every count in an open bin
        raise UncomputableInput.at(counts_field, error.locations[0].message) from None
    if known.sum is not None and data.open_bin_weight == 0.0:
        assert data.weights is not None
        with np.errstate(over="ignore", invalid="ignore"):
            shift = known.sum / known.count - _total(data.values * data.weights) / known.count
        if math.isfinite(shift):  # else the moments are beyond float64 anyway (not_representable)
            data = dataclasses.replace(data, values=data.values + shift)
    return dataclasses.replace(data, known=known)


def _check_sum(total: float, edges: np.ndarray, counts: np.ndarray) -> None:
    """The sum must lie between sum(count x lower edge) and sum(count x upper edge), where finite."""
    held = counts > 0.0
    lower, upper, weights = edges[:-1][held], edges[1:][held], counts[held]
    with np.errstate(over="ignore", invalid="ignore"):
        magnitude = np.maximum(np.abs(np.where(np.isfinite(lower), lower, 0.0)), np.abs(np.where(np.isfinite(upper), upper, 0.0)))
        scale, below, above = _total(weights * magnitude), weights * lower, weights * upper
    if not math.isfinite(scale):
        return  # sums beyond float64's range: nothing can be checked
    slack = SUM_TOLERANCE * scale
    if np.all(np.isfinite(lower)):
        least = _total(below)
        if total < least - slack:
            raise UncomputableInput.at(
                "sum", f"{total!r} is below the least the buckets allow (sum of count x lower edge = {least!r})"
            )
    if np.all(np.isfinite(upper)):
        most = _total(above)
        if total > most + slack:
            raise UncomputableInput.at(
                "sum", f"{total!r} is above the most the buckets allow (sum of count x upper edge = {most!r})"
            )


# ---- exponential boundaries ----------------------------------------------------------------


def side_boundaries(scale: int, offset: int, buckets: int, side: str) -> np.ndarray:
    """The buckets + 1 boundaries base^k, k = offset .. offset + buckets, of one side, within float64.

    The top boundary beyond float64 is taken as the largest float64 and the lowest below the
    normal range as 0, when the bucket they bound still holds representable values; any other
    boundary outside the normal range is refused, naming the field that puts it there.
    """
    top = offset + buckets
    # base^k = 2^(k / 2^scale): compare k with the exponent limits scaled by 2^scale, in integers.
    def exponent_at_least(k: int, limit: int) -> bool:
        return k >= limit << scale if scale >= 0 else (k << -scale) >= limit

    if exponent_at_least(offset, HIGHEST_EXPONENT):
        raise UncomputableInput.at(f"{side}.offset", "puts every bucket beyond float64's range; lower it")
    if not exponent_at_least(top, LOWEST_EXPONENT):
        raise UncomputableInput.at(f"{side}.offset", "puts every bucket below float64's normal range; raise it")
    for k in (offset + 1, top - 1):  # interior boundaries must be normal float64 numbers
        if offset < k < top and not exponent_at_least(k, LOWEST_EXPONENT):
            raise UncomputableInput.at(
                f"{side}.offset", "puts a bucket boundary other than the lowest below float64's normal range; raise it"
            )
        if offset < k < top and exponent_at_least(k, HIGHEST_EXPONENT):
            i = next(j for j in range(buckets) if exponent_at_least(offset + j + 1, HIGHEST_EXPONENT))
            raise UncomputableInput.at(
                f"{side}.bucket_counts[{i + 1}]",
                "this bucket lies beyond float64's range (its lower boundary overflows); send fewer buckets",
            )
    indices = np.arange(offset, top + 1, dtype=np.int64)
    clipped = indices.copy()
    low_out = not exponent_at_least(offset, LOWEST_EXPONENT)
    high_out = exponent_at_least(top, HIGHEST_EXPONENT)
    if low_out:
        clipped[0] = indices[1]
    if high_out:
        clipped[-1] = indices[-2]
    bounds = boundaries(scale, clipped)
    if low_out:
        bounds[0] = 0.0
    if high_out or np.isinf(bounds[-1]):
        bounds[-1] = LARGEST
    if np.isinf(bounds[:-1]).any():  # correctly rounded to 2^1024 below the top: refused as above
        raise UncomputableInput.at(f"{side}.bucket_counts[{buckets - 1}]", "this bucket lies beyond float64's range")
    return bounds


def boundaries(scale: int, indices: np.ndarray) -> np.ndarray:
    """base^k for each k of ``indices`` (base = 2^(2^-scale)), the float64 nearest to it.

    The caller keeps 2^(k / 2^scale) within float64's normal range. Scale <= 0: 2^(k 2^-scale),
    exact. Scale > 0: k = q 2^scale + r, base^k = 2^q 2^(r / 2^scale), the second factor in
    [1, 2) correctly rounded (:func:`rounded_fractions`) and scaled by 2^q exactly.
    """
    indices = np.asarray(indices, dtype=np.int64)
    if scale <= 0:
        return np.ldexp(1.0, indices << -scale)
    quotient = indices >> scale
    remainder = indices & ((1 << scale) - 1)
    return np.ldexp(rounded_fractions(remainder, scale), quotient)


def rounded_fractions(remainders: np.ndarray, scale: int) -> np.ndarray:
    """2^(r / 2^scale) for 0 <= r < 2^scale, each the float64 nearest to it (ties cannot occur).

    Extended precision decides almost every value; those within ``_UNDECIDED`` (relative) of a
    rounding midpoint are decided by :func:`rounded_power_of_two`, exactly.
    """
    exponent = remainders.astype(np.longdouble) / np.longdouble(2.0**scale)  # exact: r < 2^20
    wide = np.exp2(exponent)
    nearest = wide.astype(np.float64)
    if not _EXTENDED:
        undecided = np.ones(nearest.size, dtype=bool)
    else:
        # Values in [1, 2): neighbours are 2^-52 apart, midpoints 2^-53 from each float64.
        off = np.abs(wide - nearest.astype(np.longdouble)).astype(np.float64)
        undecided = np.abs(off - 2.0**-53) <= _UNDECIDED
    for i in np.flatnonzero(undecided):
        nearest[i] = rounded_power_of_two(int(remainders[i]), scale, float(nearest[i]))
    return nearest


def rounded_power_of_two(remainder: int, scale: int, guess: float | None = None) -> float:
    """The float64 nearest to t = 2^(remainder / 2^scale), 0 <= remainder < 2^scale, decided exactly.

    A candidate c is t rounded when the midpoints m- and m+ between c and its neighbours satisfy
    m- < t < m+, that is m-^(2^scale) < 2^remainder < m+^(2^scale): dyadic midpoints raised to
    the power 2^scale by repeated squaring with integer lower and upper bounds (more bits until
    the comparison is decided; a midpoint is never a power of two, so it always is).
    """
    candidate = math.exp2(remainder / 2**scale) if guess is None else guess
    while True:
        below = _power_compare(Fraction(candidate) / 2 + Fraction(math.nextafter(candidate, 0.0)) / 2, scale, remainder)
        above = _power_compare(Fraction(candidate) / 2 + Fraction(math.nextafter(candidate, 4.0)) / 2, scale, remainder)
        if below < 0 < above:
            return candidate
        candidate = math.nextafter(candidate, 0.0 if below > 0 else 4.0)


def _power_compare(midpoint: Fraction, scale: int, remainder: int) -> int:
    """The sign of midpoint^(2^scale) - 2^remainder, from integer bounds of the power."""
    numerator, denominator = midpoint.numerator, midpoint.denominator  # denominator a power of two
    shift = denominator.bit_length() - 1
    bits = 128
    while True:
        low = high = numerator
        exponent = -shift  # the power lies in [low 2^exponent, high 2^exponent]
        for _ in range(scale):
            low, high, exponent = low * low, high * high, 2 * exponent
            excess = high.bit_length() - bits
            if excess > 0:
                low >>= excess
                high = -((-high) >> excess)
                exponent += excess
        target_shift = remainder - exponent  # compare with 2^remainder = 2^target_shift 2^exponent
        if target_shift >= 0:
            target = 1 << target_shift
            if low > target:
                return 1
            if high < target:
                return -1
        else:
            if low << -target_shift > 1:
                return 1
            if high << -target_shift < 1:
                return -1
        bits *= 2
