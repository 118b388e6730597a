"""Every verb of the command line on a second set of score files as practitioners get them.

The breast-cancer held-out scores of ``cli_awkward_files.py`` (289 rows; an ``amount`` column
of invented whole-number weights 1,000-4,999 added so that thousands separators are met), written
as European CSV, with thousands separators, quoted numbers, Windows line ends, a byte-order
mark, trailing empty columns, rows of bare separators at the end, labels ``Yes``/``No``,
``Y``/``N`` and `` 1``/``0 `` with spaces, scores as ``12.5%`` and as quoted ``"0,73"``,
weights as ``65%``, an Excel and an OpenDocument workbook of two sheets, an empty file, a
header alone, one row, a Parquet file naming a column twice, a very long path with spaces,
and standard input (``-``). Each file goes through
``cutoff``, ``calibrate fit``, ``calibrate apply`` (a map fitted on the plain file, written to
``.csv``), ``prevalence --source-prevalence`` (with the file's weights where it has them),
``prevalence --reference`` (the file as the labelled reference of the clean file's scores,
with its weights as ``--reference-weight-column``) and (without ``--quick``) ``report``.

The table prints each verb's exit code, and whether the result equals the plain file's
(``same``: the cutoff JSON, the map's fitted parameters, every calibrated probability, the
estimate) or differs (``DIFFERENT``), with the first line of the message or warning.

Run: PYTHONPATH=$PWD python benchmarks/cli_awkward_files_second.py [--quick]
"""

import csv
import io
import json
import sys
import tempfile
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).parent))


def base() -> pd.DataFrame:
    """The held-out scores with an invented whole-number ``amount`` column (a weight)."""
    from cli_awkward_files import held_out

    b = held_out()
    amount = 1000 + (np.arange(b.shape[0]) * 7919) % 4000
    return b.assign(amount=amount.astype(float) + 0.25)


def _workbook(path: Path, frame: pd.DataFrame) -> None:
    """A minimal Office Open XML workbook of two sheets (the scores and a notes sheet)."""
    def sheet(rows):
        cells = "".join(
            "<row>" + "".join(f'<c t="inlineStr"><is><t>{v}</t></is></c>' for v in row)
            + "</row>" for row in rows)
        return ('<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
                f"<sheetData>{cells}</sheetData></worksheet>")
    main = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    rel = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("[Content_Types].xml", (
            '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="xml" ContentType="application/xml"/></Types>'))
        z.writestr("xl/workbook.xml", (
            f'<workbook xmlns="{main}" xmlns:r="{rel}"><sheets>'
            '<sheet name="scores" sheetId="1" r:id="rId1"/>'
            '<sheet name="notes" sheetId="2" r:id="rId2"/></sheets></workbook>'))
        z.writestr("xl/worksheets/sheet1.xml",
                   sheet([list(frame.columns)] + frame.astype(str).values.tolist()))
        z.writestr("xl/worksheets/sheet2.xml", sheet([["exported"], ["5 December 2026"]]))


def _ods(path: Path, frame: pd.DataFrame) -> None:
    """A minimal OpenDocument spreadsheet of two sheets (the scores and a notes sheet)."""
    def table(name, rows):
        cells = "".join(
            "<table:table-row>" + "".join(
                f'<table:table-cell office:value-type="string"><text:p>{v}</text:p>'
                "</table:table-cell>" for v in row) + "</table:table-row>" for row in rows)
        return f'<table:table table:name="{name}">{cells}</table:table>'
    ns = ('xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
          'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
          'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0"')
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("mimetype", "application/vnd.oasis.opendocument.spreadsheet")
        z.writestr("content.xml", (
            f'<office:document-content {ns}><office:body><office:spreadsheet>'
            + table("scores", [list(frame.columns)] + frame.astype(str).values.tolist())
            + table("notes", [["exported"], ["5 December 2026"]])
            + "</office:spreadsheet></office:body></office:document-content>"))


def _parquet_twice(path: Path, b: pd.DataFrame) -> None:
    import pyarrow as pa
    import pyarrow.parquet as pq

    n = b.shape[0]
    pq.write_table(pa.table([pa.array(b["id"]), pa.array(["a"] * n), pa.array(b["score"]),
                             pa.array(b["y"]), pa.array(b["amount"]), pa.array(["b"] * n)],
                            names=["id", "notes", "score", "y", "amount", "notes"]), path)


