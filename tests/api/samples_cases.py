"""Invented data and small helpers shared by the samples endpoint's tests
(tests/api/test_samples*.py)."""

from __future__ import annotations

import numpy as np

PROBLEM = "application/problem+json"


def bag_weights() -> np.ndarray:
    """Invented data: net weights (g) of 250 g bags from the fictional Hollowfern Roastery's
    filling line, read to 0.1 g (so some weights repeat), with a few overfilled bags."""
    rng = np.random.default_rng(20240611)
    weights = rng.normal(251.2, 1.6, size=397)
    overfilled = rng.random(397) < 0.04
    weights[overfilled] += rng.exponential(6.0, size=int(overfilled.sum()))
    return np.round(weights, 1)


def value_of(body: dict, name: str):
    return body["descriptors"][name]["value"]
