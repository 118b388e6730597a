"""A new user's files, as exports and spreadsheets write them (user-eye pass, 4 December 2026).

Each case was met by running the verbs on real data written the way users' tools write it:

- a score column with a few blank cells: the labelled verbs named the first blank row only,
  so fixing the file took one run per blank; now the message counts them and names the first
  five;
- ``--positive-label yes`` on labels ``Yes``/``No``: the message listed the labels without
  saying that they are matched exactly; now it gives the option to paste;
- a title line above the header (an export's "Scores from ..."): the message blamed a decimal
  comma; now it says the first line cannot be the header;
- class probabilities rounded to 3 decimals (sums 0.999 to 1.001): ``report`` refused the
  file; now rows within the rounding bound are divided by their sum, with a warning;
- a bootstrap warning named the Python argument `metric`.

Data: scikit-learn's bundled breast cancer and wine sets (cross-validated probabilities of a
logistic regression), statsmodels' spector set (Spector & Mazzeo 1980).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run
from probwrap.cli import main
from probwrap.cli._wording import cli_wording

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def _cross_validated(X, y):
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba")


@pytest.fixture(scope="module")
def cancer():
    from sklearn.datasets import load_breast_cancer

    X, y = load_breast_cancer(return_X_y=True)
    p = _cross_validated(X[:, :8], y)[:, 1]
    return pd.DataFrame({"patient id": [f"P{i:04d}" for i in range(y.shape[0])],
                         "model score": p, "benign?": np.where(y == 1, "yes", "no")})


CUTOFF = ["--score-column", "model score", "--label-column", "benign?", "--cost-fp", 1,
          "--cost-fn", 5, "--resamples", 0]


def test_blank_scores_are_counted_and_named_at_once(cancer, tmp_path, capsys):
    frame = cancer.astype({"model score": object})
    frame.loc[[3, 50, 200], "model score"] = ""
    frame.to_csv(tmp_path / "blank.csv", index=False)
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "blank.csv", *CUTOFF,
                         "--positive-label", "yes")
    assert code == 1 and out == ""
    assert ("column 'model score', row 5 (counting the header as row 1): the value is "
            "missing; 3 of 569 rows have none in this column: rows 5, 52 and 202 (counting "
            "the header as row 1); fill them in or remove those rows") in err
    # one blank: the message as before, with nothing to count
    frame = cancer.astype({"model score": object})
    frame.loc[[3], "model score"] = ""
    frame.to_csv(tmp_path / "one.csv", index=False)
    code, _, err = run(capsys, "cutoff", "--scores", tmp_path / "one.csv", *CUTOFF,
                       "--positive-label", "yes")
    assert code == 1
    assert err.rstrip().endswith("row 5 (counting the header as row 1): the value is missing")


def test_missing_labels_in_parquet_are_counted(cancer, tmp_path, capsys):
    frame = cancer.copy()
    frame["benign?"] = pd.array((frame["benign?"] == "yes").astype(int), dtype="Int64")
    frame.loc[[7, 8, 100, 101, 102, 300, 400], "benign?"] = pd.NA
    frame.to_parquet(tmp_path / "labels.parquet")
    code, _, err = run(capsys, "cutoff", "--scores", tmp_path / "labels.parquet", *CUTOFF)
    assert code == 1
    assert ("row 8 (counting the first row as row 1): the label is missing; 7 of 569 rows "
            "have none in this column: rows 8, 9, 101, 102, 103, ... (counting the first row "
            "as row 1)") in err


def test_positive_label_in_another_case_is_pointed_out(cancer, tmp_path, capsys):
    frame = cancer.assign(**{"benign?": cancer["benign?"].map({"yes": "Yes", "no": "No"})})
    frame.to_csv(tmp_path / "caps.csv", index=False)
    code, _, err = run(capsys, "cutoff", "--scores", tmp_path / "caps.csv", *CUTOFF,
                       "--positive-label", "yes")
    assert code == 1
    assert "labels are matched exactly, case and spaces included: give --positive-label Yes" in err
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "caps.csv", *CUTOFF,
                         "--positive-label", "Yes")
    assert code == 0, err
    assert "357 positive (label 'Yes')" in out


@pytest.mark.parametrize("title", ["Scores exported from the clinic system, 2026-12-01",
                                   "Scores exported from the clinic system"])
def test_a_title_line_above_the_header_is_named(cancer, tmp_path, capsys, title):
    path = tmp_path / "title.csv"
    path.write_text(f"{title}\n" + cancer.to_csv(index=False), encoding="utf-8")
    code, _, err = run(capsys, "cutoff", "--scores", path, *CUTOFF, "--positive-label", "yes")
    assert code == 1
    fields = 2 if "," in title else 1
    assert (f"line 1 has {fields} field{'s' if fields > 1 else ''} but the lines after it "
            "have 3, so it cannot be the header; if the file starts with a title") in err
    assert "decimal comma" not in err
    # without the title line the file is read
    path.write_text(cancer.to_csv(index=False), encoding="utf-8")
    code, _, err = run(capsys, "cutoff", "--scores", path, *CUTOFF, "--positive-label", "yes")
    assert code == 0, err


def test_decimal_commas_in_a_comma_file_keep_their_hint(tmp_path, capsys):
    path = tmp_path / "commas.csv"
    path.write_text("risk,y\n0,1,1\n0,2,0\n0,3,1\n0,4,0\n", encoding="utf-8")
    code, _, err = run(capsys, "cutoff", "--scores", path, "--score-column", "risk",
                       "--label-column", "y", "--cost-fp", 1, "--cost-fn", 5)
    assert code == 1
    assert "line 2 has 3 fields but the header has 2" in err and "decimal comma" in err


@pytest.fixture(scope="module")
def wine():
    from sklearn.datasets import load_wine

    X, y = load_wine(return_X_y=True)
    frame = pd.DataFrame(_cross_validated(X, y), columns=["class 0", "class 1", "class 2"])
    frame["cultivar"] = [f"class {k}" for k in y]
    return frame


WINE = ["--class-columns", "class 0,class 1,class 2", "--label-column", "cultivar",
        "--cost-matrix", "0,1,1;1,0,1;1,1,0", "--resamples", 20, "--format", "json"]


def test_class_probabilities_rounded_to_three_decimals_are_read(wine, tmp_path, capsys):
    columns = ["class 0", "class 1", "class 2"]
    rounded = wine.round({c: 3 for c in columns})
    sums = rounded[columns].sum(axis=1).to_numpy()
    off = np.abs(sums - 1) > 1e-6
    assert off.sum() > 10 and np.abs(sums - 1).max() <= 0.0015 + 1e-12  # rounding's bound
    rounded.to_csv(tmp_path / "rounded.csv", index=False)
    code, out, err = run(capsys, "report", "--scores", tmp_path / "rounded.csv", *WINE,
                         "--out", tmp_path / "rounded.html")
    assert code == 0, err
    assert (f"{int(off.sum())} of 178 rows' class probabilities sum to 0.9990 to 1.0010, "
            "not 1, as probabilities rounded to 3 decimals do; each such row was divided by "
            "its sum") in err
    # the same report as on the rows divided by their sums, written at full precision
    fixed = rounded.copy()
    fixed[columns] = rounded[columns].to_numpy() / sums[:, None]
    fixed.to_csv(tmp_path / "fixed.csv", index=False)
    code, expected, err = run(capsys, "report", "--scores", tmp_path / "fixed.csv", *WINE,
                              "--out", tmp_path / "fixed.html")
    assert code == 0, err
    assert "class probabilities sum" not in err
    got, want = json.loads(out), json.loads(expected)
    assert got["mean_cost_rule_in_use"] == pytest.approx(want["mean_cost_rule_in_use"],
                                                         abs=1e-12)


def test_class_probabilities_off_by_more_than_rounding_are_refused(wine, tmp_path, capsys):
    rounded = wine.round({c: 3 for c in ["class 0", "class 1", "class 2"]})
    rounded.loc[5, "class 0"] += 0.01
    rounded.to_csv(tmp_path / "bad.csv", index=False)
    code, _, err = run(capsys, "report", "--scores", tmp_path / "bad.csv", *WINE,
                       "--out", tmp_path / "bad.html")
    assert code == 1
    assert "row 7 (counting the header as row 1): the class probabilities sum to" in err
    assert "more than rounding 3 probabilities to 3 decimals explains (at most 0.0015 off)" in err
    # full-precision probabilities off by 1e-4 are refused as before (no rounding to explain it)
    full = wine.copy()
    full.loc[5, "class 0"] += 1e-4
    full.to_csv(tmp_path / "full.csv", index=False)
    code, _, err = run(capsys, "report", "--scores", tmp_path / "full.csv", *WINE,
                       "--out", tmp_path / "full.html")
    assert code == 1
    assert "row 7 (counting the header as row 1): the class probabilities sum to" in err
    assert "rounding" not in err


def test_bootstrap_warnings_do_not_name_the_python_argument(tmp_path, capsys):
    message = ("2 of 200 resamples were left out because `metric` could not be evaluated on "
               "them (first problem: x).")
    assert cli_wording(message) == ("2 of 200 resamples were left out because the number "
                                    "could not be computed on them (first problem: x).")
    sm = pytest.importorskip("statsmodels.api")
    data = sm.datasets.spector.load_pandas().data
    fit = sm.Logit(data["GRADE"], sm.add_constant(data[["GPA", "TUCE", "PSI"]])).fit(disp=0)
    pd.DataFrame({"p": fit.predict().round(4), "grade": data["GRADE"].astype(int)}).to_csv(
        tmp_path / "spector.csv", index=False)
    code, _, err = run(capsys, "report", "--scores", tmp_path / "spector.csv", "--score-column",
                       "p", "--label-column", "grade", "--cost-fp", 1, "--cost-fn", 3,
                       "--out", tmp_path / "spector.html")
    assert code == 0, err
    assert "resamples were left out because the number could not be computed" in err
    assert "`metric`" not in err


@pytest.mark.parametrize("argv, hint", [
    (["prevalence", "--unlabelled", "u.csv", "--score-column", "p",
      "--source-prevalence", "4"], "--source-prevalence: must be a share strictly between 0 "
     "and 1; got 4; 4 looks like a percentage: write it as the share 0.04"),
    (["cutoff", "--scores", "s.csv", "--score-column", "p", "--label-column", "y",
      "--cost-fp", "1", "--cost-fn", "2", "--capacity", "10"],
     "--capacity: must be a share of rows in (0, 1]; got 10; 10 looks like a percentage: "
     "write it as the share 0.1"),
    (["cutoff", "--scores", "s.csv", "--score-column", "p", "--label-column", "y",
      "--cost-fp", "1", "--cost-fn", "2", "--confidence", "95"],
     "--confidence: must be in (0, 1); got 95; 95 looks like a percentage: write it as the "
     "share 0.95"),
    (["cutoff", "--scores", "s.csv", "--score-column", "p", "--label-column", "y",
      "--cost-fp", "1", "--cost-fn", "2", "--guarantee", "recall", "--guarantee-target", "80"],
     "got 80; 80 looks like a percentage: write it as the share 0.8"),
    (["report", "--scores", "s.csv", "--score-column", "p", "--label-column", "y",
      "--cost-fp", "1", "--cost-fn", "2", "--capacity", "25", "--out", "r.html"],
     "--capacity must be a share in (0, 1]; got 25; 25 looks like a percentage: write it as "
     "the share 0.25"),
])
def test_a_share_given_in_percent_is_named(argv, hint, capsys):
    with pytest.raises(SystemExit) as info:
        main(argv)
    assert info.value.code == 2
    assert hint in capsys.readouterr().err


def test_a_share_out_of_range_otherwise_has_no_percent_hint(capsys):
    with pytest.raises(SystemExit):
        main(["prevalence", "--unlabelled", "u.csv", "--score-column", "p",
              "--source-prevalence", "150"])
    err = capsys.readouterr().err
    assert "got 150" in err and "percentage" not in err