def variants(b: pd.DataFrame) -> dict:
    """name -> (writer(path), file suffix, --positive-label, options for every verb,
    --weight-column for cutoff, writer of the clean file whose results it should give)."""
    v = {}

    def plain(p):
        b.to_csv(p, index=False)

    def percent_plain(p):
        b.assign(score=(b.score * 100).map(lambda x: f"{x:.4f}")).to_csv(p, index=False)

    def add(name, writer, ext=".csv", pos=None, extra=(), weight=None, clean=plain):
        v[name] = (writer, ext, pos, extra, weight, clean)

    def text(p, s):
        p.write_bytes(s.encode("utf-8"))

    def thousands_eu(x):
        return f"{x:,.2f}".replace(",", " ").replace(".", ",").replace(" ", ".")

    add("European: ; and decimal commas",
        lambda p: b.to_csv(p, sep=";", decimal=",", index=False))
    add("European, amount as 1.234,25 (weight)", lambda p: b.assign(
        score=b.score.map(lambda x: f"{x}".replace(".", ",")),
        amount=b.amount.map(thousands_eu)).to_csv(p, sep=";", index=False), weight="amount")
    add("amount as \"1,234.25\" (weight)", lambda p: b.assign(
        amount=b.amount.map(lambda x: f"{x:,.2f}")).to_csv(p, index=False), weight="amount")
    add("every number quoted", lambda p: b.astype(str).to_csv(
        p, index=False, quoting=csv.QUOTE_NONNUMERIC))
    add("CRLF line ends", lambda p: b.to_csv(p, index=False, lineterminator="\r\n"))
    add("UTF-8 byte-order mark", lambda p: b.to_csv(p, index=False, encoding="utf-8-sig"))
    add("trailing empty columns (,,)", lambda p: text(p, "\n".join(
        line + ",," for line in b.to_csv(index=False).splitlines()) + "\n"))
    add("rows of bare separators at the end", lambda p: text(
        p, b.to_csv(index=False) + ",,,\n,,,\n\n"))
    add("a row of bare separators inside", lambda p: text(p, "".join(
        line + ("\n,,,\n" if k == 100 else "\n")
        for k, line in enumerate(b.to_csv(index=False).splitlines()))))
    add("labels Yes/No", lambda p: b.assign(y=np.where(b.y == 1, "Yes", "No")).to_csv(
        p, index=False), pos="Yes")
    add("labels Y/N", lambda p: b.assign(y=np.where(b.y == 1, "Y", "N")).to_csv(
        p, index=False), pos="Y")
    add("labels ' 1'/'0 ' with spaces", lambda p: b.assign(
        y=np.where(b.y == 1, " 1", "0 ")).to_csv(p, index=False))
    add("scores as '12.5%'", lambda p: b.assign(
        score=(b.score * 100).map(lambda x: f"{x:.4f}%")).to_csv(p, index=False))
    add("scores as '12.5%', --scale percent", lambda p: b.assign(
        score=(b.score * 100).map(lambda x: f"{x:.4f}%")).to_csv(p, index=False),
        extra=("--scale", "percent"), clean=percent_plain)
    add("scores as '12,5 %' in a ; file, --scale percent", lambda p: b.assign(
        score=(b.score * 100).map(lambda x: f"{x:.4f} %".replace(".", ","))).to_csv(
        p, index=False, sep=";"), extra=("--scale", "percent"), clean=percent_plain)
    add("scores as quoted '0,73' in a , file", lambda p: b.assign(
        score=b.score.map(lambda x: f"{x}".replace(".", ","))).to_csv(p, index=False))
    add("amount as '65%' (weight)", lambda p: b.assign(
        amount=(b.amount / 50).map(lambda x: f"{x:.2f}%")).to_csv(p, index=False),
        weight="amount")
    add("Excel workbook, two sheets", lambda p: _workbook(p, b), ext=".xlsx")
    add("OpenDocument workbook, two sheets", lambda p: _ods(p, b), ext=".ods")
    add("empty file", lambda p: text(p, ""))
    add("header only", lambda p: text(p, "id,score,y,amount\n"))
    add("one row", lambda p: b.head(1).to_csv(p, index=False))
    add("Parquet naming 'notes' twice", lambda p: _parquet_twice(p, b), ext=".parquet")
    long_folder = "/".join(["scores exported from the warehouse for the review " + str(k)
                            for k in range(5)])
    add("long path with spaces (300+ characters)", lambda p: b.to_csv(p, index=False),
        ext=f"/{long_folder}/held out scores (final).csv")
    add("standard input (-)", lambda p: b.to_csv(p, index=False, sep=";", decimal=","),
        ext=" stdin.csv")
    return v


def run_with_input(argv: list, stdin_bytes: bytes | None) -> tuple[object, str, str]:
    """``run`` of cli_awkward_files, with ``stdin_bytes`` as standard input when given."""
    from cli_awkward_files import run

    if stdin_bytes is None:
        return run(*argv)

    class _Stdin:
        buffer = io.BytesIO(stdin_bytes)

        @staticmethod
        def isatty() -> bool:
            return False

    saved, sys.stdin = sys.stdin, _Stdin()
    try:
        return run(*argv)
    finally:
        sys.stdin = saved


def _calibrated(path: Path) -> np.ndarray:
    frame = pd.read_csv(path, sep=None, engine="python", dtype=str)
    return frame["calibrated_probability"].str.replace(",", ".").astype(float).to_numpy()


