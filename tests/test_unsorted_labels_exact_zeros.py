"""``UnsortedLabelsWarning`` on multiclass models whose probabilities reach exactly 0.

The warning compares the rows' log-probability of their class under the given reading of
``labels`` and under scikit-learn's sorted reading (more than two standard errors of the paired
difference). It floored the probabilities at the smallest positive float, so a row scored 0 by a
forest weighed about -708 and its spread hid the misreading: scikit-learn's wine, a forest of 50
trees fitted on 30 rows, 30 test rows, labels (class_2, class_0, class_1) with the forest's
``predict_proba`` (sorted columns): log loss 4.67 read by column against scikit-learn's 0.233,
without a word. Now the rows are floored at the log loss's own clip (machine epsilon), as the
metric scores them (session 28, benchmarks/multiclass_rules28.py)."""

from __future__ import annotations

import warnings
from itertools import permutations

import numpy as np
import pytest
from sklearn.datasets import load_iris, load_wine
from sklearn.ensemble import RandomForestClassifier
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import train_test_split

from probwrap.metrics import UnsortedLabelsWarning, log_loss


def _forest_cell(loader, seed: int):
    b = loader()
    y = b.target_names[b.target].astype(str)
    tr, te = train_test_split(np.arange(len(y)), train_size=30, stratify=y, random_state=seed)
    rf = RandomForestClassifier(50, random_state=0).fit(b.data[tr], y[tr])
    return rf.classes_, rf.predict_proba(b.data[te][:30]), y[te][:30]


def _warns(y, p, labels) -> tuple[bool, float]:
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        value = log_loss(y, p, labels=labels)
    return any(issubclass(w.category, UnsortedLabelsWarning) for w in ws), value


def test_forest_with_zero_probabilities_misread_warns():
    classes, p, y = _forest_cell(load_wine, 0)
    assert np.sum(p == 0.0) > 0  # the forest scores some rows' classes exactly 0
    labels = [classes[2], classes[0], classes[1]]
    with pytest.warns(UnsortedLabelsWarning, match="column 0 is 'class_2'"):
        got = log_loss(y, p, labels=labels)
    # the given reading (column j is labels[j]) against scikit-learn's sorted one
    assert got == pytest.approx(4.674, abs=0.01)
    assert sk_log_loss(y, p, labels=classes) == pytest.approx(0.2333, abs=0.001)


def test_forest_misreadings_detected_without_false_alarms():
    """Wine and iris, five draws each, every unsorted order of the three labels: the misreadings
    that cost more than 1 nat (scikit-learn's reading of ``labels`` with sorted columns) are
    detected in 49 of 50 (the old floor: 39); the same orders with the columns really in that
    order never warn (50 calls)."""
    detected = costly = false_alarms = calls = 0
    for loader in (load_wine, load_iris):
        for seed in range(5):
            classes, p, y = _forest_cell(loader, seed)
            meant = sk_log_loss(y, p, labels=classes)
            for order in permutations(range(3)):
                if order == (0, 1, 2):
                    continue
                labels = [classes[j] for j in order]
                warned, value = _warns(y, p, labels)
                if value - meant > 1.0:
                    costly += 1
                    detected += warned
                warned, _ = _warns(y, p[:, list(order)], labels)  # correct use
                calls += 1
                false_alarms += warned
    assert costly == 50
    assert detected >= 48, detected
    assert calls == 50 and false_alarms == 0
