"""`probwrap demo` and `probwrap report` end to end, good and malformed score files."""

import html.parser
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from probwrap.cli import main
from probwrap.datasets import make_parcels
from probwrap.decision import search_cutoff

pytestmark = pytest.mark.usefixtures("no_progress_lines")


class _Figures(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.figures, self.sections, self._in = [], [], None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            self.sections.append(a.get("id"))
        if tag == "figure":
            self._in = a.get("id")
        if tag == "svg" and self._in:
            self.figures.append(self._in)

    def handle_endtag(self, tag):
        if tag == "figure":
            self._in = None


def _parse(path):
    p = _Figures()
    p.feed(path.read_text(encoding="utf-8"))
    return p


def test_demo_subprocess_writes_report(tmp_path):
    out = tmp_path / "demo"
    proc = subprocess.run(
        [sys.executable, "-m", "probwrap.cli", "demo", "--out", str(out), "--n-train", "2000"],
        capture_output=True, text=True, timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert "chosen cutoff" in proc.stdout and "winter prevalence (est.)" in proc.stdout
    page = _parse(out / "report.html")
    assert page.sections == ["calibration", "decisions", "prevalence", "cautions"]
    assert page.figures == ["fig-reliability", "fig-cost", "fig-decision-curve", "fig-prevalence",
                            "fig-alarm"]


def test_demo_in_process_summary(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path), "--n-train", "2000", "--seed", "1"]) == 0
    text = capsys.readouterr().out
    line = next(t for t in text.splitlines() if "winter prevalence (est.)" in t)
    summer = float(next(t for t in text.splitlines() if "summer prevalence" in t).split()[-1])
    assert float(line.split()[3]) > summer  # winter damage roughly doubles
    # the printed interval is the maximum-likelihood estimate's own: it contains that estimate
    lo, hi = (float(v) for v in line.split("[")[1].split("]")[0].split(","))
    assert lo <= float(line.split()[3]) <= hi
    assert any(t.strip().startswith("shrunk toward summer") for t in text.splitlines())
    assert (tmp_path / "report.html").stat().st_size > 20_000


def _prevalence_content(**kw):
    from types import SimpleNamespace

    base = dict(confidence_level=0.95, source_prevalence=0.05, ml_prevalence=0.0912,
                ml_interval=(0.0701, 0.1133), target_prevalence=0.0650,
                target_interval=(0.0650, 0.1133), applied_prevalence=0.0575,
                adaptation_weight=0.5)
    base.update(kw)
    return SimpleNamespace(**base)


def test_demo_prints_each_estimate_with_its_own_interval():
    # The shrunk estimate (0.0650; as an estimate from before 4 December 2026 could) lies outside
    # the maximum-likelihood estimate's interval; the widened interval [0.0650, 0.1133] belongs to neither estimate and is not printed. The
    # maximum-likelihood estimate is printed with its own interval, the shrunk value and the
    # prevalence the rules apply (the source moved half the way: 0.05 + 0.5 * 0.015) on their
    # own lines.
    from probwrap.cli._demo import prevalence_lines

    lines = prevalence_lines(_prevalence_content(), 0.1)
    first = lines[0].split()
    assert first[3] == "0.0912" and "[0.0701, 0.1133]" in lines[0]
    assert "0.0650" not in lines[0]
    assert lines[1].split()[3] == "0.0650"
    # since 4 December 2026 a shrunk estimate the data reject is not reported (its pull fades
    # and it is kept inside the interval), so the demo no longer labels one "outside the
    # interval"; without pseudo-rows on the content nothing is added
    assert "outside" not in lines[1] and "faded" not in lines[1]
    assert lines[2].split()[4] == "0.0575" and "50%" in lines[2]
    assert not any("[0.0650" in t for t in lines)
    # a faded pull (1.7 of 20 pseudo-rows) is named, with the shrunk value inside the interval
    lines = prevalence_lines(_prevalence_content(target_prevalence=0.0720, prior_strength=20.0,
                                                 pseudo_rows=1.7), 0.1)
    assert lines[1].split()[3] == "0.0720"
    assert "pull faded to 1.7 of 20 rows" in lines[1] and "inside the interval" in lines[1]
    lines = prevalence_lines(_prevalence_content(target_prevalence=0.0720, prior_strength=20.0,
                                                 pseudo_rows=20.0), 0.1)
    assert "faded" not in lines[1]
    # inside the interval: no warning; no evidence: the rules do not move
    lines = prevalence_lines(_prevalence_content(target_prevalence=0.08, adaptation_weight=0.0,
                                                 applied_prevalence=0.05), 0.1)
    assert "outside" not in lines[1]
    assert lines[2].split()[4] == "0.0500" and "not moved" in lines[2]


