"""The report's own prevalence estimate counts the unlabelled rows' cells as units.

``write_report(unlabelled_cells=...)`` (``probwrap report --unlabelled-cell-column``) passes the
cell of every unlabelled row to :meth:`probwrap.shift.PriorEstimator.estimate` (and to
:func:`probwrap.shift.prior_by_batch` for the batches), so the interval, the shift test and the
batches' effective rows use the unlabelled cells' design effect (before: the unlabelled rows
counted as independent whatever their cells; the page said so).

Outside reference: statsmodels' bundled star98 (303 school districts, pupils above / below the
median in maths). Half of the districts are labelled (a success and a failure row per district,
the counts as weights, the districts as ``cells``); the other half are unlabelled pupils, one row
per 50 pupils of the district (2,125 rows in 152 districts, weight 1), each district a
cell. A logistic regression from scikit-learn scores both. The report's numbers must equal the
estimator's called directly with the same cells, and differ from the no-cells numbers.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.linear_model import LogisticRegression

from probwrap.aggregated import expand_counts
from probwrap.report import build_report, write_report
from probwrap.shift import PriorEstimator, prior_by_batch
from probwrap.shift._cells import cell_design_rows
from probwrap.shift._shift_tests import _score_rows

LEVEL = 0.9


@pytest.fixture(scope="module")
def star98():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    Xr, yr, w = expand_counts(X, k, n)
    cell = np.repeat(np.arange(k.shape[0]), 2)
    lab = np.zeros(k.shape[0], bool)
    lab[np.random.default_rng(0).permutation(k.shape[0])[:151]] = True
    L = lab[cell]
    model = LogisticRegression(C=1e6, max_iter=2000).fit(Xr[L], yr[L], sample_weight=w[L])
    p = model.predict_proba(Xr[L])[:, 1]
    others = np.flatnonzero(~lab)
    pupils = np.maximum(1, np.round(n[others] / 50.0)).astype(int)
    ucell = np.repeat(others, pupils)  # one unlabelled row per 50 pupils of its district
    q = model.predict_proba(X[ucell])[:, 1]
    return dict(p=p, y=yr[L], w=w[L], cell=cell[L], q=q, ucell=ucell)


def _report(s, unlabelled_cells, **kw):
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        return build_report(y_true=s["y"], y_prob=s["p"], sample_weight=s["w"],
                            unlabelled_prob=s["q"], cells=s["cell"], n_resamples=100,
                            confidence_level=LEVEL, random_state=0,
                            unlabelled_cells=unlabelled_cells, **kw)


def _direct(s, unlabelled_cells):
    est = PriorEstimator(n_resamples=100, confidence_level=LEVEL, random_state=1).fit(
        np.column_stack([1 - s["p"], s["p"]]), s["y"], s["w"], cells=s["cell"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(np.column_stack([1 - s["q"], s["q"]]), cells=unlabelled_cells)
    return res, est


def test_star98_report_counts_the_unlabelled_districts(star98):
    s = star98
    content, page = _report(s, s["ucell"])
    direct, est = _direct(s, s["ucell"])
    plain, _ = _direct(s, None)
    # the report's numbers are the estimator's with the unlabelled districts as cells ...
    np.testing.assert_allclose(np.asarray(content.target_interval), direct.interval[1],
                               rtol=1e-10, atol=1e-12)
    assert content.target_prevalence == pytest.approx(direct.prior[1], rel=1e-12)
    assert content.shift_pvalue == pytest.approx(direct.shift_pvalue, rel=1e-9)
    assert content.shift_statistic == pytest.approx(direct.shift_statistic, rel=1e-9)
    # ... which differ from the rows' ones (what the report gave before: this test failed
    # there, the keyword did not exist): 2,125 rows in 152 districts are worth about 150 rows,
    # so the pull toward the labelled share (0.382) weighs more (0.908 -> 0.560, the
    # maximum-likelihood share at 1 either way), the interval reaches lower (0.385 -> 0.333)
    # and the shift test is weaker (p 0.129 -> 0.159)
    assert plain.prior[1] - direct.prior[1] > 0.25
    assert plain.interval[1, 0] - direct.interval[1, 0] > 0.03
    assert direct.shift_pvalue > plain.shift_pvalue + 0.02
    q2 = np.column_stack([1 - s["q"], s["q"]])
    rows = cell_design_rows(_score_rows(est.calibrate(q2), est.source_prior_),
                            np.ones(q2.shape[0]), np.unique(s["ucell"], return_inverse=True)[1],
                            float(q2.shape[0]))
    assert content.unlabelled_cells == 152
    assert content.unlabelled_effective_rows == pytest.approx(rows, rel=1e-12)
    # the rows of a district are alike (its features), so they are worth about one row per
    # district, fewer for districts of unequal size (74.2; Kish's count of the districts' rows, 69.5)
    sizes = np.bincount(s["ucell"])
    kish = sizes.sum() ** 2 / np.sum(sizes.astype(float) ** 2)
    assert content.unlabelled_effective_rows == pytest.approx(kish, rel=0.1)
    assert content.unlabelled_effective_rows < 152 < q2.shape[0]
    assert ("2125 unlabelled rows&#x27; 152 cells are the units of the unlabelled side, worth "
            f"{rows:.4g} independent rows") in page
    assert "the unlabelled rows count as independent rows" not in page


def test_star98_batches_take_the_unlabelled_cells(star98):
    s = star98
    content, _ = _report(s, s["ucell"], batch_size=900)
    _, est = _direct(s, s["ucell"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = prior_by_batch(est, np.column_stack([1 - s["q"], s["q"]]), batch_size=900,
                               cells=s["ucell"])
        rows_table = prior_by_batch(est, np.column_stack([1 - s["q"], s["q"]]), batch_size=900)
    np.testing.assert_allclose(content.batch_table["n_effective"], table["n_effective"],
                               rtol=1e-12)
    np.testing.assert_allclose(content.batch_table["shift_statistic"],
                               table["shift_statistic"], rtol=1e-9)
    # each batch of 900 rows (about 50 districts) is worth about 50 rows, not 900
    assert np.all(table["n_effective"] < 0.2 * rows_table["n_effective"])


def test_without_unlabelled_cells_nothing_changes(star98):
    s = star98
    content, page = _report(s, None)
    plain, _ = _direct(s, None)
    np.testing.assert_allclose(np.asarray(content.target_interval), plain.interval[1],
                               rtol=1e-10, atol=1e-12)
    assert content.unlabelled_cells is None and content.unlabelled_effective_rows is None
    assert "the unlabelled rows count as independent rows" in page


def test_multiclass_report_takes_unlabelled_cells():
    rng = np.random.default_rng(3)
    proba = rng.dirichlet([2, 2, 2], size=600)
    y = (rng.random(600)[:, None] > np.cumsum(proba, axis=1)).sum(axis=1)
    ucell = np.repeat(np.arange(40), 10)
    q = rng.dirichlet([2, 2, 2], size=40)[ucell]  # 40 cells of 10 alike rows
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        content, page = build_report(y_true=y, y_prob=proba, unlabelled_prob=q,
                                     unlabelled_cells=ucell, n_resamples=30, random_state=0)
        est = PriorEstimator(n_resamples=30, random_state=1).fit(proba, y)
        res = est.estimate(q, cells=ucell)
    assert content.n_classes == 3 and content.unlabelled_cells == 40
    # alike rows within a cell: the 400 rows are worth the 40 cells
    assert content.unlabelled_effective_rows == pytest.approx(40.0, rel=1e-9)
    np.testing.assert_allclose(content.target_prior, res.prior, rtol=1e-10)
    assert content.shift_statistic == pytest.approx(res.shift_statistic, rel=1e-9)
    assert "40 cells are the units of the unlabelled side" in page


def test_unlabelled_cells_are_checked(tmp_path, star98):
    s = star98
    with pytest.raises(ValueError, match="`unlabelled_cells` must be 1-d with one cell label"):
        _report(s, s["ucell"][:-1])
    with pytest.raises(ValueError, match="give the rows too"):
        write_report(tmp_path / "r.html", y_true=s["y"], y_prob=s["p"], sample_weight=s["w"],
                     cells=s["cell"], unlabelled_cells=s["ucell"], n_resamples=10)
    with pytest.raises(ValueError, match="one cell for every unlabelled row"):
        _report(s, np.zeros(s["q"].shape[0]))


def test_a_given_prior_shift_wrapper_takes_unlabelled_cells_only_for_its_batches():
    # the wrapper's prevalence is its own adapt's: cells given to the report without batches
    # would change nothing, so they are refused; with batches they reach its monitor
    from sklearn.frozen import FrozenEstimator

    from probwrap import PriorShiftWrapper

    rng = np.random.default_rng(5)
    x = rng.normal(size=(600, 1))
    y = (rng.random(600) < 1 / (1 + np.exp(-2 * x[:, 0]))).astype(int)
    model = FrozenEstimator(LogisticRegression().fit(x, y))
    ucell = np.repeat(np.arange(40), 10)
    Xu = np.repeat(rng.normal(0.5, 1.0, size=(40, 1)), 10, axis=0)
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        wrapper = PriorShiftWrapper(model, n_resamples=20, random_state=0).fit(x, y)
        wrapper.adapt(Xu, cells=ucell)
        with pytest.raises(ValueError, match="give the cells to its `adapt"):
            build_report(model=model, X=x, y=y, X_unlabelled=Xu, prior_shift=wrapper,
                         unlabelled_cells=ucell, n_resamples=20)
        content, _ = build_report(model=model, X=x, y=y, X_unlabelled=Xu, prior_shift=wrapper,
                                  unlabelled_cells=ucell, batch_size=100, n_resamples=20)
        table = wrapper.monitor(Xu, batch_size=100, cells=ucell)
    # ten rows alike in each cell: every batch of 100 rows is worth its 10 cells
    np.testing.assert_allclose(content.batch_table["n_effective"], table["n_effective"])
    np.testing.assert_allclose(content.batch_table["n_effective"], 10.0, rtol=1e-9)


def _cli(tmp_path, s, extra, capsys):
    import json

    import pandas as pd

    from probwrap.cli import main

    pd.DataFrame({"score": s["p"], "label": s["y"].astype(int), "pupils": s["w"],
                  "district": s["cell"]}).to_csv(tmp_path / "labelled.csv", index=False)
    pd.DataFrame({"score": s["q"], "district": [f"d{c:03d}" for c in s["ucell"]]}).to_csv(
        tmp_path / "unlabelled.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "labelled.csv"), "--score-column",
                 "score", "--label-column", "label", "--weight-column", "pupils",
                 "--cell-column", "district", "--unlabelled", str(tmp_path / "unlabelled.csv"),
                 "--resamples", "100", "--out", str(tmp_path / "r.html"), "--format", "json",
                 *extra])
    return code, json.loads(capsys.readouterr().out) if code == 0 else None


def test_command_line_unlabelled_cell_column(tmp_path, star98, capsys, no_progress_lines):
    s = star98
    code, with_cells = _cli(tmp_path, s, ["--unlabelled-cell-column", "district"], capsys)
    assert code == 0
    code, without = _cli(tmp_path, s, [], capsys)
    assert code == 0
    direct, _ = _direct(s, s["ucell"])
    plain, _ = _direct(s, None)
    assert with_cells["target_prevalence"] == pytest.approx(direct.prior[1], rel=1e-9)
    assert without["target_prevalence"] == pytest.approx(plain.prior[1], rel=1e-9)
    assert with_cells["unlabelled_cells"]["n_cells"] == 152
    assert with_cells["unlabelled_cells"]["effective_rows"] < 152
    assert "unlabelled_cells" not in without
    page = (tmp_path / "r.html").read_text()  # the last one written: without the cells
    assert "the unlabelled rows count as independent rows" in page


def test_command_line_unlabelled_cell_column_needs_its_file(tmp_path, star98, capsys,
                                                           no_progress_lines):
    from probwrap.cli import main

    s = star98
    code, _ = _cli(tmp_path, s, ["--unlabelled-cell-column", "route"], capsys)
    assert code != 0
    assert "no column 'route' (--unlabelled-cell-column)" in capsys.readouterr().err
    with pytest.raises(SystemExit):
        main(["report", "--scores", str(tmp_path / "labelled.csv"), "--score-column", "score",
              "--label-column", "label", "--unlabelled-cell-column", "district", "--out",
              str(tmp_path / "r.html")])
    assert "--unlabelled-cell-column needs --unlabelled" in capsys.readouterr().err


def test_command_line_class_columns_take_unlabelled_cells(tmp_path, capsys,
                                                          no_progress_lines):
    import json

    import pandas as pd

    from probwrap.cli import main

    rng = np.random.default_rng(3)
    proba = rng.dirichlet([2, 2, 2], size=600)
    y = (rng.random(600)[:, None] > np.cumsum(proba, axis=1)).sum(axis=1)
    ucell = np.repeat(np.arange(40), 10)
    q = rng.dirichlet([2, 2, 2], size=40)[ucell]
    cols = ["a", "b", "c"]
    pd.DataFrame(proba, columns=cols).assign(label=y).to_csv(tmp_path / "l.csv", index=False)
    pd.DataFrame(q, columns=cols).assign(route=[f"r{c}" for c in ucell]).to_csv(
        tmp_path / "u.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "l.csv"), "--class-columns", "a,b,c",
                 "--label-column", "label", "--unlabelled", str(tmp_path / "u.csv"),
                 "--unlabelled-cell-column", "route", "--resamples", "30", "--out",
                 str(tmp_path / "r.html"), "--format", "json"])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    # ten alike rows a route: the 400 rows are worth the 40 routes
    assert out["unlabelled_cells"]["n_cells"] == 40
    assert out["unlabelled_cells"]["effective_rows"] == pytest.approx(40.0, rel=1e-9)
    assert "40 cells are the units of the unlabelled side" in (tmp_path / "r.html").read_text()
