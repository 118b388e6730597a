"""CalibrationWrapper: behaviour and agreement with scikit-learn's CalibratedClassifierCV."""

import pickle

import joblib
import numpy as np
import pytest
import sklearn
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer, load_digits, load_iris
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.model_selection import GridSearchCV, train_test_split
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC

from probwrap import CalibrationWrapper
from probwrap.calibration import IsotonicMap, PlattMap, TemperatureMap

SKLEARN_VERSION = tuple(int(p) for p in sklearn.__version__.split(".")[:2])


@pytest.fixture(scope="module")
def cancer_split():
    X, y = load_breast_cancer(return_X_y=True)
    return train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)


@pytest.fixture(scope="module")
def frozen_cancer(cancer_split):
    X_tr, X_cal, y_tr, y_cal = cancer_split
    base = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000)).fit(X_tr, y_tr)
    return base, X_cal, y_cal


def test_isotonic_matches_calibrated_classifier_cv_binary(frozen_cancer):
    # Reference: scikit-learn CalibratedClassifierCV(method="isotonic") on the same frozen model
    # and rows. For logistic regression its decision_function equals our log-odds of
    # predict_proba, and both interpolate linearly between the isotonic fitted points.
    # The plain fit (smooth_targets=False) is the like-for-like comparison.
    base, X, y = frozen_cancer
    ours = CalibrationWrapper(FrozenEstimator(base), method=IsotonicMap(smooth_targets=False))
    ours.fit(X, y)
    ref = CalibratedClassifierCV(FrozenEstimator(base), method="isotonic").fit(X, y)
    grid = np.vstack([X, X[:50] * 1.01])
    np.testing.assert_allclose(ours.predict_proba(grid), ref.predict_proba(grid), atol=1e-7)


def test_isotonic_matches_calibrated_classifier_cv_multiclass():
    # Reference: scikit-learn's one-vs-rest isotonic calibration with renormalisation (iris).
    # Configuration where both compute the same thing: GaussianNB has no decision_function, so
    # scikit-learn calibrates the predict_proba columns and we their one-vs-rest log-odds, a
    # strictly increasing transform of the same column. Isotonic regression is invariant to such a
    # transform at the fitted points, so on the calibration rows the fitted values, and after
    # renormalisation the probabilities, are the same up to rounding. (Between fitted points the
    # two interpolate on different scales, linear in p against linear in log-odds, so new rows
    # may differ; that is a choice, not an error.)
    X, y = load_iris(return_X_y=True)
    X_tr, X_cal, y_tr, y_cal = train_test_split(X, y, test_size=0.5, random_state=1, stratify=y)
    base = GaussianNB().fit(X_tr, y_tr)
    # scikit-learn fits the raw labels: compare with smooth_targets=False
    ours = CalibrationWrapper(FrozenEstimator(base), method=IsotonicMap(smooth_targets=False))
    ours.fit(X_cal, y_cal)
    ref = CalibratedClassifierCV(FrozenEstimator(base), method="isotonic").fit(X_cal, y_cal)
    p_ours = ours.predict_proba(X_cal)
    assert p_ours.shape == (75, 3)
    np.testing.assert_allclose(p_ours, ref.predict_proba(X_cal), rtol=0, atol=1e-12)


def test_platt_close_to_calibrated_classifier_cv_sigmoid(frozen_cancer):
    # Reference: scikit-learn's sigmoid calibration, which fits Platt (1999) with smoothed targets.
    # PlattMap also keeps its output within [floor_, 1 - floor_], floor_ = 1 / (N + 2): the
    # reference is scikit-learn's output moved into that range.
    base, X, y = frozen_cancer
    ours = CalibrationWrapper(FrozenEstimator(base), method=PlattMap()).fit(X, y)
    ref = CalibratedClassifierCV(FrozenEstimator(base), method="sigmoid").fit(X, y)
    floor = 1 / (len(y) + 2)
    assert ours.calibrator_.floor_ == pytest.approx(floor)
    expected = np.clip(ref.predict_proba(X), floor, 1 - floor)
    assert np.mean(ref.predict_proba(X) < floor) > 0.05  # the floor matters on these rows
    # Tolerance: both fit Platt's smoothed targets (N+ + 1) / (N+ + 2) and 1 / (N- + 2) by
    # minimising the same convex loss, stopping at their optimisers' tolerances (L-BFGS);
    # observed about 5e-9 with scikit-learn 1.9.
    np.testing.assert_allclose(ours.predict_proba(X), expected, rtol=0, atol=1e-6)


