"""The shared held-out helper: folds, frozen estimators, weights, routing, X passed untouched."""

import numpy as np
import pytest
import sklearn
from scipy import sparse
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.feature_extraction.text import CountVectorizer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GroupKFold, KFold, StratifiedKFold, cross_val_predict
from sklearn.naive_bayes import MultinomialNB
from sklearn.pipeline import make_pipeline
from sklearn.svm import LinearSVC

from probwrap._heldout import HeldOutClassifierBase


class Collect(HeldOutClassifierBase):
    """Minimal wrapper that keeps the held-out predictions it was given."""

    def __init__(self, estimator=None, *, cv=5, n_jobs=None, random_state=None, response="auto"):
        self.estimator = estimator
        self.cv = cv
        self.n_jobs = n_jobs
        self.random_state = random_state
        self.response = response

    def fit(self, X, y, sample_weight=None, **fit_params):
        self.heldout_ = self._fit_heldout(X, y, sample_weight, fit_params, response=self.response)
        return self


class RecordingClassifier(ClassifierMixin, BaseEstimator):
    """Logistic regression that records what it was fitted on (to check what reaches it)."""

    def __init__(self, C=1.0):
        self.C = C

    def fit(self, X, y, sample_weight=None):
        self.seen_type_ = type(X)
        self.seen_weight_ = None if sample_weight is None else np.asarray(sample_weight).copy()
        self.model_ = LogisticRegression(C=self.C, max_iter=500).fit(X, y, sample_weight=sample_weight)
        self.classes_ = self.model_.classes_
        return self

    def predict_proba(self, X):
        return self.model_.predict_proba(X)

    def predict(self, X):
        return self.model_.predict(X)


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:, :8], y


def test_matches_cross_val_predict_with_the_same_folds(cancer):
    # Reference: scikit-learn's cross_val_predict with the same StratifiedKFold splits.
    X, y = cancer
    est = LogisticRegression(max_iter=2000)
    ho = Collect(est, cv=4, random_state=3).fit(X, y).heldout_
    splits = StratifiedKFold(4, shuffle=True, random_state=3)
    expected = cross_val_predict(est, X, y, cv=splits, method="predict_proba")
    np.testing.assert_allclose(ho.values, expected, rtol=1e-10)
    assert ho.n_folds == 4
    assert set(np.unique(ho.fold)) == {0, 1, 2, 3}
    for f, (_, test) in enumerate(splits.split(X, y)):
        assert np.all(ho.fold[test] == f)


def test_frozen_estimator_is_not_refitted_and_every_row_is_heldout(cancer):
    X, y = cancer
    base = LogisticRegression(max_iter=2000).fit(X[:300], y[:300])
    coef = base.coef_.copy()
    wrapper = Collect(FrozenEstimator(base)).fit(X[300:], y[300:])
    ho = wrapper.heldout_
    np.testing.assert_array_equal(base.coef_, coef)
    np.testing.assert_allclose(ho.values, base.predict_proba(X[300:]))
    assert ho.n_folds == 0 and np.all(ho.fold == -1)
    assert wrapper.estimator_ is wrapper.estimator


def test_frozen_estimator_rejects_unknown_labels(cancer):
    X, y = cancer
    base = LogisticRegression(max_iter=2000).fit(X, y)
    with pytest.raises(ValueError, match="`y` contains labels \\[7\\]"):
        Collect(FrozenEstimator(base)).fit(X[:20], np.where(np.arange(20) < 10, 7, 1))


def test_frozen_estimator_with_one_class_in_heldout_rows(cancer):
    X, y = cancer
    base = LogisticRegression(max_iter=2000).fit(X, y)
    with pytest.raises(ValueError, match="`y` contains only 1 class"):
        Collect(FrozenEstimator(base)).fit(X[y == 1][:30], y[y == 1][:30])


def test_sample_weight_reaches_estimator_and_final_fit(cancer):
    X, y = cancer
    w = np.linspace(0.5, 2.0, len(y))
    wrapper = Collect(RecordingClassifier(), cv=3, random_state=0).fit(X, y, sample_weight=w)
    np.testing.assert_allclose(wrapper.estimator_.seen_weight_, w)
    np.testing.assert_allclose(wrapper.heldout_.sample_weight, w)


def test_warns_when_estimator_ignores_weights():
    X, y = load_iris(return_X_y=True)

    class NoWeights(RecordingClassifier):
        def fit(self, X, y):
            return super().fit(X, y)

    w = np.where(np.arange(len(y)) % 2 == 0, 1.0, 2.0)
    with pytest.warns(UserWarning, match="does not accept sample_weight.*metadata routing"):
        Collect(NoWeights(), cv=3, random_state=0).fit(X, y, sample_weight=w)


def test_metadata_routing_sends_weights_only_when_requested(cancer):
    X, y = cancer
    w = np.linspace(0.5, 2.0, len(y))
    with sklearn.config_context(enable_metadata_routing=True):
        est = RecordingClassifier().set_fit_request(sample_weight=True)
        wrapper = Collect(est, cv=3, random_state=0).fit(X, y, sample_weight=w)
        np.testing.assert_allclose(wrapper.estimator_.seen_weight_, w)
        est = RecordingClassifier().set_fit_request(sample_weight=False)
        wrapper = Collect(est, cv=3, random_state=0).fit(X, y, sample_weight=w)
        assert wrapper.estimator_.seen_weight_ is None
        # the wrapper itself still uses the weights
        np.testing.assert_allclose(wrapper.heldout_.sample_weight, w)


