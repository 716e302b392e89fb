"""Rows of weights over the support (tailgauge.core.resample.rows), against per-row numpy."""

from __future__ import annotations

import numpy as np

from tailgauge.core.resample.rows import LeaveOneOut, Rows


def test_first_reaching_stays_in_its_row_for_every_target():
    # Reference: np.searchsorted on each row's own cumulative counts (written out per row).
    counts = np.array([[0, 2, 0, 1, 0, 0], [3, 0, 0, 0, 1, 0], [0, 0, 0, 0, 0, 4]])
    view = Rows(counts.astype(np.float64), None, True, counts)
    targets = np.array([[0.0, 0.5, 1.0, 2.0, 3.0, 3.0]] * 3)
    targets[1, 5] = 4.0
    targets[2, 4:] = [3.5, 4.0]
    got = view.first_reaching(targets)
    cumulative = np.cumsum(counts, axis=1)
    want = np.stack([np.minimum(np.searchsorted(cumulative[r], targets[r], side="left"), 5) for r in range(3)])
    assert np.array_equal(got, want)
    assert np.array_equal(view.cumulative_at(got), np.take_along_axis(cumulative, got, axis=1).astype(np.float64))
