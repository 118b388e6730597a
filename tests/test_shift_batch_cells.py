"""prior_by_batch / monitor / class_shift_scores with cells (rows of one sampled unit share one).

Outside reference: the batch's estimate is ``PriorEstimator.estimate(..., cells=)`` on the
batch's rows, whose clustered variance is checked against statsmodels in
``tests/test_prior_shift_cells.py``; and, for the spread of the standardised batch shifts with
nothing moved, the standard normal (Page 1954's CUSUM assumes it: ``signed_shift_scores``).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import (
    PriorEstimator,
    class_shift_scores,
    prior_by_batch,
    signed_shift_scores,
)
from probwrap.shift._cells import cell_design_rows
from probwrap.shift._shift_tests import _score_rows


def _cluster_rows(rng, n_cells, size=(8, 25)):
    """Rows in cells whose feature has a shared part (x = a_g + e), labels with a cell effect."""
    cell = np.repeat(np.arange(n_cells), rng.integers(size[0], size[1] + 1, size=n_cells))
    x = rng.normal(size=n_cells)[cell] + rng.normal(scale=0.4, size=cell.size)
    b = rng.normal(scale=0.8, size=n_cells)[cell]
    y = (rng.random(cell.size) < 1 / (1 + np.exp(-(-0.8 + 1.2 * x + b)))).astype(int)
    return x[:, None], y, cell


@pytest.fixture(scope="module")
def clustered():
    rng = np.random.default_rng(0)
    xm, ym, _ = _cluster_rows(rng, 400)
    model = LogisticRegression().fit(xm, ym)
    x_l, y_l, c_l = _cluster_rows(rng, 40)
    x_u, _, c_u = _cluster_rows(rng, 240)  # 24 batches of 10 cells: nothing moved
    batch = c_u // 10
    return model, (x_l, y_l, c_l), (x_u, c_u, batch)


def test_batch_rows_are_the_estimate_with_cells(clustered):
    model, (x_l, y_l, c_l), (x_u, c_u, batch) = clustered
    est = PriorEstimator(random_state=0).fit(model.predict_proba(x_l), y_l, cells=c_l)
    p_u = model.predict_proba(x_u)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = prior_by_batch(est, p_u, batch, cells=c_u)
        rows = batch == 3
        one = est.estimate(p_u[rows], cells=c_u[rows], random_state=0)
    i = int(np.flatnonzero(table["batch"] == 3)[0])
    assert table["shift_statistic"][i] == pytest.approx(one.shift_statistic, rel=1e-10)
    assert table["prior"][i] == pytest.approx(one.prior, abs=1e-10)
    n_design = cell_design_rows(_score_rows(est.calibrate(p_u[rows]), est.source_prior_),
                                np.ones(rows.sum()), c_u[rows], float(rows.sum()))
    assert table["n_effective"][i] == pytest.approx(n_design, rel=1e-10)
    assert table["n_effective"][i] < rows.sum() / 3  # the rows' count overstated it
    # two classes: class 1's one-vs-rest score is the batch test's signed root
    assert table["class_shift_score"][i][1] ** 2 == pytest.approx(one.shift_statistic,
                                                                   rel=1e-8)


def test_class_shift_scores_against_labelled_cells_are_the_test(clustered):
    """Labelled cells, a batch without: the one-vs-rest score is the estimate's test (separate
    variances); before, it pooled the variances and differed."""
    model, (x_l, y_l, c_l), (x_u, _, batch) = clustered
    est = PriorEstimator(random_state=0, n_resamples=0).fit(
        model.predict_proba(x_l), y_l, cells=c_l)
    p = model.predict_proba(x_u[batch == 0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(p)
    z = class_shift_scores(est, p)
    assert z[1] ** 2 == pytest.approx(res.shift_statistic, rel=1e-8)
    assert z[0] == pytest.approx(-z[1], rel=1e-12)


def test_monitor_with_cells_standardises_to_unit_spread(clustered):
    """Nothing moved: with cells the batches' signed shifts spread about as a standard normal
    (the CUSUM's assumption); read as independent rows they spread far wider, so a chart would
    sound on noise."""
    model, (x_l, y_l, c_l), (x_u, c_u, batch) = clustered
    def signed(fit_cells, batch_cells):
        wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0, n_resamples=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wrapper.fit(x_l, y_l, cells=fit_cells)
            table = wrapper.monitor(x_u, batch, cells=batch_cells)
        return table, signed_shift_scores(table, float(wrapper.source_prior_[1]))

    with_cells, z_cells = signed(c_l, c_u)
    rows, z_rows = signed(None, None)
    _, z_labelled_only = signed(c_l, None)  # the most monitor could count before
    assert with_cells.shape[0] == 24
    rms = [float(np.sqrt(np.mean(z ** 2))) for z in (z_cells, z_labelled_only, z_rows)]
    assert 0.7 < rms[0] < 1.3  # measured 1.10
    assert rms[1] > 1.6 and rms[2] > 3.0  # measured 1.88 and 3.84
    assert np.all(with_cells["n_effective"] < rows["n_effective"] / 2)


def test_bad_cells_are_refused(clustered):
    model, (x_l, y_l, c_l), (x_u, c_u, batch) = clustered
    est = PriorEstimator(n_resamples=0).fit(model.predict_proba(x_l), y_l)
    with pytest.raises(ValueError, match="`cells` must be 1-d"):
        prior_by_batch(est, model.predict_proba(x_u), batch, cells=c_u[:-1])


def test_command_line_batches_take_the_cells(clustered, tmp_path, capsys, monkeypatch):
    """`probwrap prevalence --batch-column --cell-column` (refused before): each batch is the
    estimate with its cells, and the alarm counts it by its design-effective rows."""
    import json

    import pandas as pd

    import probwrap.cli._progress as progress
    from probwrap.cli import main
    from probwrap.cli._prevalence_numbers import prevalence_from_reference

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)
    model, (x_l, y_l, c_l), (x_u, c_u, batch) = clustered
    p_l, p_u = model.predict_proba(x_l)[:, 1], model.predict_proba(x_u)[:, 1]
    pd.DataFrame({"risk": p_l, "y": y_l, "unit": [f"u{c}" for c in c_l]}).to_csv(
        tmp_path / "ref.csv", index=False)
    pd.DataFrame({"risk": p_u, "week": batch, "unit": [f"n{c}" for c in c_u]}).to_csv(
        tmp_path / "new.csv", index=False)
    code = main([str(a) for a in [
        "prevalence", "--unlabelled", tmp_path / "new.csv", "--score-column", "risk",
        "--reference", tmp_path / "ref.csv", "--label-column", "y", "--resamples", 20,
        "--batch-column", "week", "--cell-column", "unit", "--reference-cell-column", "unit",
        "--format", "json"]])
    out, err = capsys.readouterr()
    assert code == 0, err
    got = json.loads(out)
    assert len(got["batches"]) == 24
    first = got["batches"][0]
    rows = batch == int(first["batch"])
    api = prevalence_from_reference(p_u[rows], p_l, y_l, n_resamples=20, seed=1,
                                    cells=c_u[rows], reference_cells=c_l)
    assert first["shift_statistic"] == pytest.approx(api["shift_statistic"], rel=1e-9)
    assert first["effective_rows"] == pytest.approx(api["effective_rows"], rel=1e-9)
    assert first["effective_rows"] < first["n_rows"] / 2
