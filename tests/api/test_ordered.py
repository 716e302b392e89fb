"""Ordered samples over HTTP: options.order "as_sent", the block options, size.effective_n, the
resampling member's block fields, and the serial_dependence warning (seeded AR(1) and iid data).

References: the lag-1 test's threshold z_{0.995} / sqrt(n) (scipy 1.17.1's norm.ppf, the
standard error 1/sqrt(n) of r1 under independence, Bartlett 1946); the AR(1) closed form of
the effective n, n (1 - phi) / (1 + phi), for a loose plausibility bound (the tight checks are
in tests/core/test_serial.py).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from tests.core.test_serial import ar1

TABLE = "/v1/descriptors/table"
INTERVAL = {"resamples": 999, "seed": 11}


def _series(phi: float, n: int = 400, seed: int = 3) -> list[float]:
    return [round(v, 6) for v in (ar1(phi, n, np.random.default_rng(seed)) * 12.0 + 180.0).tolist()]


def _codes(body) -> dict[str, list[str]]:
    return {w["code"]: w["descriptors"] for w in body["warnings"]}


def test_as_sent_resamples_blocks_and_reports_them(describe):
    values = _series(0.6)
    body = describe(values, order="as_sent", interval=INTERVAL)
    resampling = body["resampling"]
    assert resampling["block_scheme"] == "stationary"
    assert resampling["block_length_choice"] == "politis_white"
    assert 1.0 <= resampling["block_length"] <= np.ceil(3 * np.sqrt(400))
    assert "stationary bootstrap" in resampling["scheme"]
    assert resampling["method"] == "bca"  # as asked; each interval says percentile
    mean = body["descriptors"]["mean"]
    assert mean["interval"]["method"] == "percentile"
    assert mean["classical_interval"]["method"] == "student_t_effective_n"
    effective = body["size"]["effective_n"]
    # AR(1) with phi = 0.6: n (1 - phi) / (1 + phi) = 100; one series of 400 scatters widely.
    assert 40.0 < effective < 250.0
    low, high = mean["classical_interval"]["low"], mean["classical_interval"]["high"]
    # Its half-width is t_{n_eff - 1} s / sqrt(n_eff) (scipy's t quantile).
    sd = float(np.std(values, ddof=1))
    half = stats.t.ppf(0.975, effective - 1.0) * sd / np.sqrt(effective)
    assert (high - low) / 2.0 == pytest.approx(half, rel=1e-9)
    assert body["descriptors"]["variance"]["classical_interval"] is None
    codes = _codes(body)
    assert "mean" in codes["bca_fallback"]
    assert {"variance", "median", "quantiles"} <= set(codes["serial_dependence"])


def test_block_intervals_are_wider_than_independent_ones_on_ar1(describe):
    values = _series(0.6, n=800, seed=4)
    blocks = describe(values, order="as_sent", interval={**INTERVAL, "method": "percentile"})
    independent = describe(values, interval={**INTERVAL, "method": "percentile"})

    def width(body):
        interval = body["descriptors"]["mean"]["interval"]
        return interval["high"] - interval["low"]

    # The variance of the mean is about tau = 4 times the independent one: widths about 2 : 1.
    assert width(blocks) > 1.5 * width(independent)


@pytest.mark.parametrize(("scheme", "length"), [("circular", 12), ("moving", 12), ("stationary", 7.5)])
def test_given_scheme_and_length_are_used(describe, scheme, length):
    body = describe(_series(0.5), order="as_sent", block_scheme=scheme, block_length=length, interval=INTERVAL)
    assert body["resampling"]["block_scheme"] == scheme
    assert body["resampling"]["block_length"] == length
    assert body["resampling"]["block_length_choice"] == "given"


def test_same_seed_same_answer(describe):
    values = _series(0.3)
    first = describe(values, order="as_sent", interval=INTERVAL)
    assert describe(values, order="as_sent", interval=INTERVAL) == first


def test_unordered_answers_carry_null_block_members_and_effective_n(describe):
    body = describe(_series(0.0), interval=INTERVAL)
    assert body["size"]["effective_n"] is None
    assert body["resampling"]["block_scheme"] is None
    assert body["resampling"]["block_length"] is None
    assert body["resampling"]["block_length_choice"] is None
    ordered = describe(_series(0.0), order="as_sent")  # no intervals: effective n all the same
    assert ordered["size"]["effective_n"] is not None
    assert ordered.get("resampling") is None


def test_serial_dependence_warns_on_ar1_and_not_on_iid(describe):
    # r1 of AR(1) with phi = 0.5 and n = 400 is near 0.5, far beyond z_{0.995} / sqrt(400) = 0.129.
    dependent = describe(_series(0.5, seed=8), interval=INTERVAL)
    named = _codes(dependent)["serial_dependence"]
    assert {"mean", "variance", "median", "quantiles"} <= set(named)
    threshold = stats.norm.ppf(0.995) / np.sqrt(400)
    assert dependent["descriptors"]["lag1_autocorrelation"]["value"] > threshold
    for seed in range(5):  # iid normal data (seeded): |r1| stays within the threshold here
        independent = describe(_series(0.0, seed=seed), interval=INTERVAL)
        assert abs(independent["descriptors"]["lag1_autocorrelation"]["value"]) <= threshold
        assert "serial_dependence" not in _codes(independent)
    # Without intervals there is nothing to warn about.
    assert "serial_dependence" not in _codes(describe(_series(0.5, seed=8)))
    # Nor with order as_sent, where the intervals resample blocks (only the classical ones left out).
    ordered = describe(_series(0.5, seed=8), order="as_sent", interval=INTERVAL)
    assert "mean" not in _codes(ordered)["serial_dependence"]


@pytest.mark.parametrize(
    ("body", "status", "path"),
    [
        ({"values": [1.0, 2.0, 4.0], "weights": [1, 2, 1], "options": {"order": "as_sent"}}, 422, "$.options.order"),
        ({"values": [1.0, 2.0, 4.0], "options": {"block_scheme": "circular"}}, 422, "$.options.block_scheme"),
        ({"values": [1.0, 2.0, 4.0], "options": {"block_length": 2}}, 422, "$.options.block_length"),
        ({"values": [1.0, 2.0, 4.0], "options": {"order": "as_sent", "block_length": 4}}, 422, "$.options.block_length"),
        (
            {"values": [1.0, 2.0, 4.0, 3.0], "options": {"order": "as_sent", "block_scheme": "moving", "block_length": 2.5}},
            422,
            "$.options.block_length",
        ),
        ({"values": [1.0, 2.0, 4.0], "options": {"order": "as_sent", "block_length": 0.5}}, 400, "$.options.block_length"),
        ({"values": [1.0, 2.0, 4.0], "options": {"order": "backwards"}}, 400, "$.options.order"),
    ],
)
def test_bad_series_options_are_located(client, post_json, body, status, path):
    response, problem = post_json(client, body)
    assert response.status_code == status, problem
    assert path in [error["path"] for error in problem["errors"]]


def test_tables_have_no_order_option(client, post_json):
    response, problem = post_json(
        client, {"outcomes": [{"value": 1.0, "weight": 3}, {"value": 2.0, "weight": 4}], "weight_kind": "counts",
                 "options": {"order": "as_sent"}}, path=TABLE
    )
    assert response.status_code == 400
    assert problem["errors"][0]["path"] == "$.options.order"


def test_alternating_series_have_a_bounded_effective_n(describe):
    # Strongly alternating neighbours make tau tiny or negative: the effective n is held at
    # n log10 n (tau >= 1 / log10 n), and at n for ten values or fewer.
    alternating = [100.0 + (3.0 if i % 2 else -3.0) + 0.1 * (i % 7) for i in range(400)]
    body = describe(alternating, order="as_sent")
    assert body["size"]["effective_n"] == pytest.approx(400 * np.log10(400), rel=1e-12)
    assert describe([1.0, 2.0], order="as_sent")["size"]["effective_n"] == 2.0
