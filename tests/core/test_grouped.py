"""Binned counts (grouped data): textbook examples, the midpoint equivalence, Sheppard's corrections.

Grouped formulas assume the values are spread evenly within each bin: the median and quantiles
interpolate linearly inside the bin holding p N, the grouped mode interpolates within the modal
class, and moments read every bin at its midpoint.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, UncomputableInput, describe, from_bins, from_table

MOMENT_NAMES = (
    "mean",
    "variance",
    "standard_deviation",
    "coefficient_of_variation",
    "skewness",
    "kurtosis",
    "excess_kurtosis",
)


def bins(edges, counts, **options):
    return describe(from_bins(list(edges), list(counts)), DescribeOptions(**options), kind="bins")


def codes(description) -> set[str]:
    return {note.code for note in description.warnings}


def quantile(description, p: float) -> float | None:
    return next(q.value for q in description.quantiles if q.probability == p)


# ---------------------------------------------------------------------------------------------
# (a) published grouped examples
# ---------------------------------------------------------------------------------------------

# NCERT, Mathematics - Textbook for Class X, chapter "Statistics" (median of grouped data):
# heights (cm) of 51 students, given there as a "less than" cumulative table
# (< 140: 4, < 145: 11, < 150: 29, < 155: 40, < 160: 46, < 165: 51). The book's median is
# 145 + (51/2 - 11) / 18 * 5 = 149.03.
HEIGHT_EDGES = [None, 140, 145, 150, 155, 160, 165]
HEIGHT_COUNTS = [4, 7, 18, 11, 6, 5]


def test_ncert_heights_grouped_median():
    result = bins(HEIGHT_EDGES, HEIGHT_COUNTS)
    assert result.size.n == 51
    assert abs(result.descriptors["median"].value - 149.03) <= 0.005
    assert result.descriptors["median"].value == pytest.approx(145 + (25.5 - 11) / 18 * 5, rel=1e-15)


def test_ncert_heights_open_bin_blocks_moments_but_not_closed_bin_quantiles():
    result = bins(HEIGHT_EDGES, HEIGHT_COUNTS)
    (note,) = [n for n in result.warnings if n.code == "open_bin_holds_data"]
    for name in MOMENT_NAMES:
        assert result.descriptors[name].value is None, name
        assert name in note.descriptors
    assert result.moments is None
    assert result.tail_contributions is None
    rows = result.shape_estimators.skewness + result.shape_estimators.excess_kurtosis
    assert all(row.value is None for row in rows)
    # p N = 0.51 and 2.55 lie in the open bin (< 140 holds 4): unknown, with a warning.
    assert quantile(result, 0.01) is None and quantile(result, 0.05) is None
    assert "quantile_in_open_bin" in codes(result)
    # Closed bins, by hand: L + (p N - C_before) / f * h.
    by_hand = {
        0.1: 140 + (5.1 - 4) / 7 * 5,
        0.25: 145 + (12.75 - 11) / 18 * 5,
        0.5: 145 + (25.5 - 11) / 18 * 5,
        0.75: 150 + (38.25 - 29) / 11 * 5,
        0.9: 155 + (45.9 - 40) / 6 * 5,
        0.95: 160 + (48.45 - 46) / 5 * 5,
        0.99: 160 + (50.49 - 46) / 5 * 5,
    }
    for p, expected in by_hand.items():
        assert quantile(result, p) == pytest.approx(expected, rel=1e-13), p
    iqr = by_hand[0.75] - by_hand[0.25]
    assert result.descriptors["interquartile_range"].value == pytest.approx(iqr, rel=1e-12)
    grouping = result.grouping
    assert grouping.open_lower and not grouping.open_upper
    assert grouping.open_bin_weight == 4.0
    assert grouping.lowest_edge is None and grouping.highest_edge == 165.0
    assert grouping.bin_width == 5.0 and grouping.equal_widths


def test_ncert_family_size_grouped_mode():
    # Value recalled from the textbook, arithmetic re-checked here: NCERT Class X, "Statistics",
    # mode of grouped data, family sizes 1-3, 3-5, 5-7, 7-9, 9-11 with 7, 8, 2, 2, 1 families:
    # mode = l + (f1 - f0) / (2 f1 - f0 - f2) h = 3 + (8 - 7) / (16 - 7 - 2) * 2 = 3.286.
    result = bins([1, 3, 5, 7, 9, 11], [7, 8, 2, 2, 1])
    assert result.modes.values == [pytest.approx(3 + 2 / 7, rel=1e-15)]
    assert abs(result.modes.values[0] - 3.286) <= 0.0005
    (modal,) = result.grouping.modal_classes
    assert (modal.lower, modal.upper, modal.count) == (3.0, 5.0, 8.0)
    assert modal.grouped_mode == result.modes.values[0]


def test_ncert_marks_grouped_mean():
    # Value recalled from the textbook, arithmetic re-checked here: NCERT Class X, "Statistics",
    # mean of grouped data, marks 10-25, ..., 85-100 with 2, 3, 7, 6, 6, 6 students:
    # sum f x / sum f = (2*17.5 + 3*32.5 + 7*47.5 + 6*62.5 + 6*77.5 + 6*92.5) / 30 = 1860 / 30 = 62.
    result = bins([10, 25, 40, 55, 70, 85, 100], [2, 3, 7, 6, 6, 6])
    assert (2 * 17.5 + 3 * 32.5 + 7 * 47.5 + 6 * 62.5 + 6 * 77.5 + 6 * 92.5) == 1860.0
    assert result.descriptors["mean"].value == pytest.approx(62.0, rel=1e-14)
    assert result.descriptors["mean"].estimator == "mean of bin midpoints"


# ---------------------------------------------------------------------------------------------
# (b) bins read at their midpoints == the table of midpoints
# ---------------------------------------------------------------------------------------------


def _random_bins(seed: int):
    rng = np.random.default_rng(seed)
    k = int(rng.integers(4, 30))
    edges = np.cumsum(np.concatenate(([rng.normal(50.0, 20.0)], rng.uniform(0.5, 7.0, size=k))))
    counts = rng.integers(0, 40, size=k).astype(np.float64)
    counts[int(rng.integers(0, k))] += 1.0  # never all zero
    return edges, counts


def _assert_moments_match(binned, tabled, sd: float, families=("g1", "G1", "b1", "g2", "G2", "b2")) -> None:
    # The coefficient of variation is left out on purpose: for bins its ratio-scale check looks at
    # the lowest edge holding data, which may be negative while every midpoint is positive.
    for name in ("mean", "variance", "standard_deviation", "skewness", "kurtosis", "excess_kurtosis"):
        a, b = binned.descriptors[name].value, tabled.descriptors[name].value
        assert a is not None and b is not None, name
        assert a == pytest.approx(b, rel=1e-12, abs=1e-12 * (sd if name == "mean" else 1.0)), name
    for field in ("raw", "central", "standardized"):
        mine, theirs = getattr(binned.moments, field), getattr(tabled.moments, field)
        assert len(mine) == len(theirs) == binned.moments.order
        for k, (a, b) in enumerate(zip(mine, theirs), start=1):
            if field == "standardized":
                scale = 1.0
            elif field == "central":
                scale = sd**k
            else:
                scale = max(sd, abs(tabled.descriptors["mean"].value)) ** k
            assert a == pytest.approx(b, rel=1e-12, abs=1e-12 * scale), (field, k)
    for family in ("skewness", "excess_kurtosis"):
        for a, b in zip(getattr(binned.shape_estimators, family), getattr(tabled.shape_estimators, family)):
            assert a.estimator == b.estimator
            if a.estimator in families:
                assert a.value is not None and b.value is not None
                assert a.value == pytest.approx(b.value, rel=1e-12, abs=1e-12), a.estimator


@pytest.mark.parametrize("seed", [3, 31, 314])
def test_bins_at_midpoints_equal_the_counts_table_of_midpoints(seed):
    edges, counts = _random_bins(seed)
    midpoints = 0.5 * edges[:-1] + 0.5 * edges[1:]
    binned = bins(edges, counts, moment_order=6)
    tabled = describe(
        from_table(midpoints, counts, probabilities=False, normalise=False),
        DescribeOptions(moment_order=6),
        kind="table",
    )
    assert binned.conventions.convention == tabled.conventions.convention == "sample"
    _assert_moments_match(binned, tabled, tabled.descriptors["standard_deviation"].value)
    assert binned.grouping.sheppard_correction_applied is False


@pytest.mark.parametrize("seed", [5, 55])
def test_bins_at_midpoints_equal_the_probability_table_of_midpoints(seed):
    edges, counts = _random_bins(seed)
    midpoints = 0.5 * edges[:-1] + 0.5 * edges[1:]
    binned = bins(edges, counts, convention="population")
    tabled = describe(
        from_table(midpoints, counts / counts.sum(), probabilities=True, normalise=False),
        DescribeOptions(),
        kind="table",
    )
    assert binned.conventions.convention == tabled.conventions.convention == "population"
    # A probability table has only the plug-in g1, g2 rows (no sample size for the corrected ones).
    sd = tabled.descriptors["standard_deviation"].value
    _assert_moments_match(binned, tabled, sd, families=("g1", "g2"))


# ---------------------------------------------------------------------------------------------
# (c) Sheppard's corrections (W. F. Sheppard, Proc. London Math. Soc. 29, 1898; Kendall & Stuart,
# The Advanced Theory of Statistics, vol. 1, section 3.18): mu2 = m2 - h^2/12,
# mu4 = m4 - h^2 m2 / 2 + 7 h^4 / 240. For the normal with h = 0.5 the corrections are exact up
# to terms of order exp(-2 pi^2 sigma^2 / h^2) ~ 1e-34, far below float64 resolution.
# ---------------------------------------------------------------------------------------------

NORMAL_EDGES = np.linspace(-12.0, 12.0, 49)  # width 0.5


def _normal_bin_probabilities() -> np.ndarray:
    # Exact bin probabilities from scipy.stats.norm (1.17.1): differences of cdf below 0 and of
    # sf above 0, so that no tail bin loses its digits to cancellation against 1.
    cdf, sf = stats.norm.cdf(NORMAL_EDGES), stats.norm.sf(NORMAL_EDGES)
    return np.where(NORMAL_EDGES[1:] <= 0.0, np.diff(cdf), sf[:-1] - sf[1:])


def test_sheppard_corrections_recover_the_normal_moments():
    probabilities = _normal_bin_probabilities()
    corrected = bins(NORMAL_EDGES, probabilities, convention="population", sheppard_correction=True)
    assert corrected.grouping.sheppard_correction_applied is True
    assert corrected.grouping.bin_width == 0.5
    assert corrected.descriptors["variance"].value == pytest.approx(1.0, abs=1e-9)
    assert corrected.moments.central[1] == pytest.approx(1.0, abs=1e-9)
    assert corrected.moments.central[3] == pytest.approx(3.0, abs=1e-9)
    assert "Sheppard" in corrected.conventions.central_moments
    # Without the correction the midpoints overstate the variance by h^2 / 12 (and m4 accordingly).
    raw = bins(NORMAL_EDGES, probabilities, convention="population")
    assert raw.grouping.sheppard_correction_applied is False
    assert raw.descriptors["variance"].value == pytest.approx(1.0 + 0.25 / 12.0, abs=1e-9)


def test_sheppard_uncorrected_fourth_moment_of_binned_normal():
    # The midpoint moments of the binned normal: m2 = 1 + h^2/12 and m4 = 3 + h^2/2 + h^4/80
    # (invert Sheppard's formulas at mu2 = 1, mu4 = 3: m4 = mu4 + h^2 m2 / 2 - 7 h^4 / 240).
    h = 0.5
    m2 = 1.0 + h * h / 12.0
    m4 = 3.0 + h * h * m2 / 2.0 - 7.0 * h**4 / 240.0
    assert m4 == pytest.approx(3.0 + h * h / 2.0 + h**4 / 80.0, rel=1e-15)
    raw = bins(NORMAL_EDGES, _normal_bin_probabilities(), convention="population")
    assert raw.moments.central[1] == pytest.approx(m2, abs=1e-9)
    assert raw.moments.central[3] == pytest.approx(m4, abs=1e-9)


def test_sheppard_corrected_excess_kurtosis_of_the_binned_normal_is_zero():
    # The same bins as counts of a large sample (probabilities x 1e6), so the shape descriptors
    # have an n to work with; under the population convention g2 = mu4 / mu2^2 - 3 = 0.
    counts = _normal_bin_probabilities() * 1e6
    result = bins(NORMAL_EDGES, counts, convention="population", sheppard_correction=True)
    assert result.descriptors["excess_kurtosis"].value == pytest.approx(0.0, abs=1e-9)
    assert result.descriptors["skewness"].value == pytest.approx(0.0, abs=1e-9)
    assert result.descriptors["variance"].value == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize(
    ("edges", "counts"),
    [
        (np.linspace(0.0, 30.0, 7), [4.0, 18.0, 30.0, 21.0, 9.0, 3.0]),
        (np.linspace(-2.5, 2.5, 11), [1.0, 3.0, 7.0, 12.0, 17.0, 16.0, 11.0, 6.0, 2.0, 1.0]),
        (np.array([10.1, 10.4, 10.7, 11.0]), [5.0, 2.0, 4.0]),
    ],
)
def test_sheppard_corrected_variance_is_s2_minus_h2_over_12_in_exact_arithmetic(edges, counts):
    """Issue 15 regression: under the sample convention the corrected variance is the unbiased
    grouped form s^2 - h^2/12 (Kendall & Stuart vol. 1, section 3.18), not (m2 - h^2/12) N/(N - 1);
    the population form m2 - h^2/12 is unchanged. Reference: exact rational arithmetic
    (fractions.Fraction of the float64 edges and counts)."""
    from fractions import Fraction

    exact_edges = [Fraction(float(e)) for e in edges]
    exact_counts = [Fraction(float(c)) for c in counts]
    midpoints = [(a + b) / 2 for a, b in zip(exact_edges[:-1], exact_edges[1:])]
    width = exact_edges[1] - exact_edges[0]
    total = sum(exact_counts)
    mean = sum(c * x for c, x in zip(exact_counts, midpoints)) / total
    squares = sum(c * (x - mean) ** 2 for c, x in zip(exact_counts, midpoints))
    correction = width * width / 12
    sample = bins(edges, counts, sheppard_correction=True)
    population = bins(edges, counts, convention="population", sheppard_correction=True)
    assert sample.grouping.sheppard_correction_applied and population.grouping.sheppard_correction_applied
    s2_form = float(squares / (total - 1) - correction)
    assert sample.descriptors["variance"].value == pytest.approx(s2_form, rel=1e-13)
    assert sample.descriptors["standard_deviation"].value == pytest.approx(math.sqrt(s2_form), rel=1e-13)
    old_form = float((squares / total - correction) * total / (total - 1))
    assert abs(sample.descriptors["variance"].value - old_form) > 1e-6 * s2_form  # the two forms differ here
    assert population.descriptors["variance"].value == pytest.approx(float(squares / total - correction), rel=1e-13)
    # The central moments stay the plug-in corrected m2 - h^2/12 under either convention.
    for described in (sample, population):
        assert described.moments.central[1] == pytest.approx(float(squares / total - correction), rel=1e-13)
    assert "s^2 - h^2/12" in sample.descriptors["variance"].estimator


def test_sheppard_not_applicable_for_unequal_widths():
    edges, counts = [0.0, 1.0, 3.0, 4.0, 7.0], [2.0, 5.0, 3.0, 4.0]
    asked = bins(edges, counts, sheppard_correction=True)
    plain = bins(edges, counts)
    (note,) = [n for n in asked.warnings if n.code == "sheppard_not_applicable"]
    assert "variance" in note.descriptors
    assert asked.grouping.sheppard_correction_applied is False
    assert asked.grouping.equal_widths is False and asked.grouping.bin_width is None
    assert asked.descriptors["variance"].value == plain.descriptors["variance"].value
    assert asked.moments.central == plain.moments.central
    assert "Sheppard" not in asked.conventions.central_moments


def test_sheppard_not_applicable_when_bins_are_too_wide():
    # Two bins of width 10 one each: m2 = 25, m4 = 625; mu4 = 625 - 50*25 + 7e4/240 < 0.
    result = bins([0.0, 10.0, 20.0], [1.0, 1.0], convention="population", sheppard_correction=True)
    assert "sheppard_not_applicable" in codes(result)
    assert result.grouping.sheppard_correction_applied is False
    assert result.descriptors["variance"].value == 25.0


# ---------------------------------------------------------------------------------------------
# (d) grouped MAD and the modal class, by hand
# ---------------------------------------------------------------------------------------------


def test_grouped_median_absolute_deviation_by_hand():
    # Bins [0,1], [1,3], [3,6] with 3, 4, 3 counts: densities 3, 2, 1 per unit, N = 10.
    # Median: p N = 5 lies in [1, 3] after 3 counts -> 1 + (5 - 3)/4 * 2 = 2.
    # G(d) = F(2 + d) - F(2 - d): for d <= 1 both ends stay in [1, 3], G = 4 d (G(1) = 4 < 5);
    # for 1 < d <= 2 the left end enters [0, 1]: G = 2 + 3 (d - 1) + 2 + 1 (d - 1) = 4 + 4 (d - 1).
    # G = N/2 = 5 at d = 1.25. Check: [0.75, 3.25] holds 0.75 + 4 + 0.25 = 5 counts.
    result = bins([0, 1, 3, 6], [3, 4, 3])
    assert result.descriptors["median"].value == 2.0
    assert result.descriptors["median_absolute_deviation"].value == pytest.approx(1.25, rel=1e-15)
    assert result.descriptors["median_absolute_deviation_normal"].value == pytest.approx(
        1.25 * 1.482602218505602, rel=1e-15
    )


def test_grouped_mad_of_the_ncert_heights_by_hand():
    # Median m = 149.02777...; densities 3.6/cm in [145, 150], 2.2/cm in [150, 155], 1.4/cm in [140, 145].
    # For 150 - m < d <= m - 145: G(d) = 3.6 d + 3.6 (150 - m) + 2.2 (d - (150 - m)).
    # Beyond d = m - 145 the left end enters [140, 145]: G grows by (1.4 + 2.2) per unit of d.
    m = 145 + 14.5 / 18 * 5
    a, b = 150 - m, m - 145
    g_b = 3.6 * b + 3.6 * a + 2.2 * (b - a)
    assert g_b < 25.5
    mad = b + (25.5 - g_b) / (1.4 + 2.2)
    result = bins(HEIGHT_EDGES, HEIGHT_COUNTS)
    assert result.descriptors["median_absolute_deviation"].value == pytest.approx(mad, rel=1e-12)


def test_modal_class_with_unequal_widths_uses_densities():
    # Counts 10, 6, 8 in [0,10], [10,12], [12,16]: densities 1, 3, 2 per unit. By counts the modal
    # class would be [0, 10]; by density it is [10, 12], with grouped mode
    # L + (d1 - d0) / ((d1 - d0) + (d1 - d2)) h = 10 + 2 / (2 + 1) * 2 = 11.333...
    result = bins([0, 10, 12, 16], [10, 6, 8])
    (modal,) = result.grouping.modal_classes
    assert (modal.lower, modal.upper, modal.count) == (10.0, 12.0, 6.0)
    assert modal.grouped_mode == pytest.approx(10 + 4 / 3, rel=1e-15)
    assert result.modes.values == [pytest.approx(10 + 4 / 3, rel=1e-15)]


def test_all_counts_in_open_bins_are_rejected():
    with pytest.raises(UncomputableInput) as raised:
        from_bins([None, 0.0, 1.0, None], [3.0, 0.0, 4.0])
    assert raised.value.locations[0].path == "counts"


def test_all_counts_in_one_bin_give_unknown_spread_not_zero():
    """Regression: one occupied bin used to report variance 0 from its midpoint (a made-up zero)."""
    from tailgauge.core import DescribeOptions, describe, from_bins

    result = describe(from_bins([0.0, 1.0, 2.0], [5.0, 0.0]), DescribeOptions(), kind="bins")
    assert result.descriptors["variance"].value is None
    assert result.descriptors["median"].value == 0.5  # grouped median: half way through the bin
    single_bin = [w for w in result.warnings if w.code == "single_bin"]
    assert single_bin and "variance" in single_bin[0].descriptors


def test_grouping_reports_the_bins_as_sent_with_an_empty_open_bin():
    """Issue 15 regression: 4 bins whose open last bin is empty were reported as 3 closed bins.
    Reference: the request itself (4 counts, last edge null)."""
    upper = bins([0.0, 1.0, 2.0, 3.0, None], [1.0, 2.0, 3.0, 0.0]).grouping
    assert (upper.bins, upper.open_lower, upper.open_upper, upper.open_bin_weight) == (4, False, True, 0.0)
    both = bins([None, 0.0, 1.0, 2.0, 3.0, None], [0.0, 1.0, 2.0, 3.0, 0.0]).grouping
    assert (both.bins, both.open_lower, both.open_upper, both.open_bin_weight) == (5, True, True, 0.0)
    # The empty open bins hold nothing: every other answer is that of the closed bins alone.
    closed = bins([0.0, 1.0, 2.0, 3.0], [1.0, 2.0, 3.0])
    assert bins([0.0, 1.0, 2.0, 3.0, None], [1.0, 2.0, 3.0, 0.0]).descriptors == closed.descriptors
    assert closed.grouping.bins == 3 and not closed.grouping.open_upper


# ----------------------------------------------------------------------------------------------
# Bins at the edge of float64's range
# ----------------------------------------------------------------------------------------------

LARGEST = np.finfo(np.float64).max


def test_a_bin_wider_than_the_largest_float64_is_refused_at_its_edge():
    # 1e308 - (-1e308) = 2e308 is beyond float64 (about 1.8e308): no width, midpoint spread or density.
    with pytest.raises(UncomputableInput) as refused:
        from_bins([-1e308, 1e308, LARGEST], [1.0, 2.0])
    assert [location.path for location in refused.value.locations] == ["edges[1]"]
    assert "beyond the largest float64" in refused.value.locations[0].message
    with pytest.raises(UncomputableInput) as open_below:
        from_bins([None, -1e308, 1e308], [1.0, 2.0])
    assert [location.path for location in open_below.value.locations] == ["edges[2]"]


def test_equal_widths_near_the_largest_float64_stay_finite():
    # Two widths of exactly LARGEST (from -LARGEST to 0 to LARGEST): their sum overflows, their mean
    # does not. Reference: the width itself (both bins are LARGEST wide).
    with np.errstate(all="ignore"):  # the moments of such bins overflow and are reported null
        description = describe(from_bins([-LARGEST, 0.0, LARGEST], [3.0, 4.0]), DescribeOptions(), kind="bins")
    assert description.grouping.bin_width == LARGEST and description.grouping.equal_widths


# ---------------------------------------------------------------------------------------------
# (e) bins so narrow that a count over a width overflows float64
# ---------------------------------------------------------------------------------------------


def test_narrow_bins_give_the_by_hand_mad_and_mode_scaled_by_a_power_of_two():
    # The by-hand cases of (d) with edges times 2**-1000 and counts times 2**40: every count over
    # a width (about 1e12 / 1e-301) overflows float64, yet the MAD and the grouped mode are normal
    # numbers. Scaling by powers of two is exact, so the references are the hand values (1.25 and
    # 10 + 4/3 above) times 2**-1000, to rounding of the last digit. The test run turns numpy's
    # RuntimeWarnings into errors (pyproject filterwarnings): no overflow may be met on the way.
    scale, weight = 2.0**-1000, 2.0**40
    result = bins([e * scale for e in (0, 1, 3, 6)], [c * weight for c in (3, 4, 3)])
    assert result.descriptors["median"].value == 2.0 * scale
    assert result.descriptors["median_absolute_deviation"].value == pytest.approx(1.25 * scale, rel=1e-15)
    result = bins([e * scale for e in (0, 10, 12, 16)], [c * weight for c in (10, 6, 8)])
    (modal,) = result.grouping.modal_classes
    assert (modal.lower, modal.upper) == (10 * scale, 12 * scale)
    assert modal.grouped_mode == pytest.approx((10 + 4 / 3) * scale, rel=1e-15)
    assert "grouped_mode_undefined" not in codes(result)


def test_subnormal_bins_report_their_mad_as_not_representable_not_as_an_open_bin():
    # Widths of a few times 2**-1074 (the smallest subnormal): the MAD, 1.25 widths as in (d),
    # falls below float64's normal range and keeps almost none of its digits, so it is null with
    # not_representable (moments.scale_by_power_of_two's rule); there is no open bin to blame.
    tiny = 5e-324
    result = bins([0, 8 * tiny, 24 * tiny, 48 * tiny], [3, 4, 3])
    assert result.descriptors["median_absolute_deviation"].value is None
    reasons = {note.code for note in result.warnings if "median_absolute_deviation" in note.descriptors}
    assert reasons == {"not_representable"}
    # The mode's neighbours are known and do not tie: the grouped mode is given (10 + 4/3 units
    # of 8 tiny = 90.67 tiny, rounded to a whole number of tiny in the subnormal range).
    result = bins([0, 80 * tiny, 96 * tiny, 128 * tiny], [10, 6, 8])
    assert result.modes.values == [91 * tiny]
    assert "grouped_mode_undefined" not in codes(result)
