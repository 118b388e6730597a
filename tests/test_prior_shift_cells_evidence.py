"""With cells, the evidence the shrinkage, the likelihood-ratio region, the boundary warning and
the few-rows warning weigh is Kish's count over the cells' design effect, not Kish's count.

Outside references: statsmodels' ``OLS(...).fit(cov_type="cluster", use_correction=False)`` for
the cluster-robust variance of a mean (Liang & Zeger 1986), and Kish's (1965) design effect of
equal clusters of ``m`` rows with intraclass correlation ``rho``, ``1 + (m - 1) rho`` (from
memory): rows alike within their cells (``rho = 1``) are worth one row per cell.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm

from probwrap.shift import PriorEstimator
from probwrap.shift._cells import cell_design_rows


def test_design_rows_is_variance_over_statsmodels_cluster_variance():
    rng = np.random.default_rng(3)
    g = np.repeat(np.arange(40), rng.integers(3, 30, size=40))
    v = rng.normal(size=40)[g] + 0.7 * rng.normal(size=g.shape[0])
    fit = sm.OLS(v, np.ones(g.shape[0])).fit(
        cov_type="cluster", cov_kwds={"groups": g, "use_correction": False})
    expected = np.var(v) / float(fit.bse[0] ** 2)
    assert expected < g.shape[0] / 3  # the cells matter here
    assert cell_design_rows(v, np.ones(g.shape[0]), g, float(g.shape[0])) == pytest.approx(
        expected, rel=1e-9)
    # never more than the rows' count; every row its own cell: the rows' count
    assert cell_design_rows(v, np.ones(g.shape[0]), np.arange(g.shape[0]),
                            float(g.shape[0])) == pytest.approx(g.shape[0], rel=1e-9)


def test_design_rows_of_alike_rows_is_the_cell_count():
    # Kish (1965): deff = 1 + (m - 1) rho = m for rho = 1, so n / m = G rows
    rng = np.random.default_rng(4)
    v = np.repeat(rng.normal(size=(25, 2)), 12, axis=0)
    cells = np.repeat(np.arange(25), 12)
    assert cell_design_rows(v, np.ones(300), cells, 300.0) == pytest.approx(25.0, rel=1e-9)


@pytest.fixture(scope="module")
def shared_cells():
    """25 cells of 20 rows; a cell's rows share one posterior (scored on the cell's features),
    labels drawn from the posterior: nothing moved, but the unlabelled cells' maximum-likelihood
    share is 0.78 against 0.36 (few cells: the shift test does not reject, p = 0.22)."""
    rng = np.random.default_rng(0)
    g, m = 25, 20

    def draw():
        p1 = 1 / (1 + np.exp(-rng.normal(-0.5, 1.2, size=g)))
        post = np.repeat(np.column_stack([1 - p1, p1]), m, axis=0)
        return post, (rng.random(g * m) < post[:, 1]).astype(int)

    lab_p, lab_y = draw()
    new_p, _ = draw()
    cells = np.repeat(np.arange(g), m)
    return lab_p, lab_y, cells, new_p


@pytest.mark.parametrize("n_resamples", [0, 200])
def test_cells_of_alike_rows_count_as_one_row_each(shared_cells, n_resamples):
    """The 500 unlabelled rows in 25 cells of alike rows weigh against the 20 pseudo-rows as the
    25 cells passed as one row each do (before: as 500 rows; shrunk 0.684, now 0.428, for a
    source share of 0.36 and a maximum-likelihood share of 0.78)."""
    lab_p, lab_y, cells, new_p = shared_cells
    est = PriorEstimator(random_state=0, n_resamples=n_resamples).fit(
        lab_p, lab_y, cells=cells)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rows = est.estimate(new_p, cells=cells)
        one = est.estimate(new_p[::20], cells=np.arange(25))
        plain = est.estimate(new_p)
    assert rows.prior == pytest.approx(one.prior, abs=1e-8)
    assert rows.ml_prior == pytest.approx(one.ml_prior, abs=1e-8)
    # the pull toward the source prior is larger than with Kish's count of the rows
    src = est.source_prior_
    assert abs(rows.prior[1] - src[1]) < 0.3 * abs(plain.prior[1] - src[1])


def test_few_cells_warn_as_few_rows(shared_cells):
    lab_p, lab_y, cells, new_p = shared_cells
    est = PriorEstimator(random_state=0).fit(lab_p, lab_y, cells=cells)
    with pytest.warns(UserWarning, match=r"Only 25 effective unlabelled rows \(Kish's count"):
        est.estimate(new_p, cells=cells)
    with warnings.catch_warnings(record=True) as got:
        warnings.simplefilter("always")
        est.estimate(new_p)  # 500 rows without cells: no such warning
    assert not [x for x in got if "effective unlabelled rows" in str(x.message)]


def test_boundary_warning_counts_the_cells():
    """A class absent from the unlabelled cells: the boundary warning's count is the cells'."""
    rng = np.random.default_rng(11)
    g, m = 40, 15
    p1 = 1 / (1 + np.exp(-rng.normal(-0.3, 0.6, size=g)))  # a weak model
    lab_p = np.repeat(np.column_stack([1 - p1, p1]), m, axis=0)
    lab_y = (rng.random(g * m) < lab_p[:, 1]).astype(int)
    cells = np.repeat(np.arange(g), m)
    q1 = 1 / (1 + np.exp(-rng.normal(-2.5, 0.6, size=g)))
    new_p = np.repeat(np.column_stack([1 - q1, q1]), m, axis=0)
    est = PriorEstimator(random_state=0).fit(lab_p, lab_y, cells=cells)
    with warnings.catch_warnings(record=True) as got:
        warnings.simplefilter("always")
        est.estimate(new_p, cells=cells)
    edge = [str(x.message) for x in got if type(x.message).__name__ == "BoundaryPriorWarning"]
    assert edge and "ach of the 40 effective unlabelled rows" in edge[0]
