"""Multicalibration (Hébert-Johnson, Kim, Reingold & Rothblum, ICML 2018): the guarantee of the
definition checked on the fitted rows, cell by cell, by a direct computation."""

from __future__ import annotations

import numpy as np
import pytest

from probwrap.calibration import MulticalibrationMap


def _data(n, seed):
    rng = np.random.default_rng(seed)
    size = rng.choice(["light", "medium", "heavy"], size=n)
    depot = rng.choice(["north", "south"], size=n)
    p = rng.uniform(0.02, 0.7, size=n)
    truth = np.clip(p + np.where(size == "heavy", 0.12, 0.0) - np.where(depot == "south", 0.05, 0)
                    , 0.01, 0.99)
    y = (rng.uniform(size=n) < truth).astype(int)
    return p, y, np.column_stack((size, depot)), truth


def test_every_checked_cell_within_alpha_on_fitted_rows():
    p, y, g, _ = _data(8000, 0)
    alpha, n_bins, min_share = 0.02, 10, 0.01
    m = MulticalibrationMap(alpha=alpha, n_bins=n_bins, min_share=min_share).fit(p, y, g)
    assert m.converged_
    q = m.predict(p, g)
    # the definition, directly: every (grouping, value, bin) cell and every bin's cell of all
    # rows with at least min_share of the rows has |mean(y - q)| <= alpha
    bins = np.minimum((q * n_bins).astype(int), n_bins - 1)
    masks = [bins == b for b in range(n_bins)]
    masks += [(bins == b) & (g[:, j] == v) for b in range(n_bins) for j in range(2)
              for v in np.unique(g[:, j])]
    checked = 0
    for mask in masks:
        if mask.sum() >= min_share * len(p):
            checked += 1
            assert abs(np.mean(y[mask] - q[mask])) <= alpha + 1e-12
    assert checked > 20
    # before: the heavy parcels were under-forecast by about 0.12 - 0.05 / 2 (half are
    # south) less the clipping, about 0.08 (SE of the mean about 0.008)
    heavy = g[:, 0] == "heavy"
    assert np.mean(y[heavy] - p[heavy]) > 0.05


def test_replay_on_new_rows_reduces_the_groups_gap():
    p, y, g, truth = _data(8000, 1)
    m = MulticalibrationMap(alpha=0.02).fit(p, y, g)
    p2, y2, g2, truth2 = _data(8000, 2)
    q2 = m.predict(p2, g2)
    heavy = g2[:, 0] == "heavy"
    # held out: the heavy parcels' mean residual shrinks from about 0.12 to well under 0.04
    # (sampling error of a cell mean here: about 0.01)
    assert abs(np.mean(y2[heavy] - q2[heavy])) < 0.04
    assert np.mean((q2 - truth2) ** 2) < np.mean((p2 - truth2) ** 2)


def test_bad_input():
    with pytest.raises(ValueError, match="`alpha`"):
        MulticalibrationMap(alpha=0).fit([0.2, 0.4], [0, 1], ["a", "b"])
    with pytest.raises(ValueError, match="`groups`"):
        MulticalibrationMap().fit([0.2, 0.4], [0, 1], ["a"])
    with pytest.raises(ValueError, match="not fitted"):
        MulticalibrationMap().predict([0.2], ["a"])