@pytest.mark.skipif(SKLEARN_VERSION < (1, 8), reason="temperature scaling arrived in scikit-learn 1.8")
def test_temperature_close_to_calibrated_classifier_cv_temperature():
    # Reference: scikit-learn's temperature scaling (Guo et al. 2017) on digits, 10 classes.
    X, y = load_digits(return_X_y=True)
    X_tr, X_cal, y_tr, y_cal = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    base = make_pipeline(StandardScaler(), LogisticRegression(C=10.0, max_iter=3000)).fit(X_tr, y_tr)
    # scikit-learn fits the raw labels: compare with smooth_targets=False
    ours = CalibrationWrapper(FrozenEstimator(base), method=TemperatureMap(shrinkage=0))
    ours.fit(X_cal, y_cal)
    ref = CalibratedClassifierCV(FrozenEstimator(base), method="temperature").fit(X_cal, y_cal)
    # Tolerance: the same one-parameter log-loss minimum, found by a root search here and by
    # scikit-learn's bounded scalar minimiser (xtol ~1e-8 on log beta); observed 1.2e-8 with
    # scikit-learn 1.9.
    np.testing.assert_allclose(ours.predict_proba(X_cal), ref.predict_proba(X_cal), rtol=0,
                               atol=1e-6)


def test_cross_fitted_matches_manual_held_out_fit():
    # Cross-fitting: the map is fitted on the out-of-fold predictions and the final model is
    # refitted on all rows. Reference: the same computed by hand with scikit-learn pieces.
    from sklearn.isotonic import IsotonicRegression
    from sklearn.model_selection import StratifiedKFold, cross_val_predict

    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :6]
    est = LogisticRegression(max_iter=3000)
    ours = CalibrationWrapper(est, method=IsotonicMap(smooth_targets=False), cv=4, random_state=2)
    ours.fit(X, y)
    folds = StratifiedKFold(4, shuffle=True, random_state=2)
    oof = cross_val_predict(est, X, y, cv=folds, method="predict_proba")[:, 1]
    oof = np.clip(oof, 1e-12, 1 - 1e-12)
    iso = IsotonicRegression(out_of_bounds="clip").fit(np.log(oof / (1 - oof)), y)
    final = LogisticRegression(max_iter=3000).fit(X, y)
    p = np.clip(final.predict_proba(X)[:, 1], 1e-12, 1 - 1e-12)
    np.testing.assert_allclose(ours.predict_proba(X)[:, 1], iso.predict(np.log(p / (1 - p))), atol=1e-8)


def test_predict_is_argmax_and_classes_keep_labels():
    X, y = load_iris(return_X_y=True)
    labels = np.array(["setosa", "versicolor", "virginica"])[y]
    model = CalibrationWrapper(LogisticRegression(max_iter=2000), method="platt", random_state=0)
    model.fit(X, labels)
    assert list(model.classes_) == ["setosa", "versicolor", "virginica"]
    np.testing.assert_array_equal(model.predict(X), model.classes_[model.predict_proba(X).argmax(1)])


def test_auto_records_scores_and_prefers_simple_maps_on_small_data(frozen_cancer):
    base, X, y = frozen_cancer
    model = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(X, y)
    six = {"temperature", "platt", "beta", "binning", "isotonic", "venn_abers"}
    # every candidate is scored, or its note says why not (e.g. left out after the first fold)
    # (and, for two classes, the class shares as the reference every map is measured against)
    maps = set(model.method_scores_) - {"class_shares"}
    assert "class_shares" in model.method_scores_
    assert maps | set(model.method_notes_) == six
    assert all(
        "left out after fold" in model.method_notes_[nm] for nm in six - maps
    )
    best = min(model.method_scores_[nm][0] for nm in maps)
    chosen_loss, _ = model.method_scores_[model.method_]
    # one-standard-error rule (Breiman et al. 1984, common practice): within one SE of the best
    se_chosen = model.method_scores_[model.method_][1]
    assert chosen_loss - best <= se_chosen + 1e-12
    assert all(np.isfinite(v[0]) for v in model.method_scores_.values())


