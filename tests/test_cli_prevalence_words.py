"""The command line says "prevalence", and names no Python class in its own lines.

``probwrap cutoff`` printed the cutoff CostPolicyWrapper keeps as "kept by CostPolicyWrapper",
a Python class name, three columns out of line with the other labels; it is now the "settled
cutoff" line. Library warnings about prior shift that reach the command line said "prior"
("the prior estimate is very uncertain", "No class prior is consistent ...", "use
method='em'") where the verbs, options and output say "prevalence"; the command line now
words them so. "prior shift" itself stays: it is the name of the assumption.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.datasets import load_breast_cancer

from _cli_helpers import run_cli as _run
from probwrap.cli._wording import cli_wording
from probwrap.shift import em_prior
from probwrap.shift._confusion import _not_identified

# "prior" or "priors" as a word of its own, not "prior shift" / "prior-shift"
_PRIOR = re.compile(r"\bpriors?\b(?![- ]shift)", flags=re.IGNORECASE)


pytestmark = pytest.mark.usefixtures("no_progress_lines")


def _library_messages() -> list[str]:
    """Prior-shift warnings as the library raises them."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        em_prior(np.column_stack([np.ones(20), np.zeros(20)]), [0.5, 0.5])  # an empty class
        _not_identified("ACC", "true-positive rate 0.3 and false-positive rate 0.3 differ by 0")
        p1 = np.r_[np.full(15, 0.9), np.full(5, 0.2)]
        em_prior(np.column_stack([1 - p1, p1]), [0.5, 0.5], max_iter=1,
                 tol=1e-12)  # stopped before converging
    return [str(w.message) for w in caught]


def test_library_prior_words_become_prevalence():
    messages = _library_messages()
    assert len(messages) >= 3, messages
    assert sum(bool(_PRIOR.search(m)) for m in messages) >= 3  # the library says "prior"
    for m in messages:
        said = cli_wording(m)
        assert not _PRIOR.search(said), said
    acc = cli_wording(messages[[i for i, m in enumerate(messages) if "ACC" in m][0]])
    assert acc.startswith("ACC cannot identify the prevalence:")
    assert "The source prevalence is returned" in acc and "use --method em with" in acc
    assert "method='em'" not in acc


def test_inconsistent_batch_words():
    message = ("No class prior is consistent with both the labelled and the unlabelled rows at "
               "the 95% level: they differ by more than a change of class shares explains. The "
               "prior-shift assumption probably fails (the features of a class changed too); "
               "the interval is the single least-rejected prior.")
    said = cli_wording(message)
    assert said.startswith("No prevalence is consistent with both")
    assert said.endswith("the interval is the single least-rejected prevalence.")
    assert "prior-shift assumption (only the prevalence changed) probably fails" in said


def test_prevalence_verb_on_few_rows_says_prevalence(tmp_path, capsys):
    # scikit-learn's breast cancer data: a one-feature score on the first 8 rows, unlabelled
    # and the next 200 rows, labelled, as the reference
    X, y = load_breast_cancer(return_X_y=True)
    score = expit((X[:, 0] - 14.0) / 2.0)
    pd.DataFrame({"s": score[:8]}).to_csv(tmp_path / "u.csv", index=False)
    pd.DataFrame({"s": score[8:208], "y": y[8:208]}).to_csv(tmp_path / "r.csv", index=False)
    code, out, err = _run(capsys, "prevalence", "--unlabelled", tmp_path / "u.csv",
                          "--score-column", "s", "--reference", tmp_path / "r.csv",
                          "--label-column", "y", "--resamples", 50, "--seed", 0)
    assert code == 0, err
    assert "Only 8 effective unlabelled rows; the prevalence estimate is very uncertain" in err
    assert not _PRIOR.search(out + err), out + err


def test_cutoff_settled_line_in_plain_words_and_aligned(tmp_path, capsys):
    X, y = load_breast_cancer(return_X_y=True)
    score = expit((X[:, 0] - 14.0) / 2.0)  # mean radius, a rough score
    pd.DataFrame({"s": score, "y": y}).to_csv(tmp_path / "c.csv", index=False)
    code, out, err = _run(capsys, "cutoff", "--scores", tmp_path / "c.csv", "--score-column",
                          "s", "--label-column", "y", "--cost-fp", 1, "--cost-fn", 3,
                          "--resamples", 20, "--seed", 0)
    assert code == 0, err
    assert "CostPolicyWrapper" not in out + err
    lines = out.splitlines()
    settled = next(t for t in lines if t.startswith("  settled cutoff "))
    cost = next(t for t in lines if t.startswith("  expected cost per row "))
    # the number starts in the same column as on the other lines
    start = len("  expected cost per row ")
    assert settled[start - 1] == " " and settled[start] != " "
    assert cost[start] != " "
    assert "cost " in settled
