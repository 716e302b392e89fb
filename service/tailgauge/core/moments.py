"""Accurate weighted power sums about the mean, and the moments derived from them.

The sums are computed in blocks that stay in cache, about a shift close to the mean, and
re-centred exactly afterwards (the "shifted data" algorithm; Chan, Golub & LeVeque, "Algorithms
for computing the sample variance", The American Statistician 37, 1983, section 3). When the
shift turns out to be poor, or the powers would overflow or underflow float64 (data of
magnitude 1e150, near the largest double, or in the subnormal range), the data are recomputed
in two passes with exact power-of-two scaling, so every standardized moment stays finite and
accurate for any finite input.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

_BLOCK = 1 << 16
# Length of each dot product of the unit-weight power sums (``_BLOCK`` holds whole runs).
_ROW = 512
# Above this many unit-weight values the power sums are dot products (see ``_dot_power_sums``):
# from about four blocks on they are at least as accurate as the blocked pairwise sums (whose
# error grows with the number of blocks added in turn), and faster.
_DOT_ABOVE = 4 * _BLOCK
_SHIFT_SAMPLE = 1024
# Accept the one-pass shift only while it is within this many standard deviations of the
# mean: the re-centring then loses at most a factor (1 + 0.1)^order of precision.
_MAX_SHIFT_ERROR = 0.1
# Keep rms**order inside float64's normal range with a wide margin.
_MAX_POWER_EXPONENT = 280.0


def scale_by_power_of_two(value: float, exponent: int) -> float:
    """``value * 2**exponent`` exactly, or NaN when float64 cannot hold it.

    An underflow to zero (or into the subnormal range) of a non-zero value would be a
    plausible-looking but wrong number, so it is reported as not representable too.
    """
    if value == 0.0 or not math.isfinite(value):
        return value if value == 0.0 else math.nan
    if not -1021 < math.frexp(value)[1] + exponent <= 1024:
        return math.nan
    return math.ldexp(value, exponent)


# How the plug-in variance (divisor: the total weight) becomes the reported variance.
VarianceRule = Literal["sample", "population", "reliability"]


def variance_factor(rule: VarianceRule, total, inverse_effective=None):
    """The factor with ``variance = plug-in variance * factor``, for one total or an array of them.

    * ``"population"``: 1 (divisor n);
    * ``"sample"``: ``n / (n - 1)`` with ``n`` the total weight (divisor n - 1);
    * ``"reliability"``: ``1 / (1 - V2 / V1**2)`` (divisor ``V1 - V2 / V1``), given
      ``inverse_effective = V2 / V1**2``, the reciprocal of Kish's effective size.

    The divisor is positive only for ``n > 1`` (an effective size above 1); at exactly 1 the
    factor is ``inf``, and below it the formula's value is returned as it stands: a caller for
    which such data have no sample variance says so itself (``describe`` marks them single, and
    a resample of them gets a replicate that is not a variance). A float for a float total.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        if rule == "population":
            factor = np.ones_like(np.asarray(total, dtype=np.float64))
        elif rule == "reliability":
            factor = 1.0 / (1.0 - np.asarray(inverse_effective, dtype=np.float64))
        elif rule == "sample":
            total = np.asarray(total, dtype=np.float64)
            factor = total / (total - 1.0)
        else:
            raise ValueError(f"unknown variance rule {rule!r}")
    return float(factor) if np.ndim(factor) == 0 else factor


