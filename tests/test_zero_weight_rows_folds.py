"""Rows of weight 0 carry no information (docs/weights.md): a wrapper fitted with some rows at
weight 0 is the wrapper fitted on the other rows, with groups, with folds given in ``cv`` and
for a model whose ``fit`` takes no ``sample_weight``; a class left with only rows of weight 0
is named (a warning, or an error where the model cannot be fitted without learning from them).

The reference in every cell is the same wrapper fitted on the rows of positive weight alone
(scikit-learn's bundled breast cancer and wine data), with the same groups, the same splitter
object, or the given folds restricted to those rows and renumbered. Before, the zero rows took
places in a group splitter's or a given splitter's draw, sat in the given folds' training
parts, and entered the final refit of a model without ``sample_weight`` at weight 1.
"""
import re
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GroupKFold, KFold, StratifiedKFold
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


def _rows(loader, seed, n=150):
    X, y = loader(return_X_y=True)
    rng = np.random.default_rng(seed)
    p = rng.permutation(len(y))
    X, y = X[p], y[p]
    zero = np.zeros(n, bool)
    zero[rng.choice(n, n // 10, replace=False)] = True
    return X[:n], y[:n], zero, X[n:]


def _fit(kind, model, X, y, w, X_new, cv, **fit_params):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if kind == "calibration":
            m = CalibrationWrapper(model, method="auto", cv=cv, random_state=0).fit(
                X, y, sample_weight=w, **fit_params)
            return m.method_, m.predict_proba(X_new), m.estimator_.predict_proba(X_new)
        if kind == "cost":
            m = CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned", cv=cv,
                                  random_state=0, n_resamples=20).fit(
                X, y, sample_weight=w, **fit_params)
            return m.cutoff_, m.predict_proba(X_new), m.estimator_.predict_proba(X_new)
        m = PriorShiftWrapper(model, cv=cv, random_state=0, n_resamples=20).fit(
            X, y, sample_weight=w, **fit_params).adapt(X_new)
        return m.target_prior_, m.predict_proba(X_new), m.estimator_.predict_proba(X_new)


def _same(a, b):
    if isinstance(a[0], str):
        assert a[0] == b[0]
    else:
        np.testing.assert_allclose(a[0], b[0], atol=1e-9)
    np.testing.assert_allclose(a[1], b[1], atol=1e-9)
    np.testing.assert_allclose(a[2], b[2], atol=1e-9)  # the refit model itself


def _loader(kind):
    return load_wine if kind == "calibration" else load_breast_cancer


KINDS = ["calibration", "cost", "prior"]


@pytest.mark.parametrize("kind", KINDS)
def test_groups_folds_drawn_on_weighted_rows(kind):
    """(b) GroupKFold balances the groups' row counts: drawn over all rows, the zero rows moved
    the weighted rows' groups to other folds."""
    X, y, zero, X_new = _rows(_loader(kind), 0)
    groups = np.arange(len(y)) // 5
    w = np.where(zero, 0.0, 1.0)
    got = _fit(kind, GaussianNB(), X, y, w, X_new, GroupKFold(3), groups=groups)
    ref = _fit(kind, GaussianNB(), X[~zero], y[~zero], None, X_new, GroupKFold(3),
               groups=groups[~zero])
    _same(got, ref)


@pytest.mark.parametrize("kind", KINDS)
def test_splitter_object_drawn_on_weighted_rows(kind):
    """(c) a splitter object given as ``cv`` draws its folds among the weighted rows, as it
    does for the rows dropped."""
    X, y, zero, X_new = _rows(_loader(kind), 1)
    w = np.where(zero, 0.0, 1.0)
    cv = StratifiedKFold(3, shuffle=True, random_state=4)
    _same(_fit(kind, GaussianNB(), X, y, w, X_new, cv),
          _fit(kind, GaussianNB(), X[~zero], y[~zero], None, X_new, cv))


def _given_folds(n, zero, k=3):
    pairs = list(KFold(k, shuffle=True, random_state=2).split(np.zeros((n, 1))))
    keep = np.flatnonzero(~zero)
    new_index = np.full(n, -1)
    new_index[keep] = np.arange(keep.size)
    renumbered = [(new_index[tr[~zero[tr]]], new_index[te[~zero[te]]]) for tr, te in pairs]
    return pairs, renumbered


@pytest.mark.parametrize("kind", KINDS)
def test_given_folds_lose_their_zero_rows(kind):
    """(c) folds given as (train, test) pairs: the zero rows leave every training part, so the
    fit equals the one on the other rows with the same folds renumbered."""
    X, y, zero, X_new = _rows(_loader(kind), 2)
    w = np.where(zero, 0.0, 1.0)
    pairs, renumbered = _given_folds(len(y), zero)
    _same(_fit(kind, GaussianNB(), X, y, w, X_new, pairs),
          _fit(kind, GaussianNB(), X[~zero], y[~zero], None, X_new, renumbered))


def test_given_fold_of_zero_rows_only_is_refused():
    X, y, zero, _ = _rows(load_breast_cancer, 3)
    w = np.ones(len(y))
    pairs = list(KFold(3).split(X))
    w[pairs[1][1]] = 0.0  # the second fold's held-out rows all weigh 0
    with pytest.raises(ValueError, match=r"Fold 2 of 3.*`sample_weight` 0"):
        CalibrationWrapper(GaussianNB(), method="platt", cv=pairs).fit(X, y, sample_weight=w)


def test_given_fold_training_part_of_one_weighted_class_is_refused():
    X, y, _, _ = _rows(load_breast_cancer, 3)
    n = len(y)
    third = np.arange(n) * 3 // n
    pairs = [(np.flatnonzero(third != i), np.flatnonzero(third == i)) for i in range(3)]
    w = np.ones(n)
    # the second fold's training part (thirds 1 and 3): weighted rows of class 1 only
    w[(third != 1) & (y == 0)] = 0.0
    with pytest.raises(ValueError, match=r"fold 2 of 3.*one class.*`sample_weight`"):
        CalibrationWrapper(GaussianNB(), method="platt", cv=pairs).fit(X, y, sample_weight=w)


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("cv", [3, "given"])
def test_model_without_weights_refit_on_weighted_rows(kind, cv):
    """(d) KNeighborsClassifier takes no sample_weight: the fold models were fitted without the
    zero rows but the final model with them, at weight 1 like every other row."""
    X, y, zero, X_new = _rows(_loader(kind), 4)
    scale = StandardScaler().fit(X)
    X, X_new = scale.transform(X), scale.transform(X_new)
    w = np.where(zero, 0.0, 1.0 + (np.arange(len(y)) % 3))  # unequal: the model is warned about
    w_ref = w[~zero]
    cv_z, cv_r = (cv, cv) if cv == 3 else _given_folds(len(y), zero)
    _same(_fit(kind, KNeighborsClassifier(15), X, y, w, X_new, cv_z),
          _fit(kind, KNeighborsClassifier(15), X[~zero], y[~zero], w_ref, X_new, cv_r))


def test_pipeline_with_step_weights_refit_on_weighted_rows():
    """(d) weights passed to a Pipeline's step by name: its scaler took the zero rows in the
    final refit (not in the fold models)."""
    X, y, zero, X_new = _rows(load_breast_cancer, 5)
    w = np.where(zero, 0.0, 1.0)
    pipe = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=5000))
    got = _fit("calibration", pipe, X, y, w, X_new, 3, logisticregression__sample_weight=w)
    ref = _fit("calibration", pipe, X[~zero], y[~zero], None, X_new, 3)
    _same(got, ref)


