"""Multiclass prior shift on Dask input (reductions over posterior blocks on a two-worker
LocalCluster) against the in-memory PriorShiftWrapper on the same rows."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper

# the tally / reduction path, also on few rows (conftest.py)
pytestmark = pytest.mark.usefixtures("tally_path")

da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("distributed")


def _data(n, seed, prior):
    rng = np.random.default_rng(seed)
    y = rng.choice(3, size=n, p=prior)
    centres = np.array([[0.0, 0.0], [1.5, 0.3], [0.4, 1.6]])
    X = centres[y] + rng.normal(size=(n, 2))
    return X, y


@pytest.fixture(scope="module")
def model():
    X, y = _data(3000, 0, [0.5, 0.3, 0.2])
    return FrozenEstimator(LogisticRegression(C=0.02).fit(X, y))  # shrunk: miscalibrated


@pytest.mark.parametrize("calibration", ["bcts", "vector", None])
@pytest.mark.parametrize("method", ["em", "bbse", "bbse_soft"])
def test_multiclass_dask_matches_in_memory(client, model, method, calibration):
    X, y = _data(12_000, 1, [0.5, 0.3, 0.2])
    X_new, _ = _data(8000, 2, [0.2, 0.3, 0.5])
    kw = dict(method=method, calibration=calibration, n_resamples=0)
    remote = PriorShiftWrapper(model, **kw).fit(
        da.from_array(X, chunks=(3000, 2)), da.from_array(y, chunks=3000)
    ).adapt(da.from_array(X_new, chunks=(2000, 2)))
    # consistency test: the in-memory path (PriorEstimator on all rows) on the same rows
    local = PriorShiftWrapper(model, **kw).fit(X, y).adapt(X_new)
    np.testing.assert_allclose(remote.source_prior_, local.source_prior_, atol=1e-12)
    np.testing.assert_allclose(remote.confusion_matrix_, local.confusion_matrix_, atol=1e-9)
    if calibration is not None:
        np.testing.assert_allclose(remote.calibrator_.scale_, local.calibrator_.scale_, atol=1e-6)
        np.testing.assert_allclose(remote.calibrator_.bias_, local.calibrator_.bias_, atol=1e-6)
    np.testing.assert_allclose(remote.target_prior_, local.target_prior_, atol=1e-6)
    assert remote.shift_statistic_ == pytest.approx(local.shift_statistic_, rel=1e-6)
    assert remote.target_prior_interval_ is None
    # the estimate moved towards the truth (0.2, 0.3, 0.5), away from the source (0.5, 0.3, 0.2)
    assert remote.target_prior_[2] > 0.4 and remote.target_prior_[0] < 0.3
    p = remote.predict_proba(da.from_array(X_new, chunks=(2000, 2)))
    assert isinstance(p, da.Array)
    np.testing.assert_allclose(p.compute(), local.predict_proba(X_new), atol=1e-5)


@pytest.mark.parametrize(("method", "tol"), [("temperature", 1e-9), ("platt", 1e-4),
                                             ("isotonic", 3e-3)])
def test_multiclass_calibration_on_dask(client, model, method, tol):
    from sklearn.metrics import log_loss

    from probwrap import CalibrationWrapper

    X, y = _data(12_000, 3, [0.5, 0.3, 0.2])
    Xd = da.from_array(X, chunks=(3000, 2))
    remote = CalibrationWrapper(model, method=method).fit(Xd, da.from_array(y, chunks=3000))
    local = CalibrationWrapper(model, method=method).fit(X, y)  # consistency: in memory, all rows
    p_remote = remote.predict_proba(Xd).compute()
    p_local = local.predict_proba(X)
    if method == "temperature":
        # same root of the same loss slope: the temperatures agree to the solver's tolerance
        assert remote.calibrator_.temperature_ == pytest.approx(
            local.calibrator_.temperature_, rel=1e-9
        )
        assert local.calibrator_.temperature_ < 0.95  # the shrunk model is under-confident
    elif method == "platt":
        # one-vs-rest Platt maps from tallies: scikit-learn's log_loss within 1e-4
        assert abs(log_loss(y, p_remote) - log_loss(y, p_local)) < tol
        # both paths share the one-vs-rest floor among the k - 1 = 2 other classes
        for r_map, l_map in zip(remote.calibrator_, local.calibrator_, strict=True):
            assert r_map.floor_ == pytest.approx(1 / ((12_000 + 2) * 2), rel=1e-12)
            assert l_map.floor_ == pytest.approx(1 / ((12_000 + 2) * 2), rel=1e-12)
    else:
        assert np.mean(np.abs(p_remote - p_local)) < tol
    np.testing.assert_allclose(p_remote, remote.predict_proba(X))


def test_multiclass_cost_policy_on_dask(client, model):
    from probwrap import CostPolicyWrapper

    X, y = _data(9000, 4, [0.5, 0.3, 0.2])
    w = np.random.default_rng(5).uniform(0.5, 1.5, size=y.shape[0])
    costs = np.array([[0.0, 4.0, 9.0], [1.0, 0.0, 3.0], [6.0, 2.0, 0.0]])
    Xd = da.from_array(X, chunks=(3000, 2))
    remote = CostPolicyWrapper(model, costs=costs).fit(
        Xd, da.from_array(y, chunks=3000), sample_weight=da.from_array(w, chunks=3000)
    )
    local = CostPolicyWrapper(model, costs=costs).fit(X, y, sample_weight=w)  # in memory
    assert remote.heldout_cost_ == pytest.approx(local.heldout_cost_, rel=1e-12)
    # direct reference: argmin of P @ C with the frozen model's scikit-learn predict_proba
    act = np.argmin(model.predict_proba(X) @ costs, axis=1)
    assert remote.heldout_cost_ == pytest.approx(np.dot(w, costs[y, act]) / w.sum(), rel=1e-12)
    np.testing.assert_array_equal(remote.predict(Xd).compute(), local.predict(X))
    with pytest.raises(ValueError, match="bayes"):
        CostPolicyWrapper(model, costs=costs, strategy="tuned").fit(Xd, da.from_array(y, chunks=3000))


def test_multiclass_dask_temperature_with_weights_summing_to_one(client, model):
    # weights that cannot be row frequencies (they sum to 1): both paths put them on Kish's
    # effective sample size for the prior's weight and the floor; consistency test against
    # the in-memory path on the same rows
    from probwrap import CalibrationWrapper
    from probwrap.calibration import WeightScaleWarning

    X, y = _data(6000, 4, [0.5, 0.3, 0.2])
    w = np.random.default_rng(4).uniform(0.5, 1.5, size=len(y))
    w = w / w.sum()
    chunks = 1500
    with pytest.warns(WeightScaleWarning):
        remote = CalibrationWrapper(model, method="temperature").fit(
            da.from_array(X, chunks=(chunks, 2)), da.from_array(y, chunks=chunks),
            sample_weight=da.from_array(w, chunks=chunks),
        )
    with pytest.warns(WeightScaleWarning):
        local = CalibrationWrapper(model, method="temperature").fit(X, y, sample_weight=w)
    kish = w.sum() ** 2 / (w @ w)
    # Krichevsky-Trofimov floor 1 / (2 (N + 1) (k - 1)) with N Kish's effective size
    assert remote.calibrator_.floor_ == pytest.approx(1 / (2 * (kish + 1) * 2), rel=1e-12)
    assert local.calibrator_.floor_ == pytest.approx(remote.calibrator_.floor_, rel=1e-12)
    assert remote.calibrator_.temperature_ == pytest.approx(
        local.calibrator_.temperature_, rel=1e-9
    )


def test_multiclass_dask_one_vs_rest_with_an_absent_class(client, model):
    # class 2 has no held-out row: it keeps the model's own probability (at least clip_), the
    # other classes share the rest; the same as in memory (consistency test)
    from probwrap import CalibrationWrapper
    from probwrap.calibration import IdentityMap

    X, y = _data(4000, 5, [0.5, 0.3, 0.2])
    keep = y != 2
    X, y = X[keep], y[keep]
    chunks = 1000
    with pytest.warns(UserWarning, match=r"class\(es\) \[2\].*model's own probability"):
        remote = CalibrationWrapper(model, method="platt").fit(
            da.from_array(X, chunks=(chunks, 2)), da.from_array(y, chunks=chunks)
        )
    with pytest.warns(UserWarning, match=r"class\(es\) \[2\].*model's own probability"):
        local = CalibrationWrapper(model, method="platt").fit(X, y)
    assert isinstance(remote.calibrator_[2], IdentityMap)
    assert isinstance(local.calibrator_[2], IdentityMap)
    own = model.predict_proba(X)[:, 2]
    p = remote.predict_proba(X)
    # the model's own probability, kept (above the clip, which the floor can only raise)
    keep_rows = own > 10 * remote.clip_
    np.testing.assert_allclose(p[keep_rows, 2], own[keep_rows], rtol=1e-9)
    # 1e-6 absolute: the Dask Platt fits see score tallies of resolution 1e-3 in log-odds
    np.testing.assert_allclose(p, local.predict_proba(X), atol=1e-6)
    assert p.min() > 0 and p.max() < 1


def test_multiclass_dask_uses_the_same_harm_cutoff_as_in_memory(client):
    # A weak three-class model with a small class: the max_harm rule raises the evidence cutoff
    # above min_evidence, on Dask input as in memory. Consistency test against the in-memory
    # wrapper on the same rows (same sums, so agreement to rounding; 1e-6 relative allows for
    # the order of the block sums and the EM / Newton tolerances). Plain EM took about 600
    # reductions per estimate here (half a minute on the cluster, so this test ran on Dask's
    # threaded scheduler); the SQUAREM-accelerated EM takes a few dozen, on the cluster.
    _check_harm_cutoff_on_dask()


def _check_harm_cutoff_on_dask():
    rng = np.random.default_rng(5)

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        X = np.array([[0.0, 0.0], [0.5, 0.1], [0.1, 0.5]])[y] + rng.normal(size=(n, 2))
        return X, y

    X_tr, y_tr = draw(20_000, [0.6, 0.37, 0.03])
    weak = FrozenEstimator(LogisticRegression().fit(X_tr, y_tr))
    X, y = draw(3000, [0.6, 0.37, 0.03])
    X_new, _ = draw(3000, [0.6, 0.35, 0.05])
    kw = dict(n_resamples=0)
    remote = PriorShiftWrapper(weak, **kw).fit(
        da.from_array(X, chunks=(1000, 2)), da.from_array(y, chunks=1000)
    ).adapt(da.from_array(X_new, chunks=(1000, 2)))
    local = PriorShiftWrapper(weak, **kw).fit(X, y).adapt(X_new)
    assert local.evidence_cutoff_ > 1.5  # the harm bound is what sets the cutoff here
    assert remote.prior_estimate_.null_harm_scale == pytest.approx(
        local.prior_estimate_.null_harm_scale, rel=1e-6
    )
    assert remote.evidence_cutoff_ == pytest.approx(local.evidence_cutoff_, rel=1e-6)
    assert remote.adaptation_weight_ == pytest.approx(local.adaptation_weight_, abs=1e-6)
    np.testing.assert_allclose(remote.applied_prior_, local.applied_prior_, atol=1e-6)
    # the accelerated EM runs on Dask too (plain EM: about 600 passes)
    assert remote.prior_estimate_.converged and remote.prior_estimate_.n_iter < 60
    # and max_harm=None falls back to min_evidence on both paths
    plain = PriorShiftWrapper(weak, max_harm=None, **kw).fit(
        da.from_array(X, chunks=(1000, 2)), da.from_array(y, chunks=1000)
    ).adapt(da.from_array(X_new, chunks=(1000, 2)))
    assert plain.evidence_cutoff_ == 1.0


@pytest.mark.parametrize("n_classes", [2, 3])
def test_few_labelled_rows_give_the_same_shift_test_on_dask(client, n_classes):
    # Consistency test: with 60 labelled rows the shift test's F reference (few rows: heavy
    # tails) is in play; the Dask fits (multiclass: reductions; binary: a tally of the scores)
    # give the in-memory p-value and statistic. Binary tolerance: the tally bins the log-odds
    # at width 1e-3, which moves the labelled rows' score moments by ~1e-4 relative.
    prior = [0.5, 0.3, 0.2]
    X, y = _data(60, 11, prior)
    X_new, _ = _data(4000, 12, prior)
    y = y if n_classes == 3 else np.minimum(y, 1)
    est = model_for(n_classes)
    remote = PriorShiftWrapper(est, n_resamples=0).fit(
        da.from_array(X, chunks=(30, 2)), da.from_array(y, chunks=30)
    ).adapt(da.from_array(X_new, chunks=(1000, 2)))
    local = PriorShiftWrapper(est, n_resamples=0).fit(X, y).adapt(X_new)
    tol = 1e-6 if n_classes == 3 else 2e-3
    assert remote.shift_pvalue_ == pytest.approx(local.shift_pvalue_, rel=tol)
    assert remote.shift_statistic_ == pytest.approx(local.shift_statistic_, rel=tol)
    assert remote.evidence_cutoff_ == pytest.approx(local.evidence_cutoff_, rel=tol)
    # and the F reference is what the test used: the p-value is above the chi-square one
    from scipy.stats import chi2

    from probwrap.shift._shift_tests import shift_score_test

    p_s = local.prior_estimator_.calibrate(est.predict_proba(X))
    p_t = local.prior_estimator_.calibrate(est.predict_proba(X_new))
    ref = shift_score_test(p_t, local.source_prior_, source_proba=p_s)
    assert local.shift_pvalue_ == pytest.approx(ref.pvalue, rel=1e-9)
    assert np.isfinite(ref.denominator_df)
    assert ref.pvalue > chi2.sf(ref.raw_statistic, n_classes - 1)


_MODELS: dict = {}


def model_for(n_classes):
    if n_classes not in _MODELS:
        X, y = _data(3000, 0, [0.5, 0.3, 0.2])
        y = y if n_classes == 3 else np.minimum(y, 1)
        _MODELS[n_classes] = FrozenEstimator(LogisticRegression(C=0.02).fit(X, y))
    return _MODELS[n_classes]


@pytest.mark.parametrize("kind", ["forest", "naive_bayes"])
@pytest.mark.parametrize("weights", ["none", "frequencies", "normalised"])
def test_multiclass_dask_chooses_the_in_memory_floor_before_logarithms(kind, weights):
    # the reductions run on Dask's threaded scheduler (same arithmetic; the cluster is
    # exercised by the other tests of this file)
    import dask

    with dask.config.set(scheduler="threads"):
        _check_floor_on_dask(kind, weights)


def _check_floor_on_dask(kind, weights):
    # Consistency test: the floor before logarithms (calibrator_.clip_) comes from per-block
    # reductions (smallest non-zero probability of the rows of positive weight; counts) and
    # equals the in-memory rule (probwrap.shift._calibration.heldout_clip). A fully grown
    # forest of 20 trees outputs exact 0 (smallest non-zero 1/20: floor 1/40); Gaussian naive Bayes on
    # well-separated classes outputs probabilities far below 1e-12, so the lower bound of half
    # the map's output floor, 1/(2 (N + 1) (k - 1)), is what binds. The old fixed 1e-12 floor
    # gives other log-probabilities and so another fitted scale (asserted below).
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.naive_bayes import GaussianNB

    from probwrap.shift._calibration import heldout_clip

    def draw(n, seed, prior):  # naive Bayes: classes far apart; forest: the usual overlap
        X, y = _data(n, seed, prior)
        return (X + 5.0 * np.array([[0.0, 0.0], [1.5, 0.3], [0.4, 1.6]])[y] if kind ==
                "naive_bayes" else X), y

    X_tr, y_tr = draw(3000, 21, [0.5, 0.3, 0.2])
    inner = (RandomForestClassifier(20, random_state=0) if kind == "forest"
             else GaussianNB()).fit(X_tr, y_tr)
    est = FrozenEstimator(inner)
    X, y = draw(900, 22, [0.5, 0.3, 0.2])
    X_new, _ = draw(3000, 23, [0.3, 0.3, 0.4])
    rng = np.random.default_rng(3)
    w = {"none": None,
         "frequencies": rng.integers(0, 3, size=X.shape[0]).astype(float),
         "normalised": rng.uniform(0.5, 1.5, size=X.shape[0])}[weights]
    if weights == "normalised":
        w = w / w.sum()  # sums to 1: Kish's effective size counts the rows
    kw = dict(n_resamples=0)
    remote = PriorShiftWrapper(est, **kw).fit(
        da.from_array(X, chunks=(300, 2)), da.from_array(y, chunks=300),
        sample_weight=None if w is None else da.from_array(w, chunks=300),
    ).adapt(da.from_array(X_new, chunks=(1000, 2)))
    local = PriorShiftWrapper(est, **kw).fit(X, y, sample_weight=w).adapt(X_new)
    p = inner.predict_proba(X)
    expected = heldout_clip(p, w)
    assert local.calibrator_.clip_ == pytest.approx(expected, rel=1e-12)
    # the minimum is exact; the Kish count may differ in the last bits (order of the sums)
    assert remote.calibrator_.clip_ == pytest.approx(expected, rel=1e-12)
    if kind == "forest":
        kept = p[(w if w is not None else np.ones(len(p))) > 0]
        assert expected == pytest.approx(0.5 * kept[kept > 0].min(), rel=1e-12)
    else:
        assert p.min() < 1e-12
        from probwrap.calibration._base import count_weights
        from probwrap.shift._calibration import _floor

        n_rows = count_weights(np.ones(len(p)) if w is None else w)[0].sum()
        assert expected == pytest.approx(0.5 * _floor(n_rows, 3), rel=1e-9)
    # same floor, same sums: the fit agrees to the Newton / EM tolerances (1e-6)
    np.testing.assert_allclose(remote.calibrator_.scale_, local.calibrator_.scale_, atol=1e-6)
    np.testing.assert_allclose(remote.calibrator_.bias_, local.calibrator_.bias_, atol=1e-6)
    np.testing.assert_allclose(remote.target_prior_, local.target_prior_, atol=1e-6)
    np.testing.assert_allclose(remote.predict_proba(X_new), local.predict_proba(X_new), atol=1e-5)
    # and the floor matters here: the in-memory fit with the old fixed floor is another map
    from probwrap.calibration._logodds import proba_to_log_proba
    from probwrap.shift import BiasCorrectedScaling

    fixed = BiasCorrectedScaling(kind="temperature").fit_log_proba(
        proba_to_log_proba(p, clip=1e-12), y, w)
    assert abs(fixed.scale_[0] - local.calibrator_.scale_[0]) > 1e-3


@pytest.mark.parametrize("calibration", ["vector", None])
def test_multiclass_dask_interval_equals_the_in_memory_interval(model, calibration):
    # Consistency test: the analytic interval of the EM prior (delta method with the labelled
    # rows' sandwich covariance; its derivatives are checked against SciPy in
    # tests/test_prior_shift_analytic.py) from per-block sums on Dask equals the in-memory one
    # on the same rows and weights. The sums only change order, and the maximum-likelihood EM
    # on Dask stops on the same distance bound (em_tol 1e-10 here), so 1e-8 absolute. The
    # reductions run on Dask's threaded scheduler (same arithmetic; the cluster is exercised
    # by the file's other tests), which keeps this test well under a second.
    import dask

    X, y = _data(1500, 1, [0.5, 0.3, 0.2])
    X_new, _ = _data(1200, 2, [0.2, 0.3, 0.5])
    w = np.random.default_rng(3).uniform(0.5, 2.0, X_new.shape[0])
    kw = dict(calibration=calibration, em_tol=1e-10)
    with dask.config.set(scheduler="threads"):
        remote = PriorShiftWrapper(model, **kw).fit(
            da.from_array(X, chunks=(500, 2)), da.from_array(y, chunks=500)
        ).adapt(da.from_array(X_new, chunks=(400, 2)), sample_weight=da.from_array(w, chunks=400))
    local = PriorShiftWrapper(model, **kw).fit(X, y).adapt(X_new, sample_weight=w)
    np.testing.assert_allclose(remote.target_prior_interval_, local.target_prior_interval_,
                               atol=1e-8)
    np.testing.assert_allclose(remote.prior_estimate_.ml_prior, local.prior_estimate_.ml_prior,
                               atol=1e-8)
    np.testing.assert_allclose(remote.prior_estimate_.ml_interval,
                               local.prior_estimate_.ml_interval, atol=1e-8)
    # a real interval: each share's is narrower than [0, 1] and contains the estimate
    iv = remote.target_prior_interval_
    assert np.all(iv[:, 1] - iv[:, 0] < 0.3)
    assert np.all((iv[:, 0] <= remote.target_prior_) & (remote.target_prior_ <= iv[:, 1]))


@pytest.mark.parametrize("n_resamples", [200, 0])
@pytest.mark.parametrize("loader", ["wine", "iris"])
def test_multiclass_dask_warns_of_a_share_at_the_edge_as_in_memory(loader, n_resamples):
    # scikit-learn's bundled wine and iris data: a shrunk logistic model on half the rows, a
    # quarter labelled, the last quarter's rows of classes 0 and 1 as the unlabelled set
    # (class 2 absent: its maximum-likelihood share is 1e-12 / 1e-9). In memory adapt warns
    # BoundaryPriorWarning (wine: "the data point there firmly", iris: "the model separates
    # the classes weakly"); the reductions (more than KEPT_ROWS rows; here the tally_path
    # fixture) warned nothing before. Now the same message from the same sums; the whole
    # unlabelled quarter (every class) draws none on either path.
    import warnings

    import dask
    from sklearn.datasets import load_iris, load_wine
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap.shift import BoundaryPriorWarning

    X, y = {"wine": load_wine, "iris": load_iris}[loader](return_X_y=True)
    idx = np.random.default_rng(0).permutation(y.shape[0])
    half = y.shape[0] // 2
    fitted = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000))
    model = FrozenEstimator(fitted.fit(X[idx[:half]], y[idx[:half]]))
    rest = idx[half:]
    lab, new = rest[: rest.shape[0] // 2], rest[rest.shape[0] // 2:]

    def edge_warnings(rows, on_dask):
        with warnings.catch_warnings(record=True) as caught, dask.config.set(scheduler="threads"):
            warnings.simplefilter("always")
            w = PriorShiftWrapper(model, n_resamples=n_resamples)
            if on_dask:
                c = (20, X.shape[1])
                w.fit(da.from_array(X[lab], chunks=c), da.from_array(y[lab], chunks=20)).adapt(
                    da.from_array(X[rows], chunks=c))
            else:
                w.fit(X[lab], y[lab]).adapt(X[rows])
        return w, [str(m.message) for m in caught if issubclass(m.category, BoundaryPriorWarning)]

    two = new[y[new] != 2]
    local, expected = edge_warnings(two, False)
    remote, got = edge_warnings(two, True)
    assert local.prior_estimate_.ml_prior[2] < 1e-6
    assert len(expected) == 1
    assert ("firmly" if loader == "wine" else "separates the classes weakly") in expected[0]
    assert got == expected  # was []
    np.testing.assert_allclose(remote.target_prior_, local.target_prior_, atol=1e-8)
    assert edge_warnings(new, False)[1] == edge_warnings(new, True)[1] == []