def _page(page: Path, scores: Path) -> str:
    """A report page with the score file's path and name taken out."""
    html = page.read_text(encoding="utf-8")
    for name in (str(scores), scores.name, "standard input"):
        html = html.replace(name, "FILE")
    return html


def _comparable(text: str) -> dict:
    """A verb's JSON summary without the labels (Yes/No files name them, 0/1 files do not)."""
    return {k: v for k, v in json.loads(text).items() if k != "labels"}


def main(quick: bool = False) -> None:
    from cli_awkward_files import first_line

    b = base()
    folder = Path(tempfile.mkdtemp(prefix="probwrap awkward second "))
    costs = ("--cost-fp", 1, "--cost-fn", 5)
    plain = folder / "plain.csv"
    b.to_csv(plain, index=False)
    common = ("--score-column", "score")

    def verbs(path, i, pos, extra, weight, clean_path):
        posa = () if pos is None else ("--positive-label", pos)
        wa = () if weight is None else ("--weight-column", weight)
        rwa = () if weight is None else ("--reference-weight-column", weight)
        cols = (*common, "--label-column", "y", *posa, *extra)
        out = {
            "cutoff": ["cutoff", "--scores", path, *cols, *wa, *costs, "--resamples", 0,
                       "--format", "json"],
            "calibrate fit": ["calibrate", "fit", "--scores", path, *cols, "--method", "platt",
                              "--out", folder / f"m{i}.json"],
            "calibrate apply": ["calibrate", "apply", "--map", folder / "plain-map.json",
                                "--scores", path, *common, *extra,
                                "--out", folder / f"a{i}.csv"],
            "prevalence": ["prevalence", "--unlabelled", path, *common, *extra, *wa,
                           "--source-prevalence", 0.6, "--resamples", 0, "--format", "json"],
            # the file as the labelled reference of the clean file's scores
            "prevalence --reference": ["prevalence", "--unlabelled", clean_path, *common,
                                       *extra, "--reference", path, "--label-column", "y",
                                       *posa, *rwa, "--resamples", 0, "--format", "json"],
        }
        if not quick:
            out["report"] = ["report", "--scores", path, *cols, *costs, "--resamples", 10,
                             "--out", folder / f"r{i}.html"]
        return out

    code, out, err = run_with_input(["calibrate", "fit", "--scores", plain, *common,
                                     "--label-column", "y", "--method", "platt", "--out",
                                     folder / "plain-map.json"], None)
    assert code == 0, err
    expected: dict = {}

    def clean_results(clean, extra, weight):
        """The verbs' results on the clean file (cached by the options)."""
        key = (clean.__name__, extra, weight)
        if key not in expected:
            k = len(expected)
            path = folder / f"clean{k}.csv"
            clean(path)
            got = {}
            for verb, argv in verbs(path, f"clean{k}", None, extra, weight, path).items():
                code, out, err = run_with_input(argv, None)
                assert code == 0, err
                got[verb] = out
            got["map"] = json.loads((folder / f"mclean{k}.json").read_text())["fitted"]
            got["apply"] = _calibrated(folder / f"aclean{k}.csv")
            if not quick:
                got["report"] = _page(folder / f"rclean{k}.html", path)
            got["path"] = path
            expected[key] = got
        return expected[key]

    print("| file | verb | exit | result | first message or warning line |")
    print("| --- | --- | --- | --- | --- |")
    for i, (name, (writer, ext, pos, extra, weight, clean)) in enumerate(
            variants(b).items()):
        want = clean_results(clean, extra, weight)
        path = folder / f"f{i}{ext}"
        path.parent.mkdir(parents=True, exist_ok=True)
        writer(path)
        stdin = path.read_bytes() if "stdin" in ext else None
        given = "-" if stdin is not None else path
        for verb, argv in verbs(given, i, pos, extra, weight, want["path"]).items():
            code, out, err = run_with_input(argv, stdin)
            result = ""
            if code == 0:
                if verb.startswith(("cutoff", "prevalence")):
                    same = _comparable(out) == _comparable(want[verb])
                    key = "cutoff" if verb == "cutoff" else "prevalence"
                    result = f"{key} {json.loads(out)[key]:.6g}"
                elif verb == "calibrate fit":
                    same = json.loads((folder / f"m{i}.json").read_text())["fitted"] == \
                        want["map"]
                elif verb == "calibrate apply":
                    got = _calibrated(folder / f"a{i}.csv")
                    same = got.shape == want["apply"].shape and bool(
                        np.allclose(got, want["apply"], rtol=0, atol=1e-12))
                    result = f"{got.shape[0]} rows"
                else:  # the page, but for the file's name
                    same = _page(folder / f"r{i}.html", path) == want["report"]
                result = ("same" if same else "DIFFERENT") + (f": {result}" if result else "")
            message = first_line(err) if code != 0 or "warning" in err else ""
            print(f"| {name} | {verb} | {code} | {result} | {message.replace(str(folder), '')} |")


if __name__ == "__main__":
    main(quick="--quick" in sys.argv[1:])
