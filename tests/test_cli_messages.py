"""One-line messages instead of tracebacks, options that agree across verbs, exact CSV
reading, the small-sample warning, the missing-extra message and a reproducible demo.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest

from _cli_helpers import run_cli as run
from probwrap.cli import build_parser, join_negative_values, main
from probwrap.cli._common import MIN_RESAMPLES
from probwrap.cli._tables import numeric_column, read_table

pytestmark = pytest.mark.usefixtures("no_progress_lines")


def usage_error(capsys, *argv):
    with pytest.raises(SystemExit) as info:
        main([str(a) for a in argv])
    err = capsys.readouterr().err
    return info.value.code, err.strip().splitlines()[-1]


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    root = tmp_path_factory.mktemp("messages")
    rng = np.random.default_rng(2)
    p = rng.uniform(0.02, 0.9, size=600)
    y = (rng.uniform(size=600) < p).astype(int)
    pd.DataFrame({"risk": p, "damaged": y}).to_csv(root / "held.csv", index=False)
    pd.DataFrame({"risk": p[:200]}).to_csv(root / "week.csv", index=False)
    assert main(["calibrate", "fit", "--scores", str(root / "held.csv"), "--score-column",
                 "risk", "--label-column", "damaged", "--method", "platt",
                 "--out", str(root / "map.json")]) == 0
    return root


def _one_line_error(code, err, verb):
    lines = [line for line in err.strip().splitlines() if ": warning: " not in line]
    assert code == 1, err
    assert len(lines) == 1 and "Traceback" not in err, err
    assert lines[0].startswith(f"probwrap {verb}: error: ")
    return lines[0]


# -- map files -----------------------------------------------------------------------------------
def _apply(root, map_path, *extra):
    return ["calibrate", "apply", "--map", map_path, "--scores", root / "week.csv",
            "--score-column", "risk", "--out", root / "o.csv", *extra]


def test_apply_map_that_is_a_folder(files, tmp_path, capsys):
    code, _, err = run(capsys, *_apply(files, tmp_path))
    assert "is a folder" in _one_line_error(code, err, "calibrate")


def test_apply_map_with_metadata_not_an_object(files, tmp_path, capsys):
    bad = json.loads((files / "map.json").read_text())
    bad["metadata"] = [1, 2]
    (tmp_path / "m.json").write_text(json.dumps(bad))
    code, _, err = run(capsys, *_apply(files, tmp_path / "m.json"))
    assert "metadata" in _one_line_error(code, err, "calibrate")


def test_apply_deeply_nested_json(files, tmp_path, capsys):
    (tmp_path / "deep.json").write_text("[" * 100_000 + "]" * 100_000)
    code, _, err = run(capsys, *_apply(files, tmp_path / "deep.json"))
    assert "deep.json" in _one_line_error(code, err, "calibrate")


def _without_scale(description):
    description = dict(description)
    description.pop("score_scale", None)
    description["metadata"] = {k: v for k, v in description.get("metadata", {}).items()
                               if k != "score_scale"}
    return description


def test_apply_scale_flag_for_a_map_without_its_scale(files, tmp_path, capsys):
    saved = json.loads((files / "map.json").read_text())
    (tmp_path / "noscale.json").write_text(json.dumps(_without_scale(saved)))
    # no scale anywhere: refused, naming the flag that exists on apply
    code, _, err = run(capsys, *_apply(files, tmp_path / "noscale.json"))
    assert "--scale" in _one_line_error(code, err, "calibrate")
    assert "--scale" in "".join(build_parser()._subparsers._group_actions[0]
                                .choices["calibrate"]._subparsers._group_actions[0]
                                .choices["apply"].format_help())
    # with --scale: the same output as the map that records its scale
    assert run(capsys, *_apply(files, files / "map.json"))[0] == 0
    expected = pd.read_csv(files / "o.csv")["calibrated_probability"].to_numpy()
    code, _, err = run(capsys, *_apply(files, tmp_path / "noscale.json", "--scale", "proba"))
    assert code == 0, err
    got = pd.read_csv(files / "o.csv")["calibrated_probability"].to_numpy()
    np.testing.assert_array_equal(got, expected)
    # a scale that contradicts the file: refused
    code, _, err = run(capsys, *_apply(files, files / "map.json", "--scale", "log-odds"))
    line = _one_line_error(code, err, "calibrate")
    assert "proba" in line and "log-odds" in line


# -- values that used to trace back --------------------------------------------------------------
def test_source_prevalence_denormal(files, capsys):
    code, _, err = run(capsys, "prevalence", "--unlabelled", files / "week.csv", "--score-column",
                       "risk", "--source-prevalence", "5e-324", "--resamples", "0")
    line = _one_line_error(code, err, "prevalence")
    assert "np.float64" not in line and "source prevalence" in line


@pytest.mark.parametrize(
    ("extra", "flag"),
    [
        (["--cost-fp", "inf", "--cost-fn", "40"], "--cost-fp"),
        (["--bins", "100000"], "--bins"),
        (["--bins", "0"], "--bins"),
        (["--resamples", "3"], "--resamples"),
        (["--capacity", "nan", "--cost-fp", "3", "--cost-fn", "40"], "--capacity"),
    ],
)
def test_report_bad_values_blame_only_their_flag(files, tmp_path, capsys, extra, flag):
    code, line = usage_error(capsys, "report", "--scores", files / "held.csv", "--score-column",
                             "risk", "--label-column", "damaged", "--out", tmp_path / "r.html",
                             *extra)
    assert code == 2
    named = set(re.findall(r"--[a-z-]+", line))
    assert named == {flag}, line


def test_report_bins_within_range_but_more_than_rows_is_fine(files, tmp_path, capsys):
    code, _, err = run(capsys, "report", "--scores", files / "held.csv", "--score-column",
                       "risk", "--label-column", "damaged", "--bins", "1000", "--resamples",
                       "10", "--out", tmp_path / "r.html")
    assert code in (0, 1), err
    if code == 1:
        _one_line_error(code, err, "report")


def test_no_numpy_reprs_and_no_control_bytes_in_messages(tmp_path, capsys):
    (tmp_path / "p.csv").write_text("risk,damaged\n0.1,0\n1.7,1\n")
    code, _, err = run(capsys, "report", "--scores", tmp_path / "p.csv", "--score-column",
                       "risk", "--label-column", "damaged", "--out", tmp_path / "r.html")
    line = _one_line_error(code, err, "report")
    assert "np.float64" not in line and "1.7 is not a probability" in line
    (tmp_path / "c.csv").write_text("risk,dam\x1b[31maged\n0.1,0\n0.4,1\n")
    code, _, err = run(capsys, "cutoff", "--scores", tmp_path / "c.csv", "--score-column",
                       "r\x07isk", "--label-column", "x", "--cost-fp", "1", "--cost-fn", "2")
    line = _one_line_error(code, err, "cutoff")
    assert "\x1b" not in err and "\x07" not in err
    assert "\\x1b[31m" in line and "\\x07" in line


def test_pandas_parse_error_is_one_line(tmp_path, capsys):
    (tmp_path / "ragged.csv").write_text("risk,damaged\n0.1,0\n0.2,1,3,4\n")
    code, _, err = run(capsys, "cutoff", "--scores", tmp_path / "ragged.csv", "--score-column",
                       "risk", "--label-column", "damaged", "--cost-fp", "1", "--cost-fn", "2")
    line = _one_line_error(code, err, "cutoff")
    assert "ragged.csv: line 3 has 4 fields but the header has 2" in line


# -- options agree across verbs ------------------------------------------------------------------
def _subparser(*path):
    parser = build_parser()
    for name in path:
        parser = parser._subparsers._group_actions[0].choices[name]
    return parser


LABELLED = [("calibrate", "fit"), ("cutoff",), ("prevalence",), ("report",)]


@pytest.mark.parametrize("path", LABELLED)
def test_labelled_verbs_share_scale_and_positive_label(path):
    text = _subparser(*path).format_help()
    assert "--scale {proba,percent,log-odds}" in text and "--positive-label VALUE" in text


@pytest.mark.parametrize("path", [("cutoff",), ("prevalence",), ("report",)])
def test_summary_verbs_share_format_and_resamples(path, capsys, tmp_path):
    parser = _subparser(*path)
    text = " ".join(parser.format_help().split())
    assert "--format {text,json}" in text and "how to print the summary" in text
    assert f"at least {MIN_RESAMPLES}" in text
    with pytest.raises(SystemExit):
        parser.parse_args(["--resamples", str(MIN_RESAMPLES - 1)])
    assert f"must be at least {MIN_RESAMPLES}" in capsys.readouterr().err


@pytest.mark.parametrize(
    ("argv", "suffix"),
    [
        (["calibrate", "apply", "--map", "m.json", "--scores", "s.csv", "--score-column", "r",
          "--out", "x.xlsx"], ".xlsx"),
        (["calibrate", "fit", "--scores", "s.csv", "--score-column", "r", "--label-column", "y",
          "--out", "m.txt"], ".txt"),
        (["report", "--scores", "s.csv", "--score-column", "r", "--label-column", "y",
          "--out", "r.pdf"], ".pdf"),
    ],
)
def test_unsupported_output_types_are_refused(capsys, tmp_path, monkeypatch, argv, suffix):
    monkeypatch.chdir(tmp_path)
    code, line = usage_error(capsys, *argv)
    assert code == 2 and f"unsupported file type {suffix}" in line
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("verb", ["report", "apply"])
def test_missing_output_folders_are_created_everywhere(files, tmp_path, capsys, verb):
    out = tmp_path / "new" / "deeper" / ("r.html" if verb == "report" else "o.csv")
    argv = (["report", "--scores", files / "held.csv", "--score-column", "risk",
             "--label-column", "damaged", "--resamples", "10", "--out", out]
            if verb == "report" else
            ["calibrate", "apply", "--map", files / "map.json", "--scores", files / "week.csv",
             "--score-column", "risk", "--out", out])
    code, _, err = run(capsys, *argv)
    assert code == 0, err
    assert out.exists()


# -- small samples, exact reading ----------------------------------------------------------------
def test_small_sample_warning_below_30_rows(tmp_path, capsys):
    (tmp_path / "four.csv").write_text("risk,damaged\n0.1,0\n0.2,0\n0.7,1\n0.8,1\n")
    code, _, err = run(capsys, "prevalence", "--unlabelled", tmp_path / "four.csv",
                       "--score-column", "risk", "--source-prevalence", "0.3",
                       "--resamples", "0")
    assert code == 0
    assert "only 4 unlabelled rows" in err and "fewer than 30" in err
    code, _, err = run(capsys, "report", "--scores", tmp_path / "four.csv", "--score-column",
                       "risk", "--label-column", "damaged", "--resamples", "10",
                       "--unlabelled", tmp_path / "four.csv", "--out", tmp_path / "r.html")
    assert "only 4 labelled rows" in err and "only 4 unlabelled rows" in err


def test_csv_numbers_read_back_exactly_without_deprecated_options(tmp_path, recwarn):
    rng = np.random.default_rng(3)
    values = np.concatenate([rng.uniform(size=5000), rng.uniform(size=5000) * 1e-300,
                             rng.normal(size=5000) * 1e300])
    (tmp_path / "x.csv").write_text("x\n" + "\n".join(repr(float(v)) for v in values) + "\n")
    frame = read_table(tmp_path / "x.csv", exact=["x"])
    got = numeric_column(frame, "x", "x.csv", flag="--x")
    np.testing.assert_array_equal(got, values)  # Python's repr round-trips (Steele-White/Gay)
    assert not [w for w in recwarn if "float_precision" in str(w.message)]


# -- missing optional packages -------------------------------------------------------------------
_BLOCKED = textwrap.dedent("""
    import importlib.abc, sys
    class Block(importlib.abc.MetaPathFinder):  # as if the cli extra were not installed
        def find_spec(self, name, path=None, target=None):
            if name.split(".")[0] in ("pandas", "pyarrow", "tqdm"):
                raise ModuleNotFoundError(f"No module named {name!r}", name=name)
            return None
    sys.meta_path.insert(0, Block())
    from probwrap.cli import main
    sys.exit(main(sys.argv[1:]))