def test_cost_fixed_cutoff_refit_on_weighted_rows():
    """(d) the fixed-cutoff rule fits the model once on all rows: without the zero rows."""
    X, y, zero, X_new = _rows(load_breast_cancer, 6)
    w = np.where(zero, 0.0, 2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = CostPolicyWrapper(KNeighborsClassifier(15), strategy="fixed", cutoff=0.3).fit(
            X, y, sample_weight=w)
        ref = CostPolicyWrapper(KNeighborsClassifier(15), strategy="fixed", cutoff=0.3).fit(
            X[~zero], y[~zero], sample_weight=w[~zero])
    np.testing.assert_allclose(got.predict_proba(X_new), ref.predict_proba(X_new), atol=1e-12)


def _wine_class_weighted_zero(seed=7):
    X, y, _, X_new = _rows(load_wine, seed)
    X = StandardScaler().fit_transform(X)
    zero = y == 2
    zero[np.flatnonzero(y != 2)[::9]] = True  # and a few rows of the other classes
    return X, y, zero, X_new


@pytest.mark.parametrize("cv", [3, "splitter"])
def test_class_with_only_zero_rows_warns_and_other_rows_keep_their_folds(cv):
    """(a) class 2 weighs 0 everywhere: named in a warning and kept among classes_ (as a frozen
    model's class without held-out rows); the other rows' folds, the choice and the models are
    those of the rows dropped (GaussianNB gives the weightless class probability 0; its variance
    floor reads the X it is given, hence a tolerance)."""
    X, y, zero, X_new = _wine_class_weighted_zero()
    X_new = X[:20]  # rows on the fitted scale
    w = np.where(zero, 0.0, 1.0)
    splitter = 3 if cv == 3 else StratifiedKFold(3, shuffle=True, random_state=1)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        got = CalibrationWrapper(GaussianNB(), method="auto", cv=splitter, random_state=0).fit(
            X, y, sample_weight=w)
    assert any(re.search(r"class\(es\) 2 in `y` has `sample_weight` 0", str(c.message))
               for c in caught)
    assert not any("absent from the training part" in str(c.message) for c in caught)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = CalibrationWrapper(GaussianNB(), method="auto", cv=splitter, random_state=0).fit(
            X[~zero], y[~zero])
    assert list(got.classes_) == [0, 1, 2]
    assert got.method_ == ref.method_
    # the models (fitted with the class's rows at weight 0) are those of the rows dropped
    inner = got.estimator_.predict_proba(X_new)
    np.testing.assert_allclose(inner[:, :2], ref.estimator_.predict_proba(X_new), atol=1e-9)
    assert np.all(inner[:, 2] == 0)
    # the held-out predictions behind the choice: the weighted rows' folds and fold models are
    # those of the rows dropped (before, the class's zero rows took places in the draw)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ho_z = CalibrationWrapper(GaussianNB(), cv=splitter, random_state=0)._fit_heldout(
            X, y, w)
        ho_r = CalibrationWrapper(GaussianNB(), cv=splitter, random_state=0)._fit_heldout(
            X[~zero], y[~zero])
    np.testing.assert_array_equal(ho_z.fold[~zero], ho_r.fold)
    np.testing.assert_allclose(ho_z.values[~zero][:, :2], ho_r.values, atol=1e-9)
    # the map over three classes keeps its output floor for the weightless class (so the
    # wrapper's probabilities are not the two-class wrapper's: only its floor is left there)
    assert np.all(got.predict_proba(X_new)[:, 2] < 0.01)


