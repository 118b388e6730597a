"""Bootstrap resamples on which a metric cannot be computed: counted, and no biased interval.

A calibration slope cannot be computed on a resample whose two classes do not overlap in the
scores; those are exactly the resamples on which it would be largest, so leaving them out
biases the interval downwards. A few left out (statsmodels' spector data: 2 of 200) is shown
with its count; more than ``MAX_DROPPED_SHARE`` (10 %, common practice) and the report gives no
interval, saying why. Before, the count was only warned and the interval was always given.

The case with many: scikit-learn's iris, versicolor against virginica, every second row
(50 rows), scored by petal width alone; 37 of 200 slope resamples do not overlap.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.datasets import load_iris

from _cli_helpers import run_cli as _run
from probwrap.metrics import bootstrap_interval, calibration_slope_intercept
from probwrap.metrics._bootstrap import MAX_DROPPED_SHARE
from probwrap.report import collect_content

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def _iris_petal_width():
    X, y = load_iris(return_X_y=True)
    labels = (y[50::2] == 2).astype(int)  # virginica positive, versicolor negative
    return labels, expit(2.0 * (X[50::2, 3] - 1.65))


def _spector():
    sm = pytest.importorskip("statsmodels.api")
    data = sm.datasets.spector.load_pandas().data
    fit = sm.Logit(data["GRADE"], sm.add_constant(data[["GPA", "TUCE", "PSI"]])).fit(disp=0)
    return data["GRADE"].to_numpy().astype(int), np.asarray(fit.predict())


def _slope(y, p, sample_weight=None):
    return calibration_slope_intercept(y, p, sample_weight=sample_weight).slope


def test_library_result_counts_and_marks_many_dropped_unreliable():
    y, p = _iris_petal_width()
    with pytest.warns(UserWarning, match=r"37 of 200 resamples were left out.*more than 10%"):
        res = bootstrap_interval(_slope, y, p, n_resamples=200, random_state=0)
    assert (res.n_failed, res.n_resamples) == (37, 200)
    assert res.n_failed > MAX_DROPPED_SHARE * res.n_resamples
    assert res.interval_reliable is False
    assert res.bootstrap_distribution.shape == (163,)


def test_library_result_few_dropped_stays_reliable():
    y, p = _spector()
    with pytest.warns(UserWarning, match="2 of 200 resamples were left out") as rec:
        res = bootstrap_interval(_slope, y, p, n_resamples=200, random_state=4)
    assert not any("unreliable" in str(w.message) for w in rec)
    assert (res.n_failed, res.n_resamples, res.interval_reliable) == (2, 200, True)


def _slope_row(content):
    return next(m for m in content.metrics if m.key == "slope")


def test_report_withholds_the_interval_when_many_resamples_drop():
    y, p = _iris_petal_width()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = collect_content(y_true=y, y_prob=p, random_state=0)
    row = _slope_row(content)
    # the report draws its own seed from random_state and its slope also fails on resamples
    # whose scores do not vary: more than in the library test above, and well over 10 %
    assert row.dropped_resamples > 2 * MAX_DROPPED_SHARE * 200
    assert np.isfinite(row.value)  # the slope on all rows is given
    assert np.isnan(row.low) and np.isnan(row.high)  # its interval is not
    assert (f"{row.dropped_resamples} of 200 resamples, more than 10%"
            in row.interval_note)
    notes = [n for n in content.notes if n.key == "metric:slope" and n.kind == "no interval"]
    assert len(notes) == 1 and notes[0].message == row.interval_note
    # the other metrics lost no resample and keep their intervals
    for m in content.metrics:
        if m.key != "slope":
            assert m.dropped_resamples == 0 and m.interval_note is None
            assert m.low <= m.high


def test_report_keeps_the_interval_and_counts_a_few_dropped():
    y, p = _spector()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = collect_content(y_true=y, y_prob=p, random_state=0)
    row = _slope_row(content)
    assert 0 < row.dropped_resamples <= MAX_DROPPED_SHARE * 200
    assert row.interval_note is None and row.low < row.value < row.high


@pytest.mark.parametrize("case", ["iris", "spector"])
def test_cli_json_and_page_carry_the_count(case, tmp_path, capsys):
    y, p = _iris_petal_width() if case == "iris" else _spector()
    pd.DataFrame({"p": p, "label": y}).to_csv(tmp_path / "s.csv", index=False)
    code, out, err = _run(capsys, "report", "--scores", tmp_path / "s.csv", "--score-column",
                          "p", "--label-column", "label", "--out", tmp_path / "r.html",
                          "--format", "json")
    assert code == 0, err
    slope = next(m for m in json.loads(out)["metrics"] if m["key"] == "slope")
    page = (tmp_path / "r.html").read_text()
    dropped = slope["dropped_resamples"]
    assert f'data-metric="slope" data-dropped-resamples="{dropped}"' in page
    assert "interval_reliable" not in err  # a Python name, not the command line's words
    if case == "iris":
        assert dropped > 2 * MAX_DROPPED_SHARE * 200
        assert slope["low"] is None and slope["high"] is None
        assert "more than 10%" in slope["interval_note"]
        assert ("calibration slope: no interval: the number could not be computed in "
                f"{dropped} of 200") in err
        assert "no interval" in page
    else:
        assert 0 < dropped <= 20
        assert slope["interval_note"] is None
        assert slope["low"] < slope["value"] < slope["high"]


def test_group_gap_interval_withheld_when_many_resamples_drop():
    # the two halves of the iris rows above (even and odd rows) as groups: the slope gap fails
    # in about 30 % of resamples (a half's classes do not overlap); it was given up to 50 %
    from probwrap.metrics import calibration_by_group

    X, y = load_iris(return_X_y=True)
    labels, p = (y[50:] == 2).astype(int), expit(2.0 * (X[50:, 3] - 1.65))
    halves = np.where(np.arange(100) % 2 == 0, "even", "odd")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(labels, p, halves, min_rows=10, min_events=5,
                                   random_state=0)
    gaps = {g.metric: g for g in res.gaps}
    assert np.isfinite(gaps["calibration_slope"].gap)
    assert np.all(np.isnan(gaps["calibration_slope"].interval))
    note = next(n for n in res.notes if n.startswith("gap in calibration_slope"))
    dropped = int(note.split("(")[1].split(" of ")[0])
    assert MAX_DROPPED_SHARE * 200 < dropped < 100
    assert "more than 10%, so an interval from the rest would be biased" in note
    assert np.all(np.isfinite(gaps["brier"].interval))  # no resample lost


def test_every_resample_failing_gives_no_interval_and_the_reason():
    # a metric computable on the rows as given but on no resample: no interval is made up
    from probwrap.report._common import NoteLog, metric_row

    def only_unweighted(y, p, sample_weight=None):
        if sample_weight is not None:
            raise ValueError("needs the rows as given")
        return float(np.mean(p))

    y, p = _iris_petal_width()
    with pytest.raises(ValueError, match=r"only 0 of 50 resamples .*needs the rows as given"):
        bootstrap_interval(only_unweighted, y, p, n_resamples=50, random_state=0)
    notes = NoteLog()
    with pytest.warns(UserWarning, match="not computed"):
        row = metric_row(notes, "odd", "odd metric", only_unweighted, y, p, None, "0", 50,
                         0.95, 0)
    assert np.isnan(row.low) and np.isnan(row.high)
    assert [n.kind for n in notes.notes] == ["not computed"]
    assert "only 0 of 50 resamples" in notes.notes[0].message
