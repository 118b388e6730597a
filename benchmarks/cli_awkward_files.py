"""Every verb of the command line on score files in the shapes users have them.

Held-out probabilities of a scaled logistic regression on scikit-learn's breast cancer set
(289 rows, the same rows as ``tests/_cli_helpers.cancer_held_out``) are written to CSV and
Parquet as spreadsheets, databases and scripts write them: ``;`` with decimal commas, a
byte-order mark with Windows line ends, Latin-1, quoted numbers, missing-value marks, labels in
many spellings, trailing separators and blank lines, no header, a name twice (named by an option
or not), gzip, TSV (written back as TSV by ``calibrate apply``),
Parquet dtypes and indexes, an empty file, a header alone, scores that are all one value, a path
with spaces and non-ASCII letters. Each file goes through ``cutoff``, ``calibrate fit``,
``calibrate apply`` (with a map fitted on the
plain file), ``prevalence --source-prevalence`` and (without ``--quick``) ``report``;
the table prints each verb's exit code, the cutoff and estimate where it ran, and the first
line of the message or of the warnings.

Run: PYTHONPATH=$PWD python benchmarks/cli_awkward_files.py [--quick]
"""

import contextlib
import csv
import io
import json
import sys
import tempfile
import traceback
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))


def held_out() -> pd.DataFrame:
    """The breast-cancer held-out scores (as ``tests/_cli_helpers.cancer_held_out``)."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    order = np.random.default_rng(0).permutation(y.size)
    fit, held = order[:280], order[280:]
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1)).fit(X[fit], y[fit])
    p = model.predict_proba(X[held])[:, 1]
    return pd.DataFrame({"id": np.arange(held.size), "score": np.round(p, 6), "y": y[held]})


def run(*argv) -> tuple[object, str, str]:
    """``probwrap`` in this process; a traceback is caught and reported as such."""
    from probwrap.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main([str(a) for a in argv])
        except SystemExit as exc:
            code = exc.code
        except Exception:
            code = "TRACEBACK"
            traceback.print_exc(file=err)
    return code, out.getvalue(), err.getvalue()


def variants(b: pd.DataFrame) -> dict:
    """name -> (writer(path), file suffix, --score-column, --positive-label, more options)."""
    yn = b.assign(y=np.where(b.y == 1, "yes", "no"))
    v = {}

    def add(name, writer, ext=".csv", sc="score", pos=None, extra=()):
        v[name] = (writer, ext, sc, pos, extra)

    add("semicolon, decimal commas", lambda p: b.to_csv(p, sep=";", decimal=",", index=False))
    add("BOM, CRLF", lambda p: b.to_csv(p, index=False, encoding="utf-8-sig",
                                        lineterminator="\r\n"))
    add("Latin-1 header", lambda p: b.rename(columns={"score": "Probabilité"}).to_csv(
        p, index=False, encoding="latin-1"), sc="Probabilité")
    add("Latin-1 header, --encoding latin-1", lambda p: b.rename(
        columns={"score": "Probabilité"}).to_csv(p, index=False, encoding="latin-1"),
        sc="Probabilité", extra=("--encoding", "latin-1"))
    add("every field quoted", lambda p: b.to_csv(p, index=False, quoting=csv.QUOTE_ALL))
    for tok in ["NA", "", "?", "."]:
        def missing(p, tok=tok, col="score"):
            t = b.astype(object)
            t.loc[[3, 10], col] = tok
            t.to_csv(p, index=False)
        add(f"score missing as {tok!r}", missing)
        add(f"label missing as {tok!r}", lambda p, tok=tok: missing(p, tok, "y"))
    for a, c, pos in [("yes", "no", "yes"), ("TRUE", "FALSE", None), ("Y", "N", "Y"),
                      ("2", "1", "2"), ("1.0", "0.0", None), (" yes", " no", " yes")]:
        add(f"labels {a!r}/{c!r}", lambda p, a=a, c=c: b.assign(
            y=np.where(b.y == 1, a, c)).to_csv(p, index=False), pos=pos)

    def stray(p):
        t = yn.copy()
        t.loc[[5, 7], "y"] = " yes"
        t.to_csv(p, index=False)
    add("' yes' in 2 rows of yes/no", stray, pos="yes")
    add("blank lines at the end", lambda p: p.write_text(b.to_csv(index=False) + "\n\n\n"))
    add("separator at every line end", lambda p: p.write_text(
        "\n".join(line + "," for line in b.to_csv(index=False).splitlines()) + "\n"))
    add("no header line", lambda p: b.to_csv(p, index=False, header=False))
    add("a column name twice", lambda p: b.assign(s2=b.score).rename(
        columns={"s2": "score"}).to_csv(p, index=False))
    # a spreadsheet export with two "notes" columns that no option names (read since
    # 5 December 2026; calibrate apply writes both back)
    def notes_twice(sep):
        return lambda p: b.assign(n1="a, b", n2="c").rename(
            columns={"n1": "notes", "n2": "notes"}).to_csv(p, index=False, sep=sep)
    add("an unused name twice", notes_twice(","))
    add("an unused name twice, TSV", notes_twice("\t"), ext=".tsv")
    add("gzip", lambda p: b.to_csv(p, index=False, compression="gzip"), ext=".csv.gz")
    add("TSV", lambda p: b.to_csv(p, index=False, sep="\t"), ext=".tsv")
    add("Parquet, categorical labels", lambda p: yn.assign(
        y=yn.y.astype("category")).to_parquet(p), ext=".parquet", pos="yes")
    add("Parquet, boolean labels", lambda p: b.assign(y=b.y.astype("boolean")).to_parquet(p),
        ext=".parquet")
    add("Parquet, Int64 labels", lambda p: b.assign(y=b.y.astype("Int64")).to_parquet(p),
        ext=".parquet")
    add("Parquet, score as index", lambda p: b.set_index("score").to_parquet(p),
        ext=".parquet")
    add("empty file", lambda p: p.write_text(""))
    add("header only", lambda p: p.write_text("id,score,y\n"))
    add("every score 0.5", lambda p: b.assign(score=0.5).to_csv(p, index=False))
    add("path with spaces, ü", lambda p: b.to_csv(p, index=False), ext=" Prüfung (v2).csv")
    return v


def first_line(text: str) -> str:
    lines = [line for line in text.splitlines() if line.strip() and "step " not in line]
    return lines[0][:150] if lines else ""


def main(quick: bool = False) -> None:
    b = held_out()
    folder = Path(tempfile.mkdtemp(prefix="probwrap awkward "))
    costs = ("--cost-fp", 1, "--cost-fn", 5)
    # calibrate apply uses a map fitted on the plain file (a failed fit leaves no map)
    b.to_csv(folder / "plain.csv", index=False)
    run("calibrate", "fit", "--scores", folder / "plain.csv", "--score-column", "score",
        "--label-column", "y", "--method", "platt", "--out", folder / "plain-map.json")
    print("| file | verb | exit | result or first message line |")
    print("| --- | --- | --- | --- |")
    for i, (name, (writer, ext, sc, pos, extra)) in enumerate(variants(b).items()):
        path = folder / f"f{i}{ext}"
        writer(path)
        posa = () if pos is None else ("--positive-label", pos)
        cols = ("--score-column", sc, "--label-column", "y", *posa, *extra)
        runs = {
            "cutoff": run("cutoff", "--scores", path, *cols, *costs, "--resamples", 0,
                          "--format", "json"),
            "calibrate fit": run("calibrate", "fit", "--scores", path, *cols, "--method",
                                 "platt", "--out", folder / f"m{i}.json"),
            "calibrate apply": run("calibrate", "apply", "--map", folder / "plain-map.json",
                                   "--scores", path, "--score-column", sc, *extra,
                                   "--out", folder / "new folder" / f"a{i}{ext if ext == '.tsv' else '.csv'}"),
            "prevalence": run("prevalence", "--unlabelled", path, "--score-column", sc, *extra,
                              "--source-prevalence", 0.6, "--resamples", 0, "--format",
                              "json"),
        }
        if not quick:
            runs["report"] = run("report", "--scores", path, *cols, *costs, "--resamples", 10,
                                 "--out", folder / f"r{i}.html")
        for verb, (code, out, err) in runs.items():
            shown = ""
            if code == 0 and verb == "cutoff":
                shown = f"cutoff {json.loads(out)['cutoff']:.6g}; "
            elif code == 0 and verb == "prevalence":
                shown = f"estimate {json.loads(out)['prevalence']:.4f}; "
            message = first_line(err) if code != 0 or "warning" in err else ""
            print(f"| {name} | {verb} | {code} | {shown}{message} |")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
