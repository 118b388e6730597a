"""Prior-shift messages name classes by their labels, and the report shows a shrunk estimate
beside the maximum-likelihood one with the interval that belongs to it."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import BoundaryPriorWarning, PriorEstimator, bbse_prior


def gaussian(n, prevalence, rng, delta=0.9):
    y = (rng.uniform(size=n) < prevalence).astype(int)
    return rng.normal(size=(n, 1)) + delta * y[:, None], y


LABELS = np.array(["intact", "torn"])  # sorted: column 0 is "intact"


def test_boundary_warning_names_the_class_label():
    # The collapse draw of test_prior_shift_safety (weak model, 5 % prevalence, no shift; seed
    # 32): the maximum-likelihood share of the positive class is 0, so that of "intact" is 1.
    # With string labels the warning names "intact", not "class index 0".
    X_tr, y_tr = gaussian(20_000, 0.05, np.random.default_rng(0))
    model = FrozenEstimator(LogisticRegression().fit(X_tr, LABELS[y_tr]))
    rng = np.random.default_rng(32)
    X, y = gaussian(2000, 0.05, rng)
    X_new, _ = gaussian(2000, 0.05, rng)
    wrapper = PriorShiftWrapper(model, random_state=0).fit(X, LABELS[y])
    with pytest.warns(BoundaryPriorWarning) as record:
        wrapper.adapt(X_new)
    text = " ".join(str(r.message) for r in record if r.category is BoundaryPriorWarning)
    assert "class 'intact'" in text and "class index" not in text
    assert wrapper.prior_estimator_.class_names_ == ("intact", "torn")
    # the estimator on its own names columns by index unless given the labels
    proba = model.predict_proba(X)
    est = PriorEstimator(n_resamples=0).fit(proba, y)
    with pytest.warns(BoundaryPriorWarning, match="class index 0"):
        est.estimate(model.predict_proba(X_new))
    named = PriorEstimator(n_resamples=0).fit(proba, y, class_names=["ok", "damaged"])
    with pytest.warns(BoundaryPriorWarning, match="class 'ok'"):
        named.estimate(model.predict_proba(X_new))


def test_class_names_in_other_prior_messages():
    # a class with no labelled rows, and a column no unlabelled row is predicted as
    p = np.array([[0.7, 0.2, 0.1], [0.2, 0.7, 0.1], [0.6, 0.3, 0.1], [0.3, 0.6, 0.1]])
    with pytest.raises(ValueError, match="rows of class 'broken'"):
        PriorEstimator(n_resamples=0).fit(p, [0, 1, 0, 1], class_names=["ok", "dented", "broken"])
    with pytest.raises(ValueError, match="`class_names` must give one label per column"):
        PriorEstimator(n_resamples=0).fit(p, [0, 1, 2, 1], class_names=["ok", "dented"])
    confusion = np.array([[0.4, 0.1, 0.05], [0.05, 0.2, 0.05], [0.05, 0.0, 0.1]])
    with pytest.warns(UserWarning, match=r"Class\(es\) 'broken' get"):
        bbse_prior(p, confusion, confusion.sum(axis=0), class_names=["ok", "dented", "broken"])
    with pytest.warns(UserWarning, match=r"Class index\(es\) \[2\] get"):
        bbse_prior(p, confusion, confusion.sum(axis=0))


def _spector_and_heart():
    """statsmodels' spector (32 students, outcome: grade improved) and heart (69 transplant
    patients, outcome: died) data sets, each scored by a leave-one-out logistic regression
    on its own features (the sweep's score files; sweep_make_scorefiles.py)."""
    sm = pytest.importorskip("statsmodels.api")
    from sklearn.model_selection import LeaveOneOut, cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    def loo(X, y):
        lr = make_pipeline(StandardScaler(), LogisticRegression())
        return cross_val_predict(lr, np.asarray(X, float), np.asarray(y, int), cv=LeaveOneOut(),
                                 method="predict_proba")[:, 1]

    d = sm.datasets.spector.load_pandas().data
    y = np.asarray(d["GRADE"], int)
    p = loo(d[["GPA", "TUCE", "PSI"]], y)
    h = sm.datasets.heart.load_pandas().data
    q = loo(h[["age", "survival"]], h["censors"])
    return np.where(y == 1, "improved", "not improved"), p, q


def test_report_shows_the_shrunk_estimate_beside_the_interval_of_the_estimate(
        tmp_path, report_page_parser):
    # Two unrelated data sets (a strong "shift": prevalence 0.34 -> maximum likelihood 1.0 on 69
    # unlabelled rows). With 20 pseudo-rows toward 0.34 the shrunk estimate was 0.755, outside
    # the score interval of the maximum-likelihood estimate (about [0.81, 1]), and the report
    # said so. Since 4 December 2026 the pull fades with the evidence (the shift test rejects
    # strongly here) and the shrunk estimate stays inside that interval, which the report and
    # the library then both show (tests/test_prior_shift_strong_evidence.py).
    structure = report_page_parser
    from probwrap.report import write_report

    labels, p, q = _spector_and_heart()
    path = tmp_path / "r.html"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = write_report(path, y_true=labels, y_prob=p, unlabelled_prob=q,
                               class_names=["not improved", "improved"], n_resamples=50,
                               costs={"fp": 1.0, "fn": 5.0})
    page = structure._Page()
    page.feed(path.read_text(encoding="utf-8"))
    # consistency test: the same estimator on the same rows gives the numbers shown
    est = PriorEstimator(n_resamples=50).fit(np.column_stack([1 - p, p]),
                                             (labels == "improved").astype(int))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(np.column_stack([1 - q, q]))
    ml, shrunk = res.ml_prior[1], res.prior[1]
    lo, hi = res.ml_interval[1]
    assert ml > 0.999 and 0.75 < lo < 0.9  # the case described above
    assert structure._val(page.rows["target_ml"][0]) == pytest.approx(ml)
    assert structure._val(page.rows["target"][0]) == pytest.approx(shrunk)
    assert structure._val(page.rows["target_low"][0]) == pytest.approx(lo)
    assert structure._val(page.rows["target_high"][0]) == pytest.approx(hi)
    assert lo <= shrunk <= hi and shrunk > 0.8  # was 0.755, below the interval
    np.testing.assert_allclose(res.interval, res.ml_interval)  # nothing stretched
    assert res.pseudo_rows < 20
    assert "shrunk value lies outside the interval" not in page.text
    # the page says what happened instead: the pull faded to the estimator's pseudo-rows (the
    # sentence of a fixed pull that could no longer be true was removed, 4 December 2026)
    assert content.pseudo_rows == pytest.approx(res.pseudo_rows)
    assert f"as if {res.pseudo_rows:.2g} labelled rows at the source prevalence" in page.text
    assert "the pull faded with the evidence of a shift" in page.text
    assert "lies inside the interval" in page.text
    # the boundary note names the class by its label
    notes = " ".join(n.message for n in content.notes)
    assert "class 'not improved'" in notes and "class index" not in notes