def test_three_way_demo_prints_each_estimate_with_its_own_interval():
    from types import SimpleNamespace

    from probwrap.cli._demo import share_lines

    c = SimpleNamespace(
        confidence_level=0.9, class_names=("intact", "dented", "broken"),
        source_prior=np.array([0.8, 0.15, 0.05]), ml_prior=np.array([0.7, 0.2, 0.1]),
        ml_interval=np.array([[0.66, 0.74], [0.17, 0.23], [0.08, 0.12]]),
        target_prior=np.array([0.72, 0.19, 0.09]),
        target_interval=np.array([[0.66, 0.74], [0.17, 0.23], [0.08, 0.12]]),
        applied_prior=np.array([0.76, 0.17, 0.07]), adaptation_weight=0.5)
    lines = share_lines(c, [0.7, 0.2, 0.1])
    assert "90% interval" in lines[0] and "shrunk" in lines[0] and "applied" in lines[0]
    row = lines[3].split()
    assert row[:3] == ["broken", "0.0500", "0.1000"]
    assert lines[3].count("[0.0800, 0.1200]") == 1
    assert row[5:7] == ["0.0900", "0.0700"]
    assert "50%" in lines[-1]


def test_demo_usage_error_exit_2(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["demo"])
    assert exc.value.code == 2


@pytest.fixture(scope="module")
def score_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("scores")
    s = make_parcels(1500, random_state=3)
    w = make_parcels(800, season="winter", random_state=4)
    src = s.source_prior
    back = w.true_proba * (src / w.prior)
    back /= back.sum(axis=1, keepdims=True)
    good = pd.DataFrame({"risk": s.true_proba[:, 1], "damaged": s.target})
    good.to_csv(d / "scores.csv", index=False)
    good.to_parquet(d / "scores.parquet")
    pd.DataFrame({"risk": back[:, 1]}).to_csv(d / "winter.csv", index=False)
    return d, good


def _report_args(path, out, *extra):
    return ["report", "--scores", str(path), "--score-column", "risk", "--label-column",
            "damaged", "--out", str(out), "--resamples", "20", *extra]


@pytest.mark.parametrize("name", ["scores.csv", "scores.parquet"])
def test_report_verb_good_files(score_files, tmp_path, capsys, name):
    d, good = score_files
    out = tmp_path / "r.html"
    code = main(_report_args(d / name, out, "--cost-fp", "3", "--cost-fn", "40",
                             "--capacity", "0.3", "--unlabelled", str(d / "winter.csv"),
                             "--batch-size", "400"))
    assert code == 0
    msg = capsys.readouterr().out
    ref = search_cutoff(good["risk"].to_numpy(), good["damaged"].to_numpy(),
                        {"fp": 3.0, "fn": 40.0}, capacity=0.3, score_bounds=(0, 1))
    assert f"cutoff {ref.cutoff:.4f}" in msg
    assert "applied by the rules" in msg  # the prevalence after the wrapper's evidence gate
    page = _parse(out)
    assert page.figures == ["fig-reliability", "fig-cost", "fig-decision-curve", "fig-prevalence",
                            "fig-alarm"]


def _write(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    "content, expected",
    [
        ("risk,label\n0.1,0\n0.8,1\n", ["no column 'damaged'", "--label-column"]),
        ("risk,damaged\n0.1,0\nhigh,1\n0.3,0\n", ["column 'risk', row 3", "'high'"]),
        ("risk,damaged\n0.1,0\n,1\n0.3,1\n", ["column 'risk', row 3", "the value is missing"]),
        ("risk,damaged\n0.1,0\n0.2,1\n0.3,nan\n", ["column 'damaged', row 4"]),
        ("", ["the file is empty"]),
        ("risk,damaged\n", ["no rows"]),
        ("risk,damaged\n0.1,0\n0.2,2\n0.3,1\n", ["column 'damaged'", "exactly two labels",
                                                 "holds 3: 0, 2, 1"]),
        ("risk,damaged\n0.1,0\n0.2,0\n", ["column 'damaged'", "exactly two labels",
                                          "one label only, 0"]),
        ("risk,damaged\n0.1,0\n1.7,1\n", ["column 'risk', row 3", "not a probability"]),
    ],
)
def test_report_verb_malformed_files(tmp_path, capsys, content, expected):
    path = _write(tmp_path, "bad.csv", content)
    out = tmp_path / "r.html"
    assert main(_report_args(path, out)) == 1
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "Traceback" not in err
    assert err.startswith("probwrap report: error: ") and str(path) in err
    for piece in expected:
        assert piece in err, err
    assert not out.exists()