@dataclass(frozen=True)
class CentralSums:
    """Weighted sums of powers of the deviations from the mean, in units of ``2**scale_exponent``.

    Each value ``x`` is mapped to its scaled deviation ``d = (x * 2**pre - shift) * 2**post - centre``
    (all exact but the subtractions); ``sums[j] = sum_i w_i d_i**j`` for ``j = 0 .. order``, so
    ``sums[0]`` is the total weight and ``sums[1]`` is zero. ``d`` is the deviation from the mean
    divided by ``2**scale_exponent`` with ``scale_exponent = -(pre + post)``; the central moment of
    order ``j`` is ``2**(j * scale_exponent) * sums[j] / sums[0]``.
    """

    mean: float
    sums: np.ndarray
    pre_exponent: int = 0
    shift: float = 0.0
    post_exponent: int = 0
    centre: float = 0.0

    @property
    def scale_exponent(self) -> int:
        return -(self.pre_exponent + self.post_exponent)

    @property
    def total_weight(self) -> float:
        """The total weight the sums were taken with (rescaled by a power of two when extreme)."""
        return float(self.sums[0])

    @property
    def order(self) -> int:
        return int(self.sums.size - 1)

    def scaled_deviations(self, values: np.ndarray) -> np.ndarray:
        """``(values - mean) / 2**scale_exponent`` by the same exact scaling as the sums."""
        d = np.ldexp(values, self.pre_exponent) if self.pre_exponent else np.array(values, dtype=np.float64)
        d -= self.shift
        if self.post_exponent:
            d = np.ldexp(d, self.post_exponent)
        d -= self.centre
        return d

    def scaled_central_moment(self, order: int) -> float:
        """Central moment of ``order`` divided by ``2**(order * scale_exponent)`` (representable)."""
        return float(self.sums[order] / self.sums[0])

    def central_moment(self, order: int) -> float:
        """Plug-in central moment (divisor: total weight); NaN when float64 cannot hold it."""
        return scale_by_power_of_two(self.scaled_central_moment(order), order * self.scale_exponent)

    def standard_deviation(self, factor: float = 1.0) -> float:
        """``sqrt(factor * m2)``, taken in scaled units so it is representable when m2 is not."""
        return scale_by_power_of_two(math.sqrt(self.scaled_central_moment(2) * factor), self.scale_exponent)

    def standardized_moment(self, order: int) -> float:
        """``m_order / m_2**(order/2)``; NaN when the data have no spread."""
        m2 = self.scaled_central_moment(2)
        if m2 <= 0.0:
            return math.nan
        # Divide by sigma one factor at a time: m2**(order/2) alone can underflow to zero when a
        # rare value far out dominates the higher moments (the ratio itself is representable).
        sigma = math.sqrt(m2)
        result = self.scaled_central_moment(order)
        for _ in range(order):
            result /= sigma
        return result

    def raw_moment(self, order: int) -> float:
        """Plug-in raw moment ``E[x**order]``, from the central moments by the binomial theorem.

        Computed relative to ``R = 2**r >= max(|mean|, 2**scale_exponent)`` so no intermediate
        overflows; the result is NaN only when the moment itself is beyond float64. The first is
        the mean itself, the same representable value (also when it is subnormal).
        """
        if order == 1:
            return self.mean
        if self.mean == 0.0:
            reference = self.scale_exponent
        else:
            reference = max(math.frexp(self.mean)[1], self.scale_exponent)
        ratio_mean = math.ldexp(self.mean, -reference)
        ratio_scale = math.ldexp(1.0, max(self.scale_exponent - reference, -1074))
        total = 0.0
        for j in range(order + 1):
            central = 1.0 if j == 0 else self.scaled_central_moment(j) * ratio_scale**j
            total += math.comb(order, j) * ratio_mean ** (order - j) * central
        return scale_by_power_of_two(total, reference * order)


def _deviations(chunk: np.ndarray, pre_exponent: int, shift: float, post_exponent: int, out: np.ndarray) -> np.ndarray:
    """``(chunk * 2**pre - shift) * 2**post`` into ``out``."""
    if pre_exponent:
        np.ldexp(chunk, pre_exponent, out=out)
        np.subtract(out, shift, out=out)
    else:
        np.subtract(chunk, shift, out=out)
    if post_exponent:
        np.ldexp(out, post_exponent, out=out)
    return out


def _chained_power_sums(d: np.ndarray, weights: np.ndarray | None, order: int, power: np.ndarray) -> np.ndarray:
    """``sum w d**j`` for ``j = 0 .. order`` by pairwise sums of the powers built one product at
    a time (``power`` is scratch of ``d``'s size)."""
    sums = np.empty(order + 1)
    if weights is None:
        sums[0] = d.size
        sums[1] = d.sum()
        np.multiply(d, d, out=power)
        sums[2] = power.sum()
        first_power = 3
    else:
        sums[0] = weights.sum()
        np.multiply(weights, d, out=power)
        sums[1] = power.sum()
        first_power = 2
    for j in range(first_power, order + 1):
        np.multiply(power, d, out=power)
        sums[j] = power.sum()
    return sums


def _power_sums(
    values: np.ndarray,
    weights: np.ndarray | None,
    pre_exponent: int,
    shift: float,
    post_exponent: int,
    order: int,
) -> np.ndarray:
    """``sums[j] = sum w ((x * 2**pre - shift) * 2**post)**j``, blocked to stay in cache.

    Weighted data and up to ``_DOT_ABOVE`` unit-weight values: pairwise sums of the powers,
    built one product at a time, per block (:func:`_blocked_power_sums`). More unit-weight
    values: :func:`_dot_power_sums`, faster, and more accurate the longer the sample.
    """
    if weights is None and values.size > _DOT_ABOVE:
        return _dot_power_sums(values, pre_exponent, shift, post_exponent, order)
    return _blocked_power_sums(values, weights, pre_exponent, shift, post_exponent, order)


