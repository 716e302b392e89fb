"""How resamples are drawn (tailgauge.core.resample.draws): multinomial counts made of Poisson
counts topped up to n, and the fallback to direct counts.

References are named beside each check (scipy.stats.poisson and scipy.stats.binom). Every random
generator is seeded.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tailgauge.core import central_sums, from_array
from tailgauge.core.resample import draws
from tailgauge.core.resample.draws import draw, plan_of, poisson_edges, topped_up_counts
from tailgauge.core.resample.rows import Scratch


def _topped_up_plan(n: int):
    x = np.random.default_rng(5).normal(0.0, 1.0, n)
    data = from_array(x)
    plan, _ = plan_of(data, central_sums(data.values, None, 4))
    assert plan.poisson_edges is not None
    return plan


def test_poisson_edges_are_the_poisson_distribution_function_in_units_of_two_to_the_64():
    # Reference: scipy.stats.poisson.cdf, the definition of the edges.
    rate = 0.96
    edges = poisson_edges(rate)
    cdf = stats.poisson.cdf(np.arange(edges.size), rate)
    assert np.allclose(edges.astype(np.float64) / 2.0**64, cdf, rtol=0.0, atol=1e-15)
    assert np.all(np.diff(edges.astype(np.float64)) >= 0)
    assert stats.poisson.sf(edges.size, rate) < 2.0**-64


def test_topped_up_counts_are_multinomial():
    # Reference: the multinomial(n; 1/n, ...) laws, from scipy.stats.binom: each row sums to n,
    # one value's count is binomial(n, 1/n) and the count of the first half of the values is
    # binomial(n, 1/2) (Poisson counts without the top-up would have twice that variance).
    n, rows = 4096, 6000
    plan = _topped_up_plan(n)
    rng = np.random.default_rng(99)
    scratch = Scratch()
    blocks = [topped_up_counts(plan, rng, 500, scratch).astype(np.int64) for _ in range(rows // 500)]
    counts = np.concatenate(blocks)
    assert np.all(counts.sum(axis=1) == n)
    half = counts[:, : n // 2].sum(axis=1)
    assert stats.kstest(half, stats.binom(n, 0.5).cdf).pvalue > 1e-3
    assert np.var(half) == pytest.approx(n / 4.0, rel=0.08)
    one = counts[:, :64].ravel()  # 384,000 single-value counts
    observed = np.bincount(one, minlength=6)[:6].astype(np.float64)
    observed = np.append(observed, one.size - observed.sum())
    expected = stats.binom(n, 1.0 / n).pmf(np.arange(6)) * one.size
    expected = np.append(expected, one.size - expected.sum())
    assert stats.chisquare(observed, expected).pvalue > 1e-3


def test_draws_fall_back_to_direct_counts_when_topped_up_counts_decline(monkeypatch):
    # topped_up_counts returns None when a byte could have wrapped; _draw must then count
    # direct draws, still multinomial(n) (every row sums to n, weights equal counts).
    plan = _topped_up_plan(4096)
    monkeypatch.setattr(draws, "topped_up_counts", lambda *args: None)
    weights, counts = draw(plan, np.random.default_rng(3), 8, Scratch())
    assert np.all(counts.sum(axis=1) == 4096)
    assert np.array_equal(weights, counts.astype(np.float64))


def test_topped_up_counts_fit_in_bytes_for_large_samples():
    # A shortfall of about 4 sqrt(n) draws per row (1,000 at n = 65,536) spreads over the values.
    plan = _topped_up_plan(65_536)
    counts = topped_up_counts(plan, np.random.default_rng(3), 4, Scratch())
    assert counts.dtype == np.uint8
    assert np.all(counts.sum(axis=1, dtype=np.int64) == 65_536)
