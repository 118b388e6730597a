"""``probwrap prevalence --source-prevalence`` names the classes by label in its warnings.

The library counts classes by index ("Class index(es) [1] get zero predicted probability
mass"); a command-line user knows only the negative and the positive class. Data: a decision
tree's probabilities (exact 0 and 1 at its pure leaves) on scikit-learn's bundled
breast-cancer set.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.tree import DecisionTreeClassifier

from probwrap.cli import main
from probwrap.cli._prevalence import _classes_by_label

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def test_bootstrap_warning_names_the_positive_class(tmp_path, capsys):
    X, y = load_breast_cancer(return_X_y=True)
    tree = DecisionTreeClassifier(random_state=0).fit(X[:300], y[:300])
    p = tree.predict_proba(X[300:])[:, 1]
    zero = p[p == 0.0][:30]
    assert zero.size == 30
    # a batch of rows the tree is certain are negative, and one it is not
    scores = np.r_[zero, 0.3]
    pd.DataFrame({"risk": scores}).to_csv(tmp_path / "new.csv", index=False)
    code = main(["prevalence", "--unlabelled", str(tmp_path / "new.csv"), "--score-column",
                 "risk", "--source-prevalence", "0.6", "--resamples", "200"])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "index" not in err
    assert "The class 'positive' gets zero predicted probability mass" in err
    assert "its estimated share rests on very little information" in err


def test_class_words_for_each_index_form():
    names = {"negative": "no", "positive": "yes"}
    assert _classes_by_label("Class index(es) [0] get zero x; their estimated prior rests",
                             names) == "The class 'no' gets zero x; its estimated share rests"
    assert _classes_by_label("Class index(es) [0, 1] get zero x", names) == "Both classes get zero x"
    assert _classes_by_label("at class index 1 the bound", names) == "at the class 'yes' the bound"