def test_groups_are_routed_to_the_splitter(cancer):
    X, y = cancer
    groups = np.arange(len(y)) % 7
    with sklearn.config_context(enable_metadata_routing=True):
        wrapper = Collect(LogisticRegression(max_iter=2000), cv=GroupKFold(3)).fit(X, y, groups=groups)
    fold = wrapper.heldout_.fold
    for g in range(7):
        assert np.unique(fold[groups == g]).shape[0] == 1


def test_n_jobs_gives_the_same_predictions(cancer):
    X, y = cancer
    a = Collect(LogisticRegression(max_iter=2000), cv=3, random_state=1).fit(X, y).heldout_.values
    b = Collect(LogisticRegression(max_iter=2000), cv=3, random_state=1, n_jobs=2).fit(X, y).heldout_.values
    np.testing.assert_allclose(a, b)


def test_iterable_of_splits_and_partition_errors(cancer):
    X, y = cancer
    splits = list(KFold(3).split(X))
    ho = Collect(LogisticRegression(max_iter=2000), cv=splits).fit(X, y).heldout_
    assert ho.n_folds == 3
    bad = [(np.arange(100, len(y)), np.arange(100))]
    with pytest.raises(ValueError, match="`cv` must partition the rows"):
        Collect(LogisticRegression(), cv=bad).fit(X, y)
    with pytest.raises(ValueError, match="`cv` must be at least 2"):
        Collect(LogisticRegression(), cv=1).fit(X, y)


def test_class_missing_from_a_training_fold():
    X, y = load_iris(return_X_y=True)
    y = y.copy()
    y[0] = 3  # a class with a single row: absent from every training fold but one
    with pytest.warns(UserWarning):
        ho = Collect(LogisticRegression(max_iter=2000), cv=3, random_state=0).fit(X, y).heldout_
    assert ho.values.shape == (150, 4)
    np.testing.assert_allclose(ho.values.sum(axis=1), 1.0)
    # the fold that held out the lone row never saw class 3
    assert ho.values[0, 3] == 0.0


def test_decision_function_only_estimator(cancer):
    X, y = cancer
    from sklearn.preprocessing import StandardScaler

    est = make_pipeline(StandardScaler(), LinearSVC())
    ho = Collect(est, cv=3, random_state=0).fit(X, y).heldout_
    assert ho.response == "decision_function" and ho.values.shape == (len(y),)
    with pytest.raises(ValueError, match="has no predict_proba"):
        Collect(est, response="predict_proba").fit(X, y)


def test_x_passed_untouched_dataframe_sparse_text(cancer):
    pd = pytest.importorskip("pandas")
    X, y = cancer
    df = pd.DataFrame(X, columns=[f"f{i}" for i in range(X.shape[1])])
    wrapper = Collect(RecordingClassifier(), cv=3, random_state=0).fit(df, y)
    assert wrapper.estimator_.seen_type_ is pd.DataFrame
    Xs = sparse.csr_matrix(X)
    wrapper = Collect(RecordingClassifier(), cv=3, random_state=0).fit(Xs, y)
    assert sparse.issparse(wrapper.estimator_.seen_type_(np.eye(2))) or wrapper.estimator_.seen_type_ is type(Xs)
    texts = ["fragile glass parcel", "sturdy box", "fragile vase", "books in a box"] * 10
    labels = np.array([1, 0, 1, 0] * 10)
    pipe = make_pipeline(CountVectorizer(), MultinomialNB())
    ho = Collect(pipe, cv=2, random_state=0).fit(texts, labels).heldout_
    assert ho.values.shape == (40, 2)


def test_y_errors(cancer):
    X, y = cancer
    with pytest.raises(ValueError, match="requires y to be passed"):
        Collect(LogisticRegression()).fit(X, None)
    with pytest.raises(ValueError, match="only 1 class"):
        Collect(LogisticRegression()).fit(X, np.zeros(len(y)))
    with pytest.raises(ValueError, match="Unknown label type"):
        Collect(LogisticRegression()).fit(X, np.linspace(0, 1, len(y)))
    with pytest.raises(ValueError, match="`sample_weight` has 3 entries"):
        Collect(LogisticRegression()).fit(X, y, sample_weight=[1, 2, 3])


def test_a_class_too_rare_to_cross_fit_gives_an_error_naming_it_and_the_remedy():
    # One positive among 40 held-out rows of scikit-learn's breast-cancer set: the training part
    # of the fold holding it has no positive, and a logistic regression (here inside a
    # calibration wrapper, the common nesting) refuses to be fitted on one class. The error must
    # say so, name the rare class and its count and the remedies, not only repeat the inner
    # estimator's "only one class" from inside scikit-learn's fold loop.
    from probwrap import CalibrationWrapper, CostPolicyWrapper

    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y
    rows = np.r_[np.flatnonzero(y == 0)[:39], np.flatnonzero(y == 1)[:1]]
    est = CostPolicyWrapper(CalibrationWrapper(LogisticRegression(max_iter=5000)),
                            costs={"fn": 5, "fp": 1}, strategy="tuned")
    with pytest.warns(UserWarning, match="absent from the training part"):
        with pytest.raises(ValueError, match=r"Cross-fitting `estimator` \(CalibrationWrapper\) "
                           r"failed.*Rare classes: 1 \(1 row\(s\)\).*FrozenEstimator"):
            est.fit(X[rows], y[rows])