@pytest.mark.parametrize("kind", ["naive_bayes", "wide_decision_function"])
def test_auto_is_sound_where_choosing_is_hard(kind):
    # Few hundred held-out rows; base models with exact 0/1 outputs or very wide scores.
    X, y = load_breast_cancer(return_X_y=True)
    X_tr, X_rest, y_tr, y_rest = train_test_split(X, y, train_size=0.4, random_state=0, stratify=y)
    X_cal, X_te, y_cal, y_te = train_test_split(X_rest, y_rest, train_size=0.5, random_state=0, stratify=y_rest)
    if kind == "naive_bayes":
        base = GaussianNB().fit(X_tr, y_tr)
        raw = np.clip(base.predict_proba(X_te), 1e-15, 1)
        assert np.mean((base.predict_proba(X_te) == 0) | (base.predict_proba(X_te) == 1)) > 0.15
    else:
        base = make_pipeline(StandardScaler(), LinearSVC(C=1.0)).fit(X_tr, y_tr)
        svc = base[-1]
        svc.coef_ = svc.coef_ * 500.0  # scores in the thousands, same ranking
        svc.intercept_ = svc.intercept_ * 500.0
        assert np.abs(base.decision_function(X_te)).max() > 1000
        raw = None
    model = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(X_cal, y_cal)
    p = model.predict_proba(X_te)
    assert np.all(np.isfinite(p)) and np.all((p >= 0) & (p <= 1))
    cal_loss = log_loss(y_te, np.clip(p, 1e-15, 1))
    if raw is not None:
        assert cal_loss < log_loss(y_te, raw)
    assert cal_loss < 0.35


def test_venn_abers_interval_only_for_venn_abers(frozen_cancer):
    base, X, y = frozen_cancer
    va = CalibrationWrapper(FrozenEstimator(base), method="venn_abers").fit(X, y)
    iv = va.predict_proba_interval(X[:20])
    assert iv.shape == (20, 2) and np.all(iv[:, 0] <= iv[:, 1] + 1e-12)
    p = va.predict_proba(X[:20])[:, 1]
    assert np.all((p >= iv[:, 0] - 1e-12) & (p <= iv[:, 1] + 1e-12))
    iso = CalibrationWrapper(FrozenEstimator(base), method="isotonic").fit(X, y)
    assert not hasattr(iso, "predict_proba_interval")


def test_pickle_joblib_pipeline_gridsearch_dataframe(tmp_path):
    pd = pytest.importorskip("pandas")
    data = load_breast_cancer(as_frame=True)
    X, y = data.data.iloc[:, :6], data.target
    model = CalibrationWrapper(make_pipeline(StandardScaler(), LogisticRegression()), method="beta", cv=3, random_state=0)
    model.fit(X, y)
    assert list(model.feature_names_in_) == list(X.columns)
    p = model.predict_proba(X)
    np.testing.assert_array_equal(pickle.loads(pickle.dumps(model)).predict_proba(X), p)
    path = tmp_path / "model.joblib"
    joblib.dump(model, path)
    np.testing.assert_array_equal(joblib.load(path).predict_proba(X), p)
    assert isinstance(X, pd.DataFrame)
    search = GridSearchCV(
        CalibrationWrapper(LogisticRegression(max_iter=2000), cv=3, random_state=0),
        {"method": ["platt", "isotonic"]},
        scoring="neg_log_loss",
        cv=3,
    ).fit(X, y)
    assert search.best_params_["method"] in {"platt", "isotonic"}
    outer = make_pipeline(StandardScaler(), CalibrationWrapper(LogisticRegression(), method="platt", cv=3))
    assert outer.fit(X, y).predict_proba(X).shape == (len(y), 2)


def test_multiclass_decision_function_estimator():
    X, y = load_digits(return_X_y=True)
    model = CalibrationWrapper(make_pipeline(StandardScaler(), LinearSVC(C=0.01)), method="platt", cv=3, random_state=0)
    p = model.fit(X, y).predict_proba(X)
    assert model.response_ == "decision_function"
    np.testing.assert_allclose(p.sum(axis=1), 1.0)
    assert np.mean(model.predict(X) == y) > 0.9


def test_weights_equal_duplicated_rows_with_fixed_folds(frozen_cancer):
    base, X, y = frozen_cancer
    w = np.random.RandomState(0).randint(0, 4, size=len(y))
    for method in ["platt", "isotonic", "beta", "temperature", "binning", "venn_abers"]:
        a = CalibrationWrapper(FrozenEstimator(base), method=method).fit(X, y, sample_weight=w)
        b = CalibrationWrapper(FrozenEstimator(base), method=method).fit(np.repeat(X, w, axis=0), np.repeat(y, w))
        np.testing.assert_allclose(a.predict_proba(X), b.predict_proba(X), atol=1e-7, err_msg=method)


