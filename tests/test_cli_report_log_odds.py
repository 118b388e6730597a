"""``probwrap report --scale log-odds`` with log-odds beyond what probabilities can hold.

The report reads probabilities: a log-odds beyond about 36.7 rounds to exactly 1, and the
calibration slope and intercept floor probabilities at 1e-12 from the edges, i.e. read every
log-odds beyond logit(1 - 1e-12) = 27.63 as 27.63. Data: margins of a weakly penalised logistic
regression on scikit-learn's bundled breast-cancer set (24 of 269 held-out rows beyond 27.63).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.cli import main


@pytest.fixture(autouse=True)
def _no_progress_lines(monkeypatch):
    import probwrap.cli._progress as progress

    monkeypatch.setattr(progress, "PROGRESS_DELAY", 1e9)


@pytest.fixture(scope="module")
def margins():
    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(C=1000, max_iter=20000).fit(X[:300], y[:300])
    return model.decision_function(X[300:]), y[300:]


def test_log_odds_floor_is_said_in_log_odds(margins, tmp_path, capsys):
    d, y = margins
    bound = math.log1p(-1e-12) - math.log(1e-12)
    beyond = int(np.sum(np.abs(d) > bound))
    assert beyond > 0
    pd.DataFrame({"margin": d, "y": y}).to_csv(tmp_path / "scores.csv", index=False)
    code = main(["report", "--scores", str(tmp_path / "scores.csv"), "--score-column",
                 "margin", "--label-column", "y", "--scale", "log-odds", "--resamples", "20",
                 "--out", str(tmp_path / "r.html")])
    err = capsys.readouterr().err
    assert code == 0, err
    assert f"{beyond} row(s) have log-odds beyond +-27.6" in err
    assert "exactly 0 or 1" not in err  # the user gave finite log-odds, not 0 and 1


def test_slope_reads_log_odds_floored_at_the_bound(margins):
    # what the warning says, checked against statsmodels' GLM on the log-odds clipped at
    # +-logit(1 - 1e-12); here the rows beyond the bound are all on their correct side, so the
    # given log-odds give the same slope to 1e-9 (a confident error beyond the bound would not)
    import statsmodels.api as sm

    from probwrap.calibration import log_odds_to_proba
    from probwrap.metrics._slope import slope_intercept_fit

    d, y = margins
    bound = math.log1p(-1e-12) - math.log(1e-12)
    fit = slope_intercept_fit(y, log_odds_to_proba(d))
    clipped = sm.GLM(y, sm.add_constant(np.clip(d, -bound, bound)),
                     family=sm.families.Binomial()).fit()
    assert fit.slope == pytest.approx(clipped.params[1], rel=1e-5)
    assert fit.slope_fit_intercept == pytest.approx(clipped.params[0], rel=1e-5, abs=1e-6)