""")


@pytest.mark.parametrize(
    "argv",
    [
        ["cutoff", "--scores", "held.csv", "--score-column", "risk", "--label-column",
         "damaged", "--cost-fp", "3", "--cost-fn", "40"],
        ["calibrate", "fit", "--scores", "held.csv", "--score-column", "risk",
         "--label-column", "damaged", "--out", "m.json"],
        ["prevalence", "--unlabelled", "week.csv", "--score-column", "risk",
         "--source-prevalence", "0.04"],
        ["report", "--scores", "held.csv", "--score-column", "risk", "--label-column",
         "damaged", "--out", "r.html"],
        ["demo", "--variant", "three-way", "--out", "demo3"],
    ],
)
def test_missing_extra_is_one_line_naming_it(files, argv):
    proc = subprocess.run([sys.executable, "-c", _BLOCKED, *argv], capture_output=True,
                          text=True, timeout=120, cwd=files)
    assert proc.returncode == 1, proc.stderr
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert "'pandas'" in lines[0] and 'pip install "probwrap[cli]"' in lines[0]


# -- the demo's seed ------------------------------------------------------------------------------
def _demo(tmp_path, name, seed):
    proc = subprocess.run(
        [sys.executable, "-m", "probwrap.cli", "demo", "--out", str(tmp_path / name),
         "--n-train", "1000", "--seed", str(seed)],
        capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, proc.stderr
    summary = [line for line in proc.stdout.splitlines() if "report  " not in line]
    page = (tmp_path / name / "report.html").read_text()
    # figure files carry their creation time; everything else must match
    return summary, re.sub(r"<dc:date>[^<]*</dc:date>", "", page)


def test_demo_same_seed_same_output(tmp_path):
    first = _demo(tmp_path, "a", 5)
    second = _demo(tmp_path, "b", 5)
    assert first[0] == second[0]
    assert first[1] == second[1]


# -- progress ------------------------------------------------------------------------------------
def test_progress_off_a_terminal_prints_plain_lines_for_long_steps(monkeypatch, capsys):
    import time

    import probwrap.cli._progress as common

    monkeypatch.setattr(common, "_terminal", lambda: False)
    monkeypatch.setattr(common, "PROGRESS_DELAY", 0.2)
    with common.Stages("demo", ["quick", "long"]) as stages:
        stages.start("quick")
        stages.start("long")
        stages.detail("bootstrap", 3, 10)
        time.sleep(1.2)
    err = capsys.readouterr().err
    assert "probwrap demo: step 2/2: long: bootstrap 3/10" in err
    assert "quick" not in err  # a quick step prints nothing
    assert all(line.startswith("probwrap demo: step") for line in err.splitlines())


def test_progress_on_a_terminal_counts_steps_to_the_end(monkeypatch, capsys):
    import time

    import probwrap.cli._progress as common

    monkeypatch.setattr(common, "_terminal", lambda: True)
    monkeypatch.setattr(common, "PROGRESS_DELAY", 0.0)
    with common.Stages("demo", ["one", "two", "three"]) as stages:
        for name in ("one", "two", "three"):
            stages.start(name)
            time.sleep(0.6)
    err = capsys.readouterr().err
    assert "demo: two" in err and "1/3 steps" in err and "3/3 steps" in err
    assert "<" not in err.split("3/3 steps")[0].rsplit("\r", 1)[-1]  # no ETA shown


def test_semicolon_tab_and_decimal_comma_files_read_like_the_comma_file(files, tmp_path, capsys):
    # Spreadsheets in many European locales save ';'-separated files with decimal commas; the
    # first attempt at such a file used to stop with "no column 'risk'; the file has columns
    # 'risk;damaged'". Each variant must give the comma file's numbers exactly.
    held = pd.read_csv(files / "held.csv")
    args = ["--score-column", "risk", "--label-column", "damaged", "--cost-fp", 3,
            "--cost-fn", 40, "--resamples", 0, "--format", "json"]
    code, ref, err = run(capsys, "cutoff", "--scores", files / "held.csv", *args)
    assert code == 0, err
    variants = {
        "semi.csv": dict(sep=";"),
        "semi_comma.csv": dict(sep=";", decimal=","),
        "tab.tsv": dict(sep="\t"),
        "bom.csv": dict(encoding="utf-8-sig"),
    }
    for name, how in variants.items():
        held.to_csv(tmp_path / name, index=False, float_format="%.17g", **how)
        code, out, err = run(capsys, "cutoff", "--scores", tmp_path / name, *args)
        assert code == 0, (name, err)
        got, want = json.loads(out), json.loads(ref)
        # to 1e-12: pandas < 2.2 parses floats to within one unit in the last place
        assert abs(got["cutoff"] - want["cutoff"]) <= 1e-12, name
        assert got["n_positive"] == want["n_positive"], name


def test_auto_candidates_print_the_standard_error_of_the_difference(files, tmp_path, capsys):
    # The standard error in method_scores_ is that of a candidate's difference from the lowest
    # log loss; it used to print as "(+- 0.00000)" beside the lowest, read as "no uncertainty".
    code, out, err = run(capsys, "calibrate", "fit", "--scores", files / "held.csv",
                         "--score-column", "risk", "--label-column", "damaged", "--method",
                         "auto", "--out", tmp_path / "auto.json")
    assert code == 0, err
    assert "+-" not in out
    assert "standard error of the difference from the lowest" in out
    saved = json.loads((tmp_path / "auto.json").read_text())["metadata"]["auto_log_loss"]
    lowest = min(saved, key=lambda m: saved[m]["log_loss"])
    assert re.search(rf"^  {lowest}\s+\S+\s+\(lowest\)", out, flags=re.M)


def test_cutoff_says_why_the_bayes_and_kept_cutoffs_are_missing(files, capsys):
    # zero or negative error costs: the least-cost search runs (a gain for a false positive is a
    # valid cost table), but CostPolicyWrapper and the Bayes cutoff refuse them; the lines for
    # both used to vanish from the output without a word
    code, out, err = run(capsys, "cutoff", "--scores", files / "held.csv", "--score-column",
                         "risk", "--label-column", "damaged", "--cost-fp", "0", "--cost-fn",
                         "4", "--resamples", "0")
    assert code == 0 and "Traceback" not in err
    assert "at Bayes cutoff" not in out and "settled cutoff" not in out
    assert "probwrap cutoff: warning: no Bayes cutoff, and so no settled cutoff" in err
    assert "c_fp - c_tn = 0" in err and "CostPolicyWrapper" not in err


# -- seeds ---------------------------------------------------------------------------------------
_SEED_VERBS = {
    "calibrate fit": ["calibrate", "fit", "--scores", "held.csv", "--score-column", "risk",
                      "--label-column", "damaged", "--out", "m.json"],
    "cutoff": ["cutoff", "--scores", "held.csv", "--score-column", "risk", "--label-column",
               "damaged", "--cost-fp", "3", "--cost-fn", "40"],
    "prevalence": ["prevalence", "--unlabelled", "week.csv", "--score-column", "risk",
                   "--source-prevalence", "0.3"],
    "report": ["report", "--scores", "held.csv", "--score-column", "risk", "--label-column",
               "damaged", "--out", "r.html"],
    "demo": ["demo", "--out", "d"],
}


@pytest.mark.parametrize("verb", sorted(_SEED_VERBS))
@pytest.mark.parametrize("seed", ["-1", "4294967296", "1.5"])
def test_seed_out_of_range_is_a_usage_error_on_every_verb(capsys, tmp_path, monkeypatch, verb,
                                                          seed):
    """NumPy takes seeds 0 .. 2**32 - 1: -1 used to end in a traceback (demo) or a message that
    blamed the data file, and 2**32 changed cutoff's answer without a word."""
    monkeypatch.chdir(tmp_path)
    code, line = usage_error(capsys, *_SEED_VERBS[verb], "--seed", seed)
    assert code == 2
    assert line.startswith(f"probwrap {verb}: error: argument --seed:")
    assert "0 to 4294967295 (2**32 - 1)" in line
    assert list(tmp_path.iterdir()) == []