def test_report_verb_missing_file_and_bad_unlabelled(tmp_path, capsys, score_files):
    d, _ = score_files
    assert main(_report_args(tmp_path / "nope.csv", tmp_path / "r.html")) == 1
    assert "file not found" in capsys.readouterr().err
    bad = _write(tmp_path, "u.csv", "risk\n0.2\n-0.1\n")
    assert main(_report_args(d / "scores.csv", tmp_path / "r.html", "--unlabelled",
                             str(bad))) == 1
    err = capsys.readouterr().err
    assert "u.csv: column 'risk', row 3" in err


@pytest.mark.parametrize(
    "extra",
    [["--cost-fp", "3"], ["--capacity", "1.5", "--cost-fp", "3", "--cost-fn", "4"],
     ["--capacity", "0.2"], ["--batch-size", "10"]],
)
def test_report_verb_usage_errors_exit_2(score_files, tmp_path, extra):
    d, _ = score_files
    with pytest.raises(SystemExit) as exc:
        main(_report_args(d / "scores.csv", tmp_path / "r.html", *extra))
    assert exc.value.code == 2


def test_report_verb_costs_without_separation_is_data_error(score_files, tmp_path, capsys):
    d, _ = score_files
    code = main(_report_args(d / "scores.csv", tmp_path / "r.html", "--cost-fp", "0",
                             "--cost-fn", "4"))
    assert code == 1
    assert "--cost-fp > --cost-tn" in capsys.readouterr().err


def test_demo_three_way_variant(tmp_path, capsys):
    """Ship / repack / hold with per-parcel costs: the printed numbers are the report's."""
    import numpy as np

    from probwrap.cli._demo import _three_way_frame, parcel_costs

    out = tmp_path / "three"
    assert main(["demo", "--variant", "three-way", "--out", str(out), "--n-train", "1500"]) == 0
    text = capsys.readouterr().out
    assert "ship / repack (4) / hold (12)" in text and "shift test p-value" in text
    page = _parse(out / "report.html")
    assert page.sections == ["calibration", "decisions", "prevalence", "cautions"]
    assert page.figures == ["fig-reliability", "fig-actions", "fig-class-prior"]
    # the "hold for every row" line: hold costs 12 whatever happens
    hold = next(t for t in text.splitlines() if "hold for every row" in t)
    assert hold.split()[4] == "12.000" and hold.split()[-1] == "100.0%"
    # the "ship for every row" cost is the mean ship cost of the test parcels' outcomes
    Xt, yt, _ = _three_way_frame(1000, 1)
    ship = next(t for t in text.splitlines() if "ship for every row" in t)
    expected = parcel_costs(Xt)[np.arange(yt.shape[0]), yt, 0].mean()
    assert float(ship.split()[4]) == pytest.approx(expected, abs=5e-4)
    winter = {line.split()[0]: line.split() for line in text.splitlines()
              if line.strip().split(" ")[0] in ("intact", "dented", "broken")}
    assert float(winter["dented"][2]) > float(winter["dented"][1])  # winter dents more often


def test_demo_unknown_variant_exit_2(tmp_path):
    with pytest.raises(SystemExit) as exc:
        main(["demo", "--variant", "four-way", "--out", str(tmp_path)])
    assert exc.value.code == 2


@pytest.fixture(scope="module")
def class_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("classes")
    s = make_parcels(1500, n_outcomes=3, random_state=5)
    frame = pd.DataFrame(s.true_proba, columns=s.target_names)
    frame["outcome"] = [s.target_names[i] for i in s.target]
    frame.to_csv(d / "three.csv", index=False)
    return d, s


def test_report_verb_class_columns(class_files, tmp_path, capsys):
    import numpy as np

    d, s = class_files
    out = tmp_path / "three.html"
    args = ["report", "--scores", str(d / "three.csv"), "--class-columns",
            "intact,dented,broken", "--label-column", "outcome", "--cost-matrix",
            "0,4,12;20,4,12;60,64,12", "--actions", "ship,repack,hold", "--capacity", "0.03",
            "--capacity-action", "hold", "--resamples", "10", "--out", str(out)]
    assert main(args) == 0
    text = capsys.readouterr().out
    assert "3 classes" in text
    page = _parse(out)
    assert page.figures == ["fig-reliability", "fig-actions"]
    # the printed mean cost is the Bayes rule filled within the hold capacity
    from probwrap.decision import budget_actions, fit_action_budget

    C = np.array([[0, 4, 12], [20, 4, 12], [60, 64, 12.0]])
    P = pd.read_csv(d / "three.csv")[["intact", "dented", "broken"]].to_numpy()
    E = P @ C
    b = fit_action_budget(E, 2, 0.03)
    acts = budget_actions(E, 2, b.saving_threshold)
    cost = float(text.split("rule in use ")[1].split()[0].rstrip(","))
    assert cost == pytest.approx(C[s.target, acts].mean(), abs=5e-5)


