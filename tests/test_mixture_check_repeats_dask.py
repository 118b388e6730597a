"""The mixture check counts repeated Dask rows by their design effect, as in memory.

Since session 30 ``PriorShiftWrapper.adapt`` and ``monitor`` on rows in memory pass the repeats'
design effect (:func:`probwrap.shift._repeats.mixture_design_effect`) to the score-only mixture
check (``ClassMixtureMisfitWarning``); the Dask paths (``adapt``: ``_warn_repeats_where_rows_live``;
``monitor``: ``probwrap.scale._dask.monitor_proba`` on each block) now pass it too, so the same
batch gives the same mixture-check p-value in memory and on Dask (to 1e-9; the same rows, scores
and design effect, summed in the same order). Before, the Dask paths counted the repeated rows as
independent: on the batches below (scikit-learn's bundled breast cancer set, five columns;
batches of 300 rows drawn with replacement from pools of 30 rows per class, a prior shift only)
memory's p-values were 0.063, 0.29, 0.035, 0.0093, 0.56, 0.53 and Dask's 8.0e-6, 0.012, 3.2e-5,
4.1e-7, 0.054, ..., flagging batches 0, 2 and 3 at the 1 % level where memory flags batch 3
alone. Both tests fail on that code.
The Spark twins: tests/test_spark_mixture_check_repeats.py.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest

from _data_helpers import repeated_batches
from probwrap.shift import ClassMixtureMisfitWarning, PriorEstimator, RepeatedRowsWarning

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")
pytest.importorskip("sklearn.frozen")

BATCH = 300  # (the batches' rows: repeated_batches)


@pytest.fixture(scope="module")
def cancer():
    return repeated_batches()


def _adapt_pvalue(psw, rows):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fitted = copy.deepcopy(psw).adapt(rows)
    assert any(w.category is RepeatedRowsWarning for w in caught)
    return fitted.prior_estimate_.mixture_misfit_pvalue


def test_dask_adapt_gives_memorys_mixture_pvalue(cancer):
    X, psw, batches = cancer
    mem = [_adapt_pvalue(psw, X[b]) for b in batches]
    dist = [_adapt_pvalue(psw, da.from_array(X[b], chunks=BATCH)) for b in batches]
    # before: Dask's first batch at p = 8.0e-6 against memory's 0.063
    np.testing.assert_allclose(dist, mem, rtol=1e-9, atol=0)
    assert sum(p < 0.01 for p in mem) == 1  # batch 3 (p = 0.0093)


def test_dask_monitor_gives_memorys_mixture_pvalues(cancer, monkeypatch):
    X, psw, batches = cancer
    rows = X[np.concatenate(batches)]
    seen: list = []
    estimate = PriorEstimator.estimate

    def recording(self, *args, **kwargs):
        res = estimate(self, *args, **kwargs)
        # keyed by the batch's summed scores (the engine need not run the blocks in order)
        seen.append((round(float(np.asarray(args[0])[:, 1].sum()), 6),
                     res.mixture_misfit_pvalue))
        return res

    monkeypatch.setattr(PriorEstimator, "estimate", recording)

    def run(data):
        seen.clear()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            psw.monitor(data, batch_size=BATCH)
        flagged = [str(w.message) for w in caught if w.category is ClassMixtureMisfitWarning]
        return [p for _, p in sorted(seen)], flagged

    mem, mem_flagged = run(rows)
    with dask.config.set(scheduler="synchronous"):  # (in this process, so it is recorded)
        dist, dist_flagged = run(da.from_array(rows, chunks=BATCH))
    assert len(mem) == len(dist) == len(batches)
    np.testing.assert_allclose(dist, mem, rtol=1e-9, atol=0)
    assert sum(p < 0.01 for p in mem) == 1
    # one warning each, naming batch 3 only (before, Dask's named more batches)
    assert len(mem_flagged) == len(dist_flagged) == 1
    assert mem_flagged[0].startswith("In 1 of 6 batches (batch 3)")
    assert dist_flagged[0].startswith("PriorShiftWrapper.monitor: 1 of 6 batches (batch 3)")


@pytest.mark.parametrize("interval", ["score", "bootstrap"])
def test_dask_adapt_through_the_tally_gives_memorys_mixture_pvalue(cancer, tally_path,
                                                                    interval):
    """Beyond KEPT_ROWS (forced to 0) the rows come back as a tally; the estimate reads the
    design effect with the score interval, and through ``tallied_adapt`` (Poisson replicates)
    with the bootstrap one (before: 8.0e-6 for the first batch either way, as above). Equal to
    memory's here; the tally's bins (width 1e-3) can move the p-value on other data."""
    X, psw, batches = cancer
    psw = copy.deepcopy(psw).set_params(interval=interval)
    mem = [_adapt_pvalue(psw, X[b]) for b in batches[:3]]
    dist = [_adapt_pvalue(psw, da.from_array(X[b], chunks=BATCH)) for b in batches[:3]]
    np.testing.assert_allclose(dist, mem, rtol=1e-9, atol=0)
