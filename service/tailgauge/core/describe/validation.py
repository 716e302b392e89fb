"""The rules options and data must meet together, checked in one pass before anything is computed.

The data themselves were checked when they became a ``WeightedData`` (``tailgauge.core.weighted``:
lengths, finiteness, sums, edges); the schema checks each option alone. What is left lives here:
an option that does not apply to these data. Errors name the option by its logical field
(``options.convention``), or the data field at fault (``counts``); the edge makes JSON paths.
"""

from __future__ import annotations

from tailgauge.core.describe.basis import Basis, basis_of_data
from tailgauge.core.describe.options import DescribeOptions
from tailgauge.core.describe.tails import check_tail_options
from tailgauge.core.errors import UncomputableInput
from tailgauge.core.weighted import WeightedData, WeightMeaning


def check_description(data: WeightedData, options: DescribeOptions) -> Basis:
    """Check ``options`` against ``data`` and return the estimator basis they give.

    Raises
    ------
    UncomputableInput
        A probability table asked for the sample convention, a bias-corrected estimator or a
        quantile type beyond 1 and 2; an interval asked of a probability table, of data with no
        spread to resample (one observation, or every count in one bin), or of bins with
        fractional counts.
    """
    if data.meaning is WeightMeaning.PROBABILITY:
        _check_population_options(options)
    basis = basis_of_data(data, options)
    check_tail_options(data, options)
    if options.interval is not None:
        _check_interval(data, basis)
    _check_order(data, options)
    return basis


def _check_order(data: WeightedData, options: DescribeOptions) -> None:
    """options.order as_sent needs a series: unweighted values in the order observed; the block
    options apply only then, a block no longer than the series, whole for fixed-length blocks."""
    if options.order != "as_sent":
        for path, value in (("options.block_scheme", options.block_scheme), ("options.block_length", options.block_length)):
            if value is not None:
                raise UncomputableInput.at(path, 'applies only to a series sent with options.order "as_sent"')
        return
    if not data.ordered or data.weights is not None or data.binned:
        raise UncomputableInput.at(
            "options.order",
            "as_sent needs unweighted values in the order observed (a raw sample without weights)",
        )
    length = options.block_length
    if length is None:
        return
    if length > data.count:
        raise UncomputableInput.at(
            "options.block_length", f"at most the number of observations ({data.count})"
        )
    if (options.block_scheme or "stationary") != "stationary" and not float(length).is_integer():
        raise UncomputableInput.at(
            "options.block_length", f"{options.block_scheme} blocks have a whole number of observations"
        )


def _check_population_options(options: DescribeOptions) -> None:
    """A probability table is a whole distribution: only population estimators apply."""
    if options.convention == "sample":
        raise UncomputableInput.at(
            "options.convention",
            "a probability table is a whole distribution: its descriptors are population values",
        )
    for path, family, allowed in (
        ("options.skewness_estimator", options.skewness_estimator, "g1"),
        ("options.kurtosis_estimator", options.kurtosis_estimator, "g2"),
    ):
        if family not in (None, allowed):
            raise UncomputableInput.at(path, f"only {allowed} (the population value) applies to a probability table")
    if options.quantile_type not in (None, 1, 2):
        raise UncomputableInput.at(
            "options.quantile_type",
            "population quantiles come from the distribution function: use type 1 or 2",
        )


def _check_interval(data: WeightedData, basis: Basis) -> None:
    """What the bootstrap needs of the data: a sample, spread, and whole counts for bins."""
    if data.meaning is WeightMeaning.PROBABILITY:
        raise UncomputableInput.at(
            "options.interval",
            "a probability table is a whole population: its descriptors are exact and have no sampling interval",
        )
    if basis.single:
        raise UncomputableInput.at(
            "options.interval", "the data have no spread to resample (a single observation, or every count in one bin)"
        )
    if data.binned and not data.integer_weights:
        # Binned values are known only up to their bin: with fractional counts there is no
        # sample to redraw (entries of fractional weight are resampled only for exact values).
        raise UncomputableInput.at(
            "counts",
            "counts must be whole numbers to resample the bins",
            detail="bootstrap intervals for bins need whole counts",
        )
