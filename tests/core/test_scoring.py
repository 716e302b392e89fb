"""Standard scores of values against one description (tailgauge.core.scoring).

References: scipy 1.17.1 ``stats.median_abs_deviation(scale="normal")``; the binomial variance
n p (1 - p) (Johnson, Kemp & Kotz, *Univariate Discrete Distributions*, 2005, ch. 3).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import DescribeOptions, describe, from_array, standardize
from tailgauge.core.scoring import standardized
from tests.core.comparison_cases import (  # noqa: F401 (two_samples is a fixture)
    table,
    two_samples,
)


def test_scores_equal_the_hand_formulas(two_samples):
    """z = (x - mean) / s (sample sd, numpy ddof=1); robust z = (x - median) / MAD_normal with
    scipy 1.17.1 stats.median_abs_deviation(scale="normal")."""
    before, _ = two_samples
    description = describe(from_array(before), DescribeOptions(), kind="samples")
    points = [240.0, 250.0, 251.5, 262.25]
    scores = standardize(description, points)
    mean, sd = before.mean(), before.std(ddof=1)
    median, mad = np.median(before), stats.median_abs_deviation(before, scale="normal")
    assert scores.warnings == []
    assert scores.mean == pytest.approx(mean, rel=1e-14)
    assert scores.standard_deviation == pytest.approx(sd, rel=1e-13)
    for x, score in zip(points, scores.points):
        assert score.value == x
        assert score.z == pytest.approx((x - mean) / sd, rel=1e-12, abs=1e-12)
        assert score.robust_z == pytest.approx((x - median) / mad, rel=1e-12, abs=1e-12)


def test_scores_against_a_probability_table_use_its_population_sd():
    binomial = table([0.0, 1.0, 2.0], [0.25, 0.5, 0.25], probabilities=True)
    scores = standardize(describe(binomial, DescribeOptions(), kind="table"), [2.0])
    # Binomial(2, 1/2): mean 1, variance n p (1 - p) = 0.5 (Johnson, Kemp & Kotz 2005, ch. 3).
    assert scores.points[0].z == pytest.approx(1.0 / math.sqrt(0.5), rel=1e-14)


def test_scores_of_degenerate_references_are_null_with_a_reason():
    constant = describe(from_array(np.full(8, 3.0)), DescribeOptions(), kind="samples")
    scores = standardize(constant, [1.0, 3.0])
    assert all(s.z is None and s.robust_z is None for s in scores.points)
    assert {tuple(n.descriptors) for n in scores.warnings if n.code == "score_undefined"} == {
        ("scores.z",), ("scores.robust_z",)
    }
    # More than half the values equal: MAD is zero while the sd is not.
    tied = describe(from_array(np.array([2.0, 2, 2, 2, 2, 5, 9])), DescribeOptions(), kind="samples")
    scores = standardize(tied, [4.0])
    assert scores.points[0].z is not None and scores.points[0].robust_z is None
    assert [n.descriptors for n in scores.warnings] == [["scores.robust_z"]]
    assert "zero" in scores.warnings[0].message
    # One observation: no sd at all.
    single = describe(from_array(np.array([4.0])), DescribeOptions(), kind="samples")
    assert standardize(single, [4.0]).points[0].z is None


def test_standardizing_in_halves_does_not_overflow_where_the_plain_formula_does():
    """(x - c) / s with x - c beyond float64's range but the ratio within it: 1e308 - (-1e308)
    overflows to inf; in halves, (5e307 + 5e307) / 5e307 = 2 exactly."""
    with np.errstate(over="ignore"):
        assert np.isinf((np.float64(1e308) - np.float64(-1e308)) / np.float64(1e308))
    assert standardized(np.float64(1e308), -1e308, 1e308) == 2.0
    # Elementwise on replicates, as the comparison's standardized quantiles use it.
    got = standardized(np.array([1.0, 3.0, 5.0]), np.array([1.0, 1.0, 1.0]), np.array([2.0, 2.0, 0.5]))
    np.testing.assert_array_equal(got, [0.0, 1.0, 8.0])


def test_a_score_beyond_float64_is_null_and_named():
    description = describe(from_array(np.array([1e-300, 2e-300, 4e-300])), DescribeOptions(), kind="samples")
    scores = standardize(description, [1e300, 1e-300])
    assert scores.points[0].z is None and scores.points[0].robust_z is None
    assert scores.points[1].z is not None and math.isfinite(scores.points[1].z)
    assert [(n.code, n.descriptors) for n in scores.warnings] == [("not_representable", ["scores.points[0]"])]
