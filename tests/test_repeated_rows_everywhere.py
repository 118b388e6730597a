"""RepeatedRowsWarning wherever unlabelled rows are judged: ``adapt`` on Dask rows (a small set,
whose rows come to the client), and ``monitor`` batch by batch in memory and on Dask blocks,
warn exactly when ``adapt`` on the same rows in memory does; the Dask monitor table carries the
in-memory fields ``ml_prior`` and ``pseudo_rows`` with memory's values.

Before 5 December 2026 only ``adapt`` on rows in memory judged the repeats: the same resampled
rows passed as a Dask array, or read batch by batch by ``monitor`` (in memory or on Dask),
gave no warning, and the Dask monitor table lacked ``ml_prior`` and ``pseudo_rows``. The Spark
twins are in tests/test_spark_repeats_monitor.py.

Data: scikit-learn's bundled breast cancer set (five columns, so that few rows coincide by
chance) and iris. Batches of 60 rows are drawn with replacement from pools of 20 to 240 rows: a batch
of ``n`` rows from a pool of ``N`` has a design effect of its repeats of about ``1 + n / N``
(the Poisson count of copies of a pool row, mean ``n / N``;
tests/test_prior_shift_repeated_rows.py checks the clustered variance against it), so the
small pools warn and the largest one sits at the 1.25 threshold; the in-memory ``adapt``
decides, the other paths must agree with it batch for batch.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper
from probwrap.shift import RepeatedRowsWarning
from probwrap.shift._repeats import excess_repeats, identical_row_codes

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

POOLS = (20, 40, 240, None)  # None: rows drawn without replacement
BATCH = 60


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def _draws(n_rows, seed):
    """Row indices of one batch per pool (pools are disjoint slices of ``n_rows`` rows)."""
    rng = np.random.default_rng(seed)
    order = rng.permutation(n_rows)
    out, start = [], 0
    for pool in POOLS:
        if pool is None:  # (the last rows: they may overlap a pool's, batches are separate)
            out.append(order[-BATCH:])
        else:
            out.append(rng.choice(order[start:start + pool], BATCH))
            start += pool
    return out


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, lab, rest = idx[:100], idx[100:240], idx[240:]
    frozen = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        models = {
            "frozen": PriorShiftWrapper(frozen, n_resamples=40, random_state=0).fit(
                X[lab], y[lab]),
            # a base model refit here: identical rows agree in every fold model's posteriors
            "refit": PriorShiftWrapper(LogisticRegression(max_iter=5000), cv=3, n_resamples=40,
                                       random_state=0).fit(X[lab], y[lab]),
        }
    return X[rest], models, (X[lab], y[lab])


def _repeats(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fn()
    return [str(w.message) for w in caught if issubclass(w.category, RepeatedRowsWarning)]


def _same_words(messages):
    """Memory's words, which Dask and Spark now give too: their rows are grouped by their
    features as well as their posteriors where they live (since 5 December 2026, session 25;
    before, by their posteriors alone, and the words said 'the same posteriors')."""
    for m in messages:
        assert "(the same features and posteriors; " in m
    return messages


@pytest.mark.parametrize("kind", ["frozen", "refit"])
def test_dask_adapt_warns_exactly_when_memory_does(cancer, kind):
    X, models, _ = cancer
    psw = models[kind]
    decided = []
    for b in _draws(X.shape[0], seed=1):
        rows = X[b]
        mem = _repeats(lambda r=rows: copy.deepcopy(psw).adapt(r))
        dist = _repeats(lambda r=rows: copy.deepcopy(psw).adapt(da.from_array(r, chunks=40)))
        assert dist == _same_words(mem)  # the same message, numbers and all
        decided.append(bool(mem))
    # the small pools warn (design effect about 1 + 60 / 20 and 1 + 60 / 40), the rows drawn
    # without replacement do not, nor (this draw) the pool of 240, whose rows repeat but about
    # at the threshold 1 + 60 / 240 = 1.25; before, the Dask adapt never warned
    assert decided == [True, True, False, False]
    draws = _draws(X.shape[0], seed=1)
    assert excess_repeats(identical_row_codes(X[draws[0]]), None, 0.0)[0] == pytest.approx(
        1 + BATCH / 20, rel=0.35)
    assert np.unique(X[draws[2]], axis=0).shape[0] < BATCH  # repeats, within chance


def test_multiclass_dask_adapt_warns_as_in_memory():
    X, y = load_iris(return_X_y=True)
    idx = np.random.default_rng(4).permutation(y.shape[0])
    fit, lab, rest = idx[:40], idx[40:100], idx[100:]
    nb = FrozenEstimator(GaussianNB().fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(nb, n_resamples=30, random_state=0).fit(X[lab], y[lab])
    rng = np.random.default_rng(5)
    resampled, distinct = X[rng.choice(rest[:20], 60)], X[rest]
    for rows, expected in ((resampled, True), (distinct, False)):
        mem = _repeats(lambda r=rows: copy.deepcopy(psw).adapt(r))
        dist = _repeats(lambda r=rows: copy.deepcopy(psw).adapt(da.from_array(r, chunks=25)))
        assert bool(mem) is expected
        assert dist == _same_words(mem)


@pytest.mark.parametrize("kind", ["frozen", "refit"])
def test_monitor_names_the_batches_adapt_warns_for(cancer, kind):
    X, models, _ = cancer
    psw = models[kind]
    draws = _draws(X.shape[0], seed=2)
    rows = X[np.concatenate(draws)]
    flagged = [i for i, b in enumerate(draws) if _repeats(lambda b=b: copy.deepcopy(psw).adapt(
        X[b]))]
    assert 0 in flagged and len(flagged) < len(draws)
    mem = _repeats(lambda: psw.monitor(rows, batch_size=BATCH))
    dist = _repeats(lambda: psw.monitor(da.from_array(rows, chunks=BATCH)))
    assert len(mem) == 1 and dist == _same_words(mem)  # before: no warning from either
    names = ", ".join(map(str, flagged))
    assert mem[0].startswith(f"monitor: in {len(flagged)} of {len(draws)} batches (batch {names})")
    # the first batch's numbers are adapt's on its rows
    first = _repeats(lambda: copy.deepcopy(psw).adapt(X[draws[flagged[0]]]))[0]
    numbers = first.split("adapt: ", 1)[1].split(". The shift test", 1)[0]
    assert numbers in mem[0]
    # cells given (rows in memory): the repeats are counted as such, nothing to warn about
    assert not _repeats(lambda: psw.monitor(rows, batch_size=BATCH, cells=np.arange(
        rows.shape[0])))


def test_command_line_by_batch_warns_for_the_batches_monitor_names(cancer, tmp_path, capsys,
                                                                   monkeypatch):
    # the same data as scores in files: the frozen model's scores of the batches and of the
    # labelled rows (the reference). `probwrap prevalence` fits the same estimator on the
    # reference scores, so it judges each batch as monitor does (before: no warning)
    import pandas as pd

    import probwrap.cli._progress as progress
    from probwrap.cli import main

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)
    X, models, (X_lab, y_lab) = cancer
    psw = models["frozen"]
    draws = _draws(X.shape[0], seed=2)
    rows = X[np.concatenate(draws)]
    mem = _repeats(lambda: psw.monitor(rows, batch_size=BATCH))[0]
    score = psw.estimator_.predict_proba
    pd.DataFrame({"s": score(X_lab)[:, 1], "y": y_lab}).to_csv(tmp_path / "ref.csv", index=False)
    pd.DataFrame({"s": score(rows)[:, 1]}).to_csv(tmp_path / "new.csv", index=False)
    args = ["prevalence", "--unlabelled", str(tmp_path / "new.csv"), "--score-column", "s",
            "--reference", str(tmp_path / "ref.csv"), "--label-column", "y", "--positive-label",
            "1", "--resamples", "40", "--format", "json"]
    assert main([*args, "--batch-size", str(BATCH)]) == 0
    err = capsys.readouterr().err
    lines = [x for x in err.splitlines() if "repeat another row exactly" in x]
    flagged = mem.split("(batch ", 1)[1].split(")", 1)[0].split(", ")  # monitor's batches
    assert len(lines) == 2  # the whole file, and the batches (once, with how many alike)
    more = len(flagged) - 1
    assert (f"batch {flagged[0]!r} (and {more} more batches alike):" in lines[1]
            or f"batch {flagged[0]!r} (and {more} more batches alike):" in lines[0])
    # the first batch's numbers are monitor's (scores, not posteriors: the same count)
    numbers = mem.split(f"batch {flagged[0]}: ", 1)[1].split(" unlabelled rows", 1)[0]
    assert numbers in err
    # rows drawn without replacement: no warning
    pd.DataFrame({"s": score(X[draws[-1]])[:, 1]}).to_csv(tmp_path / "distinct.csv", index=False)
    capsys.readouterr()
    assert main([*args[:2], str(tmp_path / "distinct.csv"), *args[3:]]) == 0
    assert "repeat another row exactly" not in capsys.readouterr().err


def test_dask_monitor_table_has_the_rows_alone_fields_of_memory(cancer):
    X, models, _ = cancer
    psw = models["frozen"]
    # batches of 10 to 80 rows: the small ones are held near the source share
    rows = X[:180]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mem = psw.monitor(rows, batch_size=30)
        dist = psw.monitor(da.from_array(rows, chunks=30))
        weighted = psw.monitor(rows, batch_size=30, sample_weight=np.linspace(1, 3, 180))
        dist_w = psw.monitor(da.from_array(rows, chunks=30),
                             sample_weight=da.from_array(np.linspace(1, 3, 180), chunks=30))
    assert dist.dtype.names == mem.dtype.names  # before: no ml_prior, no pseudo_rows
    for a, b in ((dist, mem), (dist_w, weighted)):
        np.testing.assert_allclose(a["ml_prior"], b["ml_prior"], rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(a["pseudo_rows"], b["pseudo_rows"], rtol=1e-10, atol=1e-12)
    # each batch's rows alone are adapt's maximum-likelihood estimate on those rows
    one = copy.deepcopy(psw)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        one.adapt(rows[30:60])
    np.testing.assert_allclose(dist["ml_prior"][1], one.prior_estimate_.ml_prior, rtol=1e-10)
    assert dist["pseudo_rows"][1] == pytest.approx(one.prior_estimate_.pseudo_rows, rel=1e-10)
    assert np.all(dist["pseudo_rows"] > 0)
