"""A warning repeated by every bootstrap resample is one report note, not one per count.

A random forest's probabilities include exact 0 and 1 (scikit-learn's bundled breast-cancer
data, a 10-tree forest): the calibration slope moves them to ``clip`` and warns with the number
of rows moved, which differs from one bootstrap resample to the next. The report used to keep
one note (and print one console warning) per distinct count.
"""

import re
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier

from probwrap.report import write_report


def test_clip_warning_of_the_resamples_is_one_note(tmp_path):
    X, y = load_breast_cancer(return_X_y=True)
    forest = RandomForestClassifier(n_estimators=10, random_state=0).fit(X[:300], y[:300])
    p = forest.predict_proba(X[300:])[:, 1]
    y = y[300:]
    n_extreme = int(np.sum((p == 0) | (p == 1)))
    assert n_extreme > 50  # the case: many exact 0/1 outputs
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        content = write_report(tmp_path / "r.html", y_true=y, y_prob=p, n_resamples=20)
    slope = [n for n in content.notes if n.key == "metric:slope" and "clip" in n.message]
    assert len(slope) == 1
    # the note shows the count on all rows (the first computation) and how often it came up
    assert slope[0].message.startswith(f"{n_extreme} row(s)")
    assert slope[0].count > 1
    console = [str(w.message) for w in caught if "calibration slope" in str(w.message)
               and "clip" in str(w.message)]
    # the count is of times raised (all rows, then resamples), never read as a count of rows
    assert len(console) == 1 and f"raised {slope[0].count} times in this computation" in console[0]
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert re.search(rf"raised {slope[0].count} times in this computation \(a bootstrap raises "
                     rf"it in each resample that meets it\), the first shown\): {n_extreme} row\(s\)",
                     page)


def test_different_warnings_stay_apart():
    from probwrap.report._common import NoteLog

    def two_kinds():
        warnings.warn("3 row(s) moved", UserWarning, stacklevel=1)
        warnings.warn("5 row(s) moved", UserWarning, stacklevel=1)
        warnings.warn("weights rescaled", RuntimeWarning, stacklevel=1)
        return 1.0

    log = NoteLog()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert log.compute("k", "thing", two_kinds) == 1.0
    assert [(n.kind, n.message, n.count) for n in log.notes] == [
        ("UserWarning", "3 row(s) moved", 2), ("RuntimeWarning", "weights rescaled", 1)]
