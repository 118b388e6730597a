"""Options that were accepted and then ignored or misread, and small file cases: alarm settings
without batches, a score column for an unlabelled file that is not read, a half-given guarantee,
an ``--out`` that is only an extension, a map file with a byte-order mark, an ``--out`` that is
a symbolic link, and late-label events written True / False. Data: logistic-regression
probabilities on scikit-learn's bundled breast cancer set.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap.cli import main

pytestmark = pytest.mark.usefixtures("no_progress_lines")


@pytest.fixture(scope="module")
def root(tmp_path_factory):
    root = tmp_path_factory.mktemp("options")
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X[:, :5])
    p = LogisticRegression().fit(X, y).predict_proba(X)[:, 1]
    frame = pd.DataFrame({"risk": p, "y": y, "days": 10 + np.arange(y.shape[0]) % 40})
    frame["claimed"] = frame["y"].astype(bool)
    frame.to_csv(root / "held.csv", index=False)
    frame[["risk"]].to_csv(root / "week.csv", index=False)
    frame.assign(no=1 - p, yes=p, outcome=np.where(y == 1, "yes", "no"))[
        ["no", "yes", "outcome"]].to_csv(root / "two.csv", index=False)
    assert main(["calibrate", "fit", "--scores", str(root / "held.csv"), "--score-column",
                 "risk", "--label-column", "y", "--method", "platt",
                 "--out", str(root / "map.json")]) == 0
    return root


def _usage_error(capsys, argv):
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    assert info.value.code == 2
    return capsys.readouterr().err.strip().splitlines()[-1]


def _prevalence(root, *extra):
    return ["prevalence", "--unlabelled", root / "week.csv", "--score-column", "risk",
            "--source-prevalence", "0.3", "--resamples", "0", *extra]


def _report(root, *extra):
    return ["report", "--scores", root / "held.csv", "--score-column", "risk",
            "--label-column", "y", "--resamples", "10", "--out", root / "r.html", *extra]


@pytest.mark.parametrize("flags", [["--alarm-decision-interval", "4"],
                                   ["--alarm-reference", "1"],
                                   ["--alarm-reference", "1", "--alarm-decision-interval", "4"]])
def test_alarm_settings_without_batches_are_refused(root, capsys, flags):
    """They used to be accepted and ignored (exit 0): no batches, no alarm."""
    line = _usage_error(capsys, _prevalence(root, *flags))
    assert line.startswith("probwrap prevalence: error: ")
    named = [f for f in flags if f.startswith("--")]
    assert " and ".join(named) in line and "--batch-size or --batch-column" in line
    line = _usage_error(capsys, _report(root, "--unlabelled", root / "week.csv", *flags))
    assert " and ".join(named) in line and "--batch-size (with --unlabelled)" in line


def test_alarm_settings_with_batches_are_used(root, capsys):
    code = main([str(a) for a in _prevalence(root)][:-2] + [
        "--resamples", "10", "--batch-size", "100", "--alarm-decision-interval", "4",
        "--format", "json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 0
    assert out["alarm"]["decision_interval"] == 4.0 and out["alarm"]["reference"] == 0.5


def test_unlabelled_score_column_that_would_be_ignored(root, capsys):
    line = _usage_error(capsys, [
        "report", "--scores", root / "two.csv", "--class-columns", "no,yes", "--label-column",
        "outcome", "--unlabelled", root / "two.csv", "--unlabelled-score-column", "yes",
        "--out", root / "r.html"])
    assert "--unlabelled-score-column is for binary score files" in line
    line = _usage_error(capsys, _report(root, "--unlabelled-score-column", "risk"))
    assert "--unlabelled-score-column needs --unlabelled" in line


@pytest.mark.parametrize("verb", ["cutoff", "report"])
def test_half_a_guarantee_is_a_usage_error(root, capsys, verb):
    """--guarantee without --guarantee-target used to exit 1, as if the data were wrong."""
    base = (["cutoff", "--scores", root / "held.csv", "--score-column", "risk",
             "--label-column", "y", "--resamples", "0"] if verb == "cutoff" else _report(root))
    base += ["--cost-fp", "3", "--cost-fn", "40"]
    line = _usage_error(capsys, [*base, "--guarantee", "recall"])
    assert line == f"probwrap {verb}: error: --guarantee recall needs --guarantee-target (e.g. 0.9)"
    line = _usage_error(capsys, [*base, "--guarantee-target", "0.9"])
    assert line.endswith("--guarantee-target needs --guarantee (which metric)")


def test_out_that_is_only_an_extension(root, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    line = _usage_error(capsys, ["calibrate", "fit", "--scores", root / "held.csv",
                                 "--score-column", "risk", "--label-column", "y",
                                 "--out", ".json"])
    assert "--out .json: the file name is only the extension" in line and "out.json" in line
    assert list(tmp_path.iterdir()) == []


def test_map_file_with_a_byte_order_mark_loads(root, capsys, tmp_path):
    """Editors on Windows save JSON with a UTF-8 byte-order mark; CSV files with one were read,
    map files refused."""
    (tmp_path / "bom.json").write_bytes(b"\xef\xbb\xbf" + (root / "map.json").read_bytes())
    for name in ("map.json", "bom.json"):
        folder = root if name == "map.json" else tmp_path
        code = main(["calibrate", "apply", "--map", str(folder / name), "--scores",
                     str(root / "week.csv"), "--score-column", "risk",
                     "--out", str(tmp_path / f"{name}.csv")])
        assert code == 0, capsys.readouterr().err
    assert ((tmp_path / "map.json.csv").read_bytes()
            == (tmp_path / "bom.json.csv").read_bytes())


def test_out_symlink_is_written_through(root, capsys, tmp_path):
    """The link used to be replaced by a plain file, leaving the file it pointed to stale."""
    target = tmp_path / "real" / "map.json"
    target.parent.mkdir()
    target.write_text("old")
    link = tmp_path / "current.json"
    link.symlink_to(target)
    code = main(["calibrate", "fit", "--scores", str(root / "held.csv"), "--score-column",
                 "risk", "--label-column", "y", "--method", "platt", "--out", str(link)])
    assert code == 0, capsys.readouterr().err
    assert link.is_symlink() and os.path.realpath(link) == os.path.realpath(target)
    assert json.loads(target.read_text())["method"] == "platt"
    assert sorted(p.name for p in target.parent.iterdir()) == ["map.json"]


def test_late_label_events_true_false_read_as_one_zero(root, capsys, tmp_path):
    """An event column of True / False (as label columns take) was refused: "'True' is not a
    finite number"."""
    frame = pd.read_csv(root / "held.csv")
    frame["claimed01"] = frame["claimed"].astype(int)
    frame["claimed_words"] = np.where(frame["claimed"], "true", "FALSE")
    frame.to_csv(tmp_path / "claims.csv", index=False)
    frame.to_parquet(tmp_path / "claims.parquet")
    outs = []
    for path, column in [("claims.csv", "claimed01"), ("claims.csv", "claimed"),
                         ("claims.csv", "claimed_words"), ("claims.parquet", "claimed")]:
        code = main(["cutoff", "--scores", str(tmp_path / path), "--score-column", "risk",
                     "--time-column", "days", "--event-column", column, "--horizon", "20",
                     "--cost-fp", "3", "--cost-fn", "40", "--resamples", "0",
                     "--format", "json"])
        out, err = capsys.readouterr()
        assert code == 0, err
        outs.append(json.loads(out))
    assert all(o == outs[0] for o in outs[1:])
    assert outs[0]["late_labels"]["open_rows"] > 0