def test_class_with_only_zero_rows_and_model_without_weights_is_refused():
    """(a) + (d): a model that takes no sample_weight could keep the class only by learning it
    from rows of weight 0; refused naming the class and `sample_weight`."""
    X, y, zero, _ = _wine_class_weighted_zero()
    w = np.where(zero, 0.0, 1.0)
    with pytest.raises(ValueError, match=r"class\(es\) 2.*`sample_weight` 0.*KNeighborsClassifier"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            CalibrationWrapper(KNeighborsClassifier(15), method="platt", cv=3).fit(
                X, y, sample_weight=w)


@pytest.mark.parametrize("given", [False, True])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_frozen_auto_scoring_folds_from_cv(given, seed):
    """(c) a frozen model: ``auto`` scores the candidate maps on folds drawn by the splitter
    given as ``cv`` among the weighted rows (before: over all rows), or on the folds given, where
    the zero rows weigh nothing."""
    from sklearn.frozen import FrozenEstimator

    X_all, y_all = load_breast_cancer(return_X_y=True)
    X_all = StandardScaler().fit_transform(X_all)
    rng = np.random.default_rng(seed)
    p = rng.permutation(len(y_all))
    X_all, y_all = X_all[p], y_all[p]
    X, y, X_new = X_all[:160], y_all[:160], X_all[320:]
    model = FrozenEstimator(LogisticRegression(C=0.3, max_iter=3000).fit(X_all[160:320],
                                                                         y_all[160:320]))
    zero = np.zeros(160, bool)
    zero[rng.choice(160, 16, replace=False)] = True
    w = np.where(zero, 0.0, 1.0)
    if given:
        cv_z, cv_r = _given_folds(len(y), zero)
    else:
        cv_z = cv_r = StratifiedKFold(3, shuffle=True, random_state=seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = CalibrationWrapper(model, method="auto", cv=cv_z).fit(X, y, sample_weight=w)
        ref = CalibrationWrapper(model, method="auto", cv=cv_r).fit(X[~zero], y[~zero])
    assert got.method_ == ref.method_
    np.testing.assert_allclose(got.predict_proba(X_new), ref.predict_proba(X_new), atol=1e-9)


def test_prior_shift_class_with_only_zero_rows_is_refused():
    """(a) for the prior: a class with no weighted row has no prior to estimate; refused
    naming the class (as before)."""
    X, y, zero, _ = _wine_class_weighted_zero()
    with pytest.raises(ValueError, match=r"no \(positively weighted\) rows of class 2"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            PriorShiftWrapper(GaussianNB(), cv=3, random_state=0).fit(
                X, y, sample_weight=np.where(zero, 0.0, 1.0))


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_auto_scoring_sample_drawn_among_weighted_rows(seed, monkeypatch):
    """Above ``_SELECTION_MAX_ROWS`` rows ``auto`` scores the candidates on a class-stratified
    sample; it is drawn among the weighted rows (before: over all rows, so the zero rows
    changed which weighted rows were drawn). The limit is lowered to 120 rows here to check
    the draw on 200 rows of breast cancer."""
    import probwrap._calibration_auto as auto

    monkeypatch.setattr(auto, "_SELECTION_MAX_ROWS", 120)
    X, y, zero, X_new = _rows(load_breast_cancer, seed, n=200)
    scale = StandardScaler().fit(X)
    X, X_new = scale.transform(X), scale.transform(X_new)
    w = np.where(zero, 0.0, 1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = CalibrationWrapper(GaussianNB(), method="auto", cv=3, random_state=0).fit(
            X, y, sample_weight=w)
        ref = CalibrationWrapper(GaussianNB(), method="auto", cv=3, random_state=0).fit(
            X[~zero], y[~zero])
    assert got.method_ == ref.method_
    # the candidates' cross-validated losses: scored on the same sampled rows
    for name, (loss, se) in ref.method_scores_.items():
        if name != "class_shares":
            np.testing.assert_allclose(got.method_scores_[name], (loss, se), atol=1e-9)
    np.testing.assert_allclose(got.predict_proba(X_new), ref.predict_proba(X_new), atol=1e-9)