def _dot_power_sums(values: np.ndarray, pre_exponent: int, shift: float, post_exponent: int, order: int) -> np.ndarray:
    """:func:`_power_sums` of unit weights by dot products.

    Powers 2 and up: each run of ``_ROW`` deviations gives its power sums as dot products of
    two powers (``d**j = d**floor(j/2) * d**ceil(j/2)``, so one product array serves powers 3
    and 4; ``np.vecdot`` calls the BLAS dot), and the per-run sums are added pairwise at the end. A
    dot product keeps a few running sums of ``_ROW / lanes`` terms each, so a run's rounding
    stays about a pairwise sum's, and no sum runs across the sample one block at a time (the
    blocked form's error grows with the number of blocks). The last ``n mod _ROW`` values take
    :func:`_chained_power_sums`. The first power sum, behind the mean, is summed as in
    :func:`_blocked_power_sums` (per block, blocks added in turn), so the mean and every
    deviation taken from it are the same numbers on both paths.
    """
    n = values.size
    whole = n - n % _ROW
    runs = whole // _ROW
    partial = np.zeros((order + 1, runs + 1))
    block = min(_BLOCK, n)
    half = (order + 1) // 2  # highest power stored: d**half
    buffers = [np.empty(block) for _ in range(half)]
    first_sum = 0.0
    for start in range(0, n, _BLOCK):
        stop = min(start + _BLOCK, n)
        d = _deviations(values[start:stop], pre_exponent, shift, post_exponent, buffers[0][: stop - start])
        # The first power sum as before (a pairwise sum per block, blocks added in turn): the
        # mean, and every deviation derived from it, is the same number as the blocked form's.
        first_sum += d.sum()
        end = min(stop, whole)
        if end <= start:
            break
        size = end - start
        first, last = start // _ROW, end // _ROW
        powers = [None, d[:size].reshape(-1, _ROW)]
        for k in range(2, half + 1):
            powers.append(np.multiply(powers[k - 1], powers[1], out=buffers[k - 1][:size].reshape(-1, _ROW)))
        for j in range(2, order + 1):
            np.vecdot(powers[j // 2], powers[j - j // 2], out=partial[j, first:last])
    if whole < n:
        tail = values[whole:]
        d = _deviations(tail, pre_exponent, shift, post_exponent, np.empty(tail.size))
        partial[:, runs] = _chained_power_sums(d, None, order, np.empty(tail.size))
    sums = partial.sum(axis=1)
    sums[0] = float(n)
    sums[1] = first_sum
    return sums


def _blocked_power_sums(
    values: np.ndarray,
    weights: np.ndarray | None,
    pre_exponent: int,
    shift: float,
    post_exponent: int,
    order: int,
) -> np.ndarray:
    """:func:`_power_sums` by pairwise sums per block, the blocks added in turn."""
    n = values.size
    sums = np.zeros(order + 1)
    block = min(_BLOCK, n)
    deviation = np.empty(block)
    power = np.empty(block)
    for start in range(0, n, block):
        stop = min(start + block, n)
        d = _deviations(values[start:stop], pre_exponent, shift, post_exponent, deviation[: stop - start])
        w = None if weights is None else weights[start:stop]
        sums += _chained_power_sums(d, w, order, power[: stop - start])
    return sums


def _blocked_abs_max(values: np.ndarray, pre_exponent: int, shift: float) -> float:
    result = 0.0
    for start in range(0, values.size, _BLOCK):
        chunk = np.ldexp(values[start : start + _BLOCK], pre_exponent) - shift
        result = max(result, float(np.max(np.abs(chunk))))
    return result


def weighted_mean(values: np.ndarray, weights: np.ndarray | None, pre_exponent: int) -> float:
    """Mean of ``values * 2**pre_exponent``, refined by one correction pass.

    Called only by the two-pass fallback of :func:`central_sums`: tests wrap it (looked up on
    this module at call time) to see which path the data took."""
    weight = float(values.size) if weights is None else float(np.sum(weights))
    estimate = 0.0
    for refine in range(2):
        total = 0.0
        for start in range(0, values.size, _BLOCK):
            chunk = np.ldexp(values[start : start + _BLOCK], pre_exponent) - estimate
            if weights is None:
                total += float(chunk.sum())
            else:
                total += float(np.dot(weights[start : start + _BLOCK], chunk))
        estimate += total / weight
    return estimate


def _shift_estimate(values: np.ndarray, weights: np.ndarray | None) -> float:
    """A cheap guess of the mean from an evenly strided subsample of about 1,024 values."""
    step = max(1, values.size // _SHIFT_SAMPLE)
    sample = values[::step]
    if weights is not None:
        sample_weights = weights[::step]
        total = float(sample_weights.sum())
        if total > 0.0:
            return float(np.dot(sample_weights, sample) / total)
    return float(np.mean(sample))


def _acceptable(sums: np.ndarray, order: int, values: np.ndarray) -> bool:
    """Whether one-pass sums about a guessed shift are as accurate as the two-pass ones."""
    return _accurate(sums, order, lambda: bool(np.all(values == values[0])))


def _accurate(sums: np.ndarray, order: int, constant) -> bool:
    """:func:`_acceptable` given ``constant()``, whether the values all equal the first."""
    if not np.all(np.isfinite(sums)):
        return False
    weight, first, second = sums[0], sums[1], sums[2]
    if second <= 0.0:
        # Constant data, or squares that underflowed: only the first keeps the fast path.
        return constant()
    mean_square = second / weight
    delta = first / weight
    if delta * delta > _MAX_SHIFT_ERROR**2 * mean_square:
        return False
    return abs(order * 0.5 * math.log10(mean_square)) <= _MAX_POWER_EXPONENT


def _recentre(sums: np.ndarray) -> np.ndarray:
    """Power sums about ``shift`` to power sums about the mean (binomial theorem), for one
    sample's sums (``order + 1``) or many samples' as columns (``order + 1`` x samples).

    The powers of the shift's error are products taken in turn, element by element, so one
    sample's sums and a column of many are re-centred by the same operations, bit for bit.
    """
    weight = sums[0]
    step = -(sums[1] / weight)
    powers = [np.ones_like(step)]
    for _ in range(1, sums.shape[0]):
        powers.append(powers[-1] * step)
    centred = np.empty_like(sums)
    centred[0] = weight
    centred[1] = 0.0
    for k in range(2, sums.shape[0]):
        total = 0.0
        for j in range(k + 1):
            total = total + math.comb(k, j) * sums[j] * powers[k - j]
        centred[k] = total
    return centred


def _exponent_to_unit(magnitude: float) -> int:
    """``e`` such that ``magnitude * 2**e`` lies in [0.5, 1) (0 for zero)."""
    return -math.frexp(magnitude)[1] if magnitude > 0.0 else 0


def central_sums(values: np.ndarray, weights: np.ndarray | None, order: int) -> CentralSums:
    """Weighted power sums about the mean up to ``order`` (at least 2).

    Parameters
    ----------
    values
        Finite float64 observations or support points.
    weights
        Non-negative weights with a positive total, or ``None`` for unit weights.
    order
        Highest power summed.

    Notes
    -----
    Fast path: one blocked pass about a shift estimated from a strided subsample. The sums are
    accepted when the shift lies within ``0.1`` standard deviations of the mean and every power
    is well inside float64's range; otherwise the exact two-pass computation runs on data scaled
    by powers of two (exact operations), first by the magnitude of the data and then by the
    largest deviation, which keeps every power finite for any finite input.
    """
    order = max(order, 2)
    pre = post = 0
    if weights is not None:
        total = float(np.sum(weights))
        if not 2.0**-512 < total < 2.0**512:
            # Only relative weights matter: rescale them by a power of two (exact) so the power
            # sums, which grow with the total weight, stay far from float64's limits.
            weights = np.ldexp(weights, -math.frexp(total)[1])
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        shift = _shift_estimate(values, weights)
        sums = None
        if math.isfinite(shift):
            candidate = _power_sums(values, weights, 0, shift, 0, order)
            if _acceptable(candidate, order, values):
                sums = candidate
        if sums is None:
            pre = _exponent_to_unit(float(np.max(np.abs(values))))
            shift = weighted_mean(values, weights, pre)
            post = _exponent_to_unit(_blocked_abs_max(values, pre, shift))
            sums = _power_sums(values, weights, pre, shift, post, order)
    centre = float(sums[1] / sums[0])
    mean = math.ldexp(shift + math.ldexp(centre, -post), -pre)
    return CentralSums(
        mean=float(mean),
        sums=_recentre(sums),
        pre_exponent=pre,
        shift=shift,
        post_exponent=post,
        centre=centre,
    )


@dataclass(frozen=True)
class RowSums:
    """:func:`row_central_sums`: per row, what :func:`central_sums` gives on its one-pass path."""

    mean: np.ndarray  # (rows,)
    shift: np.ndarray  # (rows,)
    centre: np.ndarray  # (rows,)
    sums: np.ndarray  # (order + 1, rows), re-centred
    accepted: np.ndarray  # (rows,) bool: False where central_sums would take its two-pass path

    def of(self, row: int) -> CentralSums:
        """Row ``row`` as :func:`central_sums` returns it (for an accepted row)."""
        return CentralSums(
            mean=float(self.mean[row]), sums=self.sums[:, row].copy(), shift=float(self.shift[row]),
            centre=float(self.centre[row]),
        )


def _accurate_rows(sums: np.ndarray, order: int, constant: np.ndarray) -> np.ndarray:
    """:func:`_accurate` of each column of ``sums`` (the logarithm by ``math.log10``, as there)."""
    weight, first, second = sums[0], sums[1], sums[2]
    finite = np.all(np.isfinite(sums), axis=0)
    mean_square = second / weight
    delta = first / weight
    close = ~(delta * delta > _MAX_SHIFT_ERROR**2 * mean_square)
    positive = finite & (second > 0.0)
    inside = np.zeros(sums.shape[1], dtype=bool)
    inside[positive] = [
        abs(order * 0.5 * math.log10(x)) <= _MAX_POWER_EXPONENT for x in mean_square[positive].tolist()
    ]
    return finite & np.where(second > 0.0, close & inside, constant)


# Longest rows :func:`row_central_sums` takes: central_sums sums them in one block.
ROW_SUMS_AT_MOST = _BLOCK


def row_power_sums(rows: np.ndarray, order: int, out: np.ndarray, shift: np.ndarray) -> None:
    """The one-pass power sums of :func:`central_sums` for each row of unit weights of a
    C-contiguous rows x n array (``n <= ROW_SUMS_AT_MOST``), by the same operations in the same
    order: the shift from the same strided subsample, the deviations, the powers built one
    product at a time and each row's pairwise sums (numpy sums a contiguous row of a 2-D array
    as it sums a 1-D one). Written into ``out`` (``max(order, 2) + 1`` x rows, about the shift,
    not yet re-centred) and ``shift`` (rows); :func:`finish_row_sums` completes them, for rows of
    any lengths at once."""
    order = max(order, 2)
    count, n = rows.shape
    assert n <= ROW_SUMS_AT_MOST
    step = max(1, n // _SHIFT_SAMPLE)
    out[0] = float(n)
    # Rows a block at a time, so the deviations and powers stay in cache and their buffers are
    # reused (each row's numbers do not depend on which rows share its block).
    block = max(1, _BLOCK // n)
    deviations = np.empty((min(block, count), n))
    power = np.empty_like(deviations)
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        for start in range(0, count, block):
            stop = min(start + block, count)
            part = rows[start:stop]
            d, p = deviations[: stop - start], power[: stop - start]
            sample = part if step == 1 else np.ascontiguousarray(part[:, ::step])
            shift[start:stop] = sample.sum(axis=1) / sample.shape[1]
            np.subtract(part, shift[start:stop, None], out=d)
            out[1, start:stop] = d.sum(axis=1) + 0.0
            np.multiply(d, d, out=p)
            out[2, start:stop] = p.sum(axis=1) + 0.0
            for j in range(3, order + 1):
                np.multiply(p, d, out=p)
                out[j, start:stop] = p.sum(axis=1) + 0.0


def finish_row_sums(sums: np.ndarray, shift: np.ndarray, order: int, constant: np.ndarray) -> RowSums:
    """:func:`central_sums`' acceptance test and re-centring (:func:`_recentre`, column-wise) of
    power sums from :func:`row_power_sums`. ``constant``: per row, whether its values all equal
    the first. Rows the one-pass path does not accept (``accepted`` False) must be given to
    :func:`central_sums` itself."""
    order = max(order, 2)
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        accepted = np.isfinite(shift) & _accurate_rows(sums, order, constant)
        centre = sums[1] / sums[0]
        mean = shift + centre
        return RowSums(mean=mean, shift=shift, centre=centre, sums=_recentre(sums), accepted=accepted)


def row_central_sums(rows: np.ndarray, order: int, constant: np.ndarray) -> RowSums:
    """:func:`central_sums` of each row of unit weights of a C-contiguous rows x n array
    (``n <= ROW_SUMS_AT_MOST``), all rows at once, bit for bit (:func:`row_power_sums`, then
    :func:`finish_row_sums`)."""
    sums = np.empty((max(order, 2) + 1, rows.shape[0]))
    shift = np.empty(rows.shape[0])
    row_power_sums(rows, order, sums, shift)
    return finish_row_sums(sums, shift, order, constant)