def test_largest_seed_is_accepted():
    args = build_parser().parse_args(["demo", "--out", "d", "--seed", str(2**32 - 1)])
    assert args.seed == 2**32 - 1


# -- a reader that stops early -------------------------------------------------------------------
@pytest.mark.parametrize("argv", [
    ["prevalence", "--unlabelled", "week.csv", "--score-column", "risk",
     "--source-prevalence", "0.3", "--batch-size", "50", "--resamples", "10",
     "--format", "json"],
    ["cutoff", "--help"],
])
def test_closed_output_pipe_ends_quietly(files, argv):
    """``probwrap ... | head -1`` used to end in a BrokenPipeError traceback. The reading end is
    closed before the command writes anything, so every write fails."""
    proc = subprocess.Popen([sys.executable, "-m", "probwrap.cli", *argv], cwd=files,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    proc.stdout.close()
    err = proc.stderr.read()
    proc.stderr.close()
    assert proc.wait(timeout=120) in (0, 1)
    assert "Traceback" not in err and "BrokenPipe" not in err and "Exception ignored" not in err


# -- values that start with '-' ------------------------------------------------------------------
def test_negative_cost_in_exponent_form_is_read_in_both_forms(files, capsys):
    """``--cost-tn -1e-1`` used to stop with "expected one argument" (argparse takes only plain
    numbers such as -5 for values); it now means the same as ``--cost-tn=-1e-1``."""
    base = ["cutoff", "--scores", files / "held.csv", "--score-column", "risk",
            "--label-column", "damaged", "--cost-fp", "3", "--cost-fn", "40",
            "--resamples", "0", "--format", "json"]
    code_a, out_a, err_a = run(capsys, *base, "--cost-tn", "-1e-1")
    code_b, out_b, _ = run(capsys, *base, "--cost-tn=-1e-1")
    code_c, out_c, _ = run(capsys, *base)
    assert code_a == code_b == code_c == 0, err_a
    assert out_a == out_b
    a, c = json.loads(out_a), json.loads(out_c)
    # a gain of 0.1 on every true negative: the cost of acting on no row drops by 0.1 times
    # the share of negatives
    share_negative = 1 - pd.read_csv(files / "held.csv")["damaged"].mean()
    assert a["costs"]["tn"] == -0.1
    assert a["cost_flag_none"] == pytest.approx(c["cost_flag_none"] - 0.1 * share_negative,
                                                rel=1e-12)


@pytest.mark.parametrize("form", [["--cost-matrix", "-5,4,12;30,4,12;60,60,12"],
                                  ["--cost-matrix=-5,4,12;30,4,12;60,60,12"]])
def test_cost_matrix_with_a_gain_first(form):
    args = build_parser().parse_args(join_negative_values(
        ["report", "--scores", "s.csv", "--class-columns", "a,b,c", "--label-column", "y",
         *form, "--actions", "x,y,z", "--out", "r.html"]))
    assert args.cost_matrix == "-5,4,12;30,4,12;60,60,12"