@pytest.mark.parametrize(
    "extra, code, message",
    [
        (["--cost-matrix", "0,4;20,4"], 2, "rows"),
        (["--cost-matrix", "0,4,12;20,4,12;60,64,12", "--actions", "ship,hold"], 2,
         "--actions"),
        (["--cost-matrix", "0,4,x;20,4,12;60,64,12"], 2, "--cost-matrix"),
        (["--cost-matrix", "0,4,12;20,4,12;60,64,12", "--actions", "ship,repack,hold",
          "--capacity", "0.1"], 2, "--capacity-action"),
    ],
)
def test_report_verb_class_columns_errors(class_files, tmp_path, capsys, extra, code, message):
    d, _ = class_files
    args = ["report", "--scores", str(d / "three.csv"), "--class-columns",
            "intact,dented,broken", "--label-column", "outcome", "--out",
            str(tmp_path / "x.html"), *extra]
    with pytest.raises(SystemExit) as exc:
        main(args)
    assert exc.value.code == code
    assert message in capsys.readouterr().err


def test_report_verb_class_columns_bad_labels(class_files, tmp_path, capsys):
    d, s = class_files
    frame = pd.read_csv(d / "three.csv")
    frame.loc[4, "outcome"] = "lost"
    frame.to_csv(tmp_path / "bad.csv", index=False)
    args = ["report", "--scores", str(tmp_path / "bad.csv"), "--class-columns",
            "intact,dented,broken", "--label-column", "outcome", "--out",
            str(tmp_path / "x.html")]
    assert main(args) == 1
    err = capsys.readouterr().err
    assert "bad.csv" in err and "row 6" in err and "'lost'" in err


def test_demo_writes_the_files_the_command_line_page_uses(tmp_path, capsys):
    """The docs' examples run as written on the demo's folder: heldout.csv / this-week.csv /
    winter.csv hold the summer-trained logistic regression's scores (recomputed here with
    scikit-learn directly), the outcome and the size class."""
    import json

    import pandas as pd
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap.datasets import make_parcels

    assert main(["demo", "--out", str(tmp_path), "--n-train", "2000", "--seed", "0"]) == 0
    assert "heldout.csv, this-week.csv, winter.csv" in capsys.readouterr().out
    held = pd.read_csv(tmp_path / "heldout.csv")
    week = pd.read_csv(tmp_path / "this-week.csv")
    assert list(held.columns) == ["parcel", "size", "risk", "damaged"]
    assert list(week.columns) == ["parcel", "size", "risk"]
    summer, test = make_parcels(2000, random_state=0), make_parcels(1000, random_state=1)
    winter = make_parcels(1000, season="winter", random_state=2)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000)).fit(
        summer.data, summer.target)
    np.testing.assert_allclose(held["risk"], model.predict_proba(test.data)[:, 1], atol=1e-6)
    np.testing.assert_allclose(week["risk"], model.predict_proba(winter.data)[:, 1], atol=1e-6)
    assert (held["damaged"] == "yes").tolist() == (test.target == 1).tolist()
    assert set(held["size"]) == {"light", "medium", "heavy"}
    # the pages' commands, in the demo's folder
    import os

    here = os.getcwd()
    os.chdir(tmp_path)
    try:
        assert main(["cutoff", "--scores", "heldout.csv", "--score-column", "risk",
                     "--label-column", "damaged", "--positive-label", "yes", "--cost-fp", "3",
                     "--cost-fn", "40", "--capacity", "0.1", "--resamples", "20"]) == 0
        capsys.readouterr()
        assert main(["prevalence", "--unlabelled", "this-week.csv", "--score-column", "risk",
                     "--reference", "heldout.csv", "--label-column", "damaged",
                     "--positive-label", "yes", "--resamples", "20", "--format", "json"]) == 0
        found = json.loads(capsys.readouterr().out)
        assert found["source_prevalence"] == pytest.approx(np.mean(test.target), abs=1e-12)
        assert found["n_rows"] == 1000 and found["n_reference_rows"] == 1000
        assert found["interval"][0] <= found["prevalence"] <= found["interval"][1]
        assert main(["report", "--scores", "heldout.csv", "--score-column", "risk",
                     "--label-column", "damaged", "--positive-label", "yes", "--cost-fp", "3",
                     "--cost-fn", "40", "--group-column", "size", "--resamples", "20",
                     "--out", "report-by-size.html"]) == 0
    finally:
        os.chdir(here)
    assert 'data-group="heavy"' in (tmp_path / "report-by-size.html").read_text(encoding="utf-8")
