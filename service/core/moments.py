"""Accurate weighted power sums about the mean, and the moments derived from them.

The sums are computed in blocks that stay in cache, about a shift close to the mean, and
re-centred exactly afterwards (the "shifted data" algorithm; Chan, Golub & LeVeque, "Algorithms
for computing the sample variance", The American Statistician 37, 1983, section 3). When the
shift turns out to be poor, or the powers would overflow or underflow float64 (data of
magnitude 1e150, or spreads near the subnormal range), the data are recomputed in two passes
with exact power-of-two scaling, so every standardized moment stays finite and accurate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

_BLOCK = 1 << 16
_SHIFT_SAMPLE = 1024
# Accept the one-pass shift only while it is within this many standard deviations of the
# mean: the re-centring then loses at most a factor (1 + 0.1)^order of precision.
_MAX_SHIFT_ERROR = 0.1
# Keep rms**order inside float64's normal range with a wide margin.
_MAX_POWER_EXPONENT = 280.0


@dataclass(frozen=True)
class CentralSums:
    """Weighted sums of powers of the deviations from the mean, in units of ``scale``.

    ``sums[j] = sum_i w_i ((x_i - mean) / scale)**j`` for ``j = 0 .. order``; ``sums[0]`` is
    the total weight and ``sums[1]`` is zero. ``scale`` is a power of two chosen so the sums
    are representable; the central moment of order ``j`` is ``scale**j * sums[j] / sums[0]``.
    """

    mean: float
    scale: float
    sums: np.ndarray

    @property
    def total_weight(self) -> float:
        return float(self.sums[0])

    @property
    def order(self) -> int:
        return int(self.sums.size - 1)

    def scaled_central_moment(self, order: int) -> float:
        """Central moment of ``order`` divided by ``scale**order`` (always representable)."""
        return float(self.sums[order] / self.sums[0])

    def central_moment(self, order: int) -> float:
        """Plug-in central moment (divisor: total weight); NaN when float64 cannot hold it."""
        return _rescale(self.scaled_central_moment(order), self.scale, order)

    def standardized_moment(self, order: int) -> float:
        """``m_order / m_2**(order/2)``; NaN when the data have no spread."""
        m2 = self.scaled_central_moment(2)
        if m2 <= 0.0:
            return math.nan
        return self.scaled_central_moment(order) / m2 ** (order / 2)

    def raw_moment(self, order: int) -> float:
        """Plug-in raw moment ``E[x**order]``, from the central moments by the binomial theorem.

        Computed relative to ``R = max(|mean|, scale)`` so no intermediate overflows; the
        result is NaN only when the moment itself is beyond float64.
        """
        reference = max(abs(self.mean), self.scale)
        if reference == 0.0:
            return 0.0
        ratio_mean = self.mean / reference
        ratio_scale = self.scale / reference
        total = 0.0
        for j in range(order + 1):
            central = 1.0 if j == 0 else self.scaled_central_moment(j) * ratio_scale**j
            total += math.comb(order, j) * ratio_mean ** (order - j) * central
        return _rescale(total, reference, order)


def _rescale(scaled: float, scale: float, order: int) -> float:
    """``scaled * scale**order``, or NaN when that overflows or underflows float64.

    An underflow to zero (or into the subnormal range) of a non-zero moment would be a
    plausible-looking but wrong number, so it is reported as not representable too.
    """
    if scaled == 0.0:
        return 0.0
    exponent = math.log2(abs(scaled)) + order * math.log2(scale)
    if not -1021.0 < exponent < 1023.9:
        return math.nan
    # Multiplying one factor at a time moves monotonically from ``scaled`` to the result,
    # so no intermediate leaves the range the exponent check just confirmed.
    result = scaled
    for _ in range(order):
        result *= scale
    return result


def _power_sums(
    values: np.ndarray,
    weights: np.ndarray | None,
    pre_scale: float,
    shift: float,
    post_scale: float,
    order: int,
) -> np.ndarray:
    """``sums[j] = sum w ((x * pre_scale - shift) * post_scale)**j``, blocked to stay in cache."""
    n = values.size
    sums = np.zeros(order + 1)
    block = min(_BLOCK, n)
    deviation = np.empty(block)
    power = np.empty(block)
    for start in range(0, n, block):
        stop = min(start + block, n)
        size = stop - start
        d = deviation[:size]
        p = power[:size]
        chunk = values[start:stop]
        if pre_scale != 1.0:
            np.multiply(chunk, pre_scale, out=d)
            np.subtract(d, shift, out=d)
        else:
            np.subtract(chunk, shift, out=d)
        if post_scale != 1.0:
            np.multiply(d, post_scale, out=d)
        if weights is None:
            sums[0] += size
            np.copyto(p, d)
        else:
            w = weights[start:stop]
            sums[0] += w.sum()
            np.multiply(w, d, out=p)
        sums[1] += p.sum()
        for j in range(2, order + 1):
            np.multiply(p, d, out=p)
            sums[j] += p.sum()
    return sums


def _blocked_abs_max(values: np.ndarray, pre_scale: float, shift: float) -> float:
    result = 0.0
    for start in range(0, values.size, _BLOCK):
        chunk = values[start : start + _BLOCK] * pre_scale - shift
        result = max(result, float(np.max(np.abs(chunk))))
    return result


def _weighted_mean(values: np.ndarray, weights: np.ndarray | None, pre_scale: float) -> float:
    total = 0.0
    for start in range(0, values.size, _BLOCK):
        chunk = values[start : start + _BLOCK] * pre_scale
        if weights is None:
            total += float(chunk.sum())
        else:
            total += float(np.dot(weights[start : start + _BLOCK], chunk))
    weight = float(values.size) if weights is None else float(np.sum(weights))
    return total / weight


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


def _acceptable(sums: np.ndarray, order: int) -> bool:
    """Whether one-pass sums about a guessed shift are as accurate as the two-pass ones."""
    if not np.all(np.isfinite(sums)):
        return False
    weight, first, second = sums[0], sums[1], sums[2]
    if second <= 0.0:
        # Either constant data (then every deviation is zero) or squares that underflowed.
        return first == 0.0 and not np.any(sums[2:])
    mean_square = second / weight
    delta = first / weight
    if delta * delta > _MAX_SHIFT_ERROR**2 * mean_square:
        return False
    return abs(order * 0.5 * math.log10(mean_square)) <= _MAX_POWER_EXPONENT


def _recentre(sums: np.ndarray) -> np.ndarray:
    """Power sums about ``shift`` to power sums about the mean (binomial theorem)."""
    weight = sums[0]
    delta = sums[1] / weight
    centred = np.empty_like(sums)
    centred[0] = weight
    centred[1] = 0.0
    for k in range(2, sums.size):
        total = 0.0
        for j in range(k + 1):
            total += math.comb(k, j) * sums[j] * (-delta) ** (k - j)
        centred[k] = total
    return centred


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
    with np.errstate(over="ignore", invalid="ignore", under="ignore"):
        shift = _shift_estimate(values, weights)
        sums = None
        if math.isfinite(shift):
            candidate = _power_sums(values, weights, 1.0, shift, 1.0, order)
            if _acceptable(candidate, order):
                sums, pre_scale, post_scale = candidate, 1.0, 1.0
        if sums is None:
            magnitude = float(np.max(np.abs(values)))
            pre_scale = math.ldexp(1.0, -math.frexp(magnitude)[1]) if magnitude > 0.0 else 1.0
            shift = _weighted_mean(values, weights, pre_scale)
            spread = _blocked_abs_max(values, pre_scale, shift)
            post_scale = math.ldexp(1.0, -math.frexp(spread)[1]) if spread > 0.0 else 1.0
            sums = _power_sums(values, weights, pre_scale, shift, post_scale, order)
    delta = sums[1] / sums[0]
    mean = (shift + delta / post_scale) / pre_scale
    return CentralSums(mean=float(mean), scale=1.0 / (pre_scale * post_scale), sums=_recentre(sums))
