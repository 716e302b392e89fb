"""describe.validation: every rule tying options to data is checked before anything is computed,
and each error names its logical field (the edge adds the JSON prefix)."""

from __future__ import annotations

import numpy as np
import pytest

from tailgauge.core import DescribeOptions, IntervalOptions, UncomputableInput, from_array, from_bins, from_table
from tailgauge.core.describe import basis_of_data, check_description

INTERVAL = IntervalOptions(method="bca", resamples=200, seed=1)
EDGES = [0.0, 1.0, 2.5, 4.0]


def _population():
    return from_table(np.array([1.0, 2.0, 3.0]), np.array([0.25, 0.5, 0.25]), probabilities=True, normalise=False)


@pytest.mark.parametrize(
    ("options", "path"),
    [
        (DescribeOptions(convention="sample"), "options.convention"),
        (DescribeOptions(skewness_estimator="G1"), "options.skewness_estimator"),
        (DescribeOptions(kurtosis_estimator="b2"), "options.kurtosis_estimator"),
        (DescribeOptions(quantile_type=7), "options.quantile_type"),
        (DescribeOptions(interval=INTERVAL), "options.interval"),
    ],
)
def test_a_population_refuses_sample_options(options, path):
    with pytest.raises(UncomputableInput) as raised:
        check_description(_population(), options)
    assert [location.path for location in raised.value.locations] == [path]
    assert raised.value.detail.startswith(f"{path}: ")


@pytest.mark.parametrize(
    ("data", "path", "detail"),
    [
        (from_array(np.array([3.0])), "options.interval", "options.interval: the data have no spread"),
        (from_bins(EDGES, [0.0, 4.0, 0.0]), "options.interval", "options.interval: the data have no spread"),
        (from_bins(EDGES, [1.5, 2.0, 1.0]), "counts", "bootstrap intervals for bins need whole counts"),
    ],
)
def test_intervals_need_a_sample_with_spread_and_whole_bin_counts(data, path, detail):
    with pytest.raises(UncomputableInput) as raised:
        check_description(data, DescribeOptions(interval=INTERVAL))
    assert [location.path for location in raised.value.locations] == [path]
    assert raised.value.detail.startswith(detail)
    # Without an interval the same data are described.
    check_description(data, DescribeOptions())


def test_valid_options_give_the_basis_of_the_data():
    data = from_bins(EDGES, [2.0, 5.0, 1.0])
    options = DescribeOptions(convention="population", interval=INTERVAL)
    basis = check_description(data, options)
    assert basis == basis_of_data(data, options)
    assert basis.population and basis.quantile_type is None and not basis.single
    one_bin = basis_of_data(from_bins(EDGES, [0.0, 3.0, 0.0]), DescribeOptions())
    assert one_bin.single and one_bin.single_bin