def test_bad_arguments(frozen_cancer):
    base, X, y = frozen_cancer
    with pytest.raises(ValueError, match="`method` must be one of"):
        CalibrationWrapper(FrozenEstimator(base), method="sigmoidal").fit(X, y)
    with pytest.raises(ValueError, match="`candidates` must be"):
        CalibrationWrapper(FrozenEstimator(base), candidates=["platt", "spline"]).fit(X, y)
    with pytest.raises(ValueError, match="`clip` must be"):
        CalibrationWrapper(FrozenEstimator(base), method="platt", clip=0.7).fit(X, y)
    with pytest.raises(ValueError, match="`sample_weight` is zero for every row"):
        CalibrationWrapper(FrozenEstimator(base), method="platt").fit(X, y, sample_weight=np.zeros(len(y)))
    from sklearn.exceptions import NotFittedError

    with pytest.raises(NotFittedError):
        CalibrationWrapper(FrozenEstimator(base)).predict_proba(X)


def test_inputs_not_modified(frozen_cancer):
    base, X, y = frozen_cancer
    X0, y0, w = X.copy(), y.copy(), np.linspace(1, 2, len(y))
    w0 = w.copy()
    CalibrationWrapper(FrozenEstimator(base), method="isotonic").fit(X, y, sample_weight=w)
    np.testing.assert_array_equal(X, X0)
    np.testing.assert_array_equal(y, y0)
    np.testing.assert_array_equal(w, w0)


def test_map_instance_is_cloned(frozen_cancer):
    base, X, y = frozen_cancer
    template = IsotonicMap()
    model = CalibrationWrapper(FrozenEstimator(base), method=template).fit(X, y)
    assert not hasattr(template, "classes_")
    assert model.method_ == "IsotonicMap"


def test_auto_leaves_one_vs_rest_beta_out_for_multiclass_models_unless_named():
    # one-vs-rest beta is not a default candidate for multiclass models (a quarter of auto's
    # time, rarely chosen: docs/calibration.md, "Speed"); method_notes_ says so, and named in
    # `candidates` it is scored as before
    X, y = load_iris(return_X_y=True)
    base = GaussianNB().fit(X[::2], y[::2])
    auto = CalibrationWrapper(FrozenEstimator(base), random_state=0).fit(X[1::2], y[1::2])
    assert "beta" not in auto.method_scores_
    assert "not a default candidate for multiclass models" in auto.method_notes_["beta"]
    assert {"temperature", "platt", "vector_scaling"} <= set(auto.method_scores_)
    named = CalibrationWrapper(
        FrozenEstimator(base), random_state=0, candidates=["temperature", "beta"]
    ).fit(X[1::2], y[1::2])
    # tried: scored, or (here: iris's setosa is separable) not eligible after its fold fit
    assert "beta" in named.method_scores_ or "fold 0" in named.method_notes_["beta"]


def test_auto_leaves_venn_abers_out_on_large_heldout_sets():
    from sklearn.datasets import make_classification

    X, y = make_classification(22_000, n_features=5, random_state=0)
    base = LogisticRegression().fit(X[:2000], y[:2000])
    model = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0).fit(X, y)
    assert "venn_abers" not in model.method_scores_
    assert {"platt", "isotonic"} <= set(model.method_scores_) | set(model.method_notes_)
    small = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0)
    small.fit(X[:600], y[:600])
    assert "venn_abers" in set(small.method_scores_) | set(small.method_notes_)
    mid = CalibrationWrapper(FrozenEstimator(base), method="auto", random_state=0)
    assert "venn_abers" not in mid.fit(X[:3000], y[:3000]).method_scores_
    chosen = CalibrationWrapper(
        FrozenEstimator(base), method="auto", candidates=["platt", "venn_abers"], random_state=0
    ).fit(X, y)
    # 22,000 rows: scored on a sample of 20,000 (method_notes_["auto"] says so)
    assert "sample of 20000 of 22000 rows" in chosen.method_notes_["auto"]
    assert (set(chosen.method_scores_) | set(chosen.method_notes_)) - {"auto", "class_shares"} == {
        "platt",
        "venn_abers",
    }
