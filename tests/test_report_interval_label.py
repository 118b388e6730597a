"""The report names the cutoff whose bootstrap interval it prints.

A tuned ``CostPolicyWrapper`` keeps its cutoff at the plug-in side unless the held-out rows show
the least-cost cutoff to cost less (``settle_cutoff``); ``cutoff_interval_`` is the interval of
the least-cost cutoff (``cost_curve_.cutoff``). On 60 held-out rows of scikit-learn's bundled
breast-cancer data the settled cutoff lies outside that interval, so the report must not call
it "its" interval.
"""

import html
import re

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.report import write_report

COSTS = {"fp": 1.0, "fn": 5.0}


@pytest.fixture(scope="module")
def policy_and_rows():
    X, y = load_breast_cancer(return_X_y=True)
    y = 1 - y  # malignant (the minority) is the positive class
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(X[:200], y[:200])
    policy = CostPolicyWrapper(FrozenEstimator(model), costs=COSTS, strategy="tuned",
                               random_state=0, n_resamples=50).fit(X[200:260], y[200:260])
    return policy, X[260:], y[260:]


def _interval_sentence(text: str) -> str:
    """The plain text from the chosen cutoff's value to the end of the interval's sentence."""
    before, after = text.split('<span id="cutoff-interval"')
    start = before.rsplit("</b>", 1)[-1].split(";", 1)[-1].split(".", 1)[-1]
    end = after.split(">", 1)[1].split("</p>")[0]
    end = end.split(" With calibrated probabilities")[0]  # the Bayes cutoff's sentence
    return html.unescape(re.sub(r"<[^>]+>", "", start + end))


def test_settled_cutoff_is_not_given_the_least_cost_interval(tmp_path, policy_and_rows):
    policy, X, y = policy_and_rows
    ci, least = policy.cutoff_interval_, policy.cost_curve_.cutoff
    # the case the label is for: the settled cutoff differs from the least-cost one and lies
    # outside the least-cost cutoff's interval (which holds the least-cost cutoff)
    assert policy.cutoff_ != least
    assert ci.low <= least <= ci.high
    assert not ci.low <= policy.cutoff_ <= ci.high
    path = tmp_path / "r.html"
    content = write_report(path, model=policy, X=X, y=y, n_resamples=10)
    assert content.chosen_interval == (ci.low, ci.high)
    assert content.interval_cutoff == least
    page = path.read_text(encoding="utf-8")
    span = re.search(r'<span id="cutoff-interval"[^>]*>', page).group(0)
    assert f'data-cutoff="{least!r}"' in span
    sentence = _interval_sentence(page)
    assert "interval of the least-cost cutoff on the policy's held-out predictions" in sentence
    assert f"({least:.4f})" in sentence
    assert "Its " not in sentence and "not an interval of the tuned cutoff" in sentence


def test_least_cost_report_keeps_its_interval(tmp_path, policy_and_rows):
    # without a policy the report's own least-cost cutoff is chosen: the interval is its own
    policy, X, y = policy_and_rows
    p = policy.estimator_.predict_proba(X)[:, 1]
    path = tmp_path / "plain.html"
    content = write_report(path, y_true=y, y_prob=p, costs=COSTS, n_resamples=20)
    assert content.interval_cutoff == content.chosen_cutoff
    sentence = _interval_sentence(path.read_text(encoding="utf-8"))
    assert sentence.lstrip().startswith("Its 95% bootstrap interval is")
    assert np.isfinite(content.chosen_interval).all()
