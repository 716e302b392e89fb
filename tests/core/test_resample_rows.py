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


def test_weight_at_and_following_read_each_row():
    # Reference: the counts themselves, and the next position with a positive count (by hand).
    counts = np.array([[0, 2, 0, 1, 0, 0], [3, 0, 0, 0, 1, 0]])
    view = Rows(counts.astype(np.float64), None, True, counts)
    index = np.array([[1, 3], [0, 4]])
    assert view.weight_at(index).tolist() == [[2.0, 1.0], [3.0, 1.0]]
    following, held = view.following(index, view.cumulative_at(index))
    assert following[held].tolist() == [3, 4]  # row 0: after 1 comes 3; row 1: after 0 comes 4
    assert held.tolist() == [[True, False], [True, False]]


def test_leave_one_out_weights_lose_one_observation_at_their_own_position():
    base = np.array([2.0, 1.0, 3.0])
    view = LeaveOneOut(base, np.ones(3))
    index = np.tile(np.arange(3), (3, 1))
    assert view.weight_at(index).tolist() == [[1.0, 1.0, 3.0], [2.0, 0.0, 3.0], [2.0, 1.0, 2.0]]
    assert view.cumulative.tolist() == np.cumsum(view.weight_at(index), axis=1).tolist()
