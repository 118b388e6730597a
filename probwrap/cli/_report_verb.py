"""``probwrap report``: the HTML report for score files (CSV or Parquet)."""

from __future__ import annotations

import argparse

import numpy as np

from ._common import DataError, numeric_column, read_table

__all__ = ["register"]


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "report",
        help="write a single-file HTML report for a labelled score file",
        description="Calibration, decisions and prevalence for a file of positive-class "
        "probabilities with 0/1 labels (CSV or Parquet); optionally an unlabelled file from the "
        "deployment population. With --class-columns (one probability column per class) and "
        "--cost-matrix, the multiclass / multi-action report.",
    )
    parser.add_argument("--scores", required=True, metavar="FILE",
                        help="labelled score file (CSV or Parquet)")
    parser.add_argument("--score-column", metavar="C",
                        help="column of positive-class probabilities in [0, 1]")
    parser.add_argument("--class-columns", metavar="C1,C2,...",
                        help="instead of --score-column: one probability column per class, "
                        "comma-separated; labels are these column names or indices 0..k-1")
    parser.add_argument("--label-column", required=True, metavar="L",
                        help="column of labels coded 0 / 1 (or, with --class-columns, the "
                        "class of each row)")
    parser.add_argument("--cost-matrix", metavar="ROWS",
                        help="with --class-columns: costs, one row per class (in column order) "
                        "separated by ';', one entry per action separated by ',', e.g. "
                        "'0,4,12;20,4,12;60,64,12'")
    parser.add_argument("--actions", metavar="A1,A2,...",
                        help="names of the actions (columns of --cost-matrix)")
    parser.add_argument("--capacity-action", metavar="A",
                        help="with --cost-matrix: the action that --capacity limits")
    parser.add_argument("--unlabelled", metavar="FILE",
                        help="unlabelled score file from the deployment population")
    parser.add_argument("--unlabelled-score-column", metavar="C",
                        help="its probability column (default: --score-column)")
    for key, default, what in (("fp", None, "acting on a negative"),
                               ("fn", None, "not acting on a positive"),
                               ("tp", 0.0, "acting on a positive"),
                               ("tn", 0.0, "not acting on a negative")):
        parser.add_argument(f"--cost-{key}", type=float, default=default, metavar="X",
                            help=f"cost of {what}" + ("" if default is None else " (default 0)"))
    parser.add_argument("--capacity", type=float, metavar="SHARE",
                        help="largest share of rows that may be acted on, in (0, 1]")
    parser.add_argument("--batch-size", type=int, metavar="N",
                        help="also estimate the prevalence per batch of N unlabelled rows")
    parser.add_argument("--bins", type=int, default=10, metavar="K",
                        help="reliability bins (default 10)")
    parser.add_argument("--resamples", type=int, default=200, metavar="B",
                        help="bootstrap resamples for intervals (default 200)")
    parser.add_argument("--seed", type=int, default=0, help="bootstrap seed (default 0)")
    parser.add_argument("--title", default="probwrap report", help="report title")
    parser.add_argument("--out", required=True, metavar="FILE", help="HTML file to write")
    parser.set_defaults(func=_handler, _parser=parser)


def _probabilities(frame, column: str, path: str, flag: str) -> np.ndarray:
    values = numeric_column(frame, column, path, flag=flag)
    bad = (values < 0) | (values > 1)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(
            f"{path}: column '{column}', row {row + 2} (counting the header as row 1): "
            f"{values[row]!r} is not a probability in [0, 1]"
        )
    return values


def _labels(frame, column: str, path: str) -> np.ndarray:
    values = numeric_column(frame, column, path, flag="--label-column")
    bad = (values != 0) & (values != 1)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(
            f"{path}: column '{column}', row {row + 2} (counting the header as row 1): "
            f"label {frame[column].iloc[row]!r} is not 0 or 1 (labels must be binary)"
        )
    if np.unique(values).shape[0] < 2:
        raise DataError(
            f"{path}: column '{column}' holds only the label {int(values[0])}; both 0 and 1 are "
            "needed"
        )
    return values.astype(np.intp)


def _split(text: str) -> list[str]:
    return [t.strip() for t in text.split(",") if t.strip()]


def _cost_matrix(text: str, parser: argparse.ArgumentParser) -> np.ndarray:
    try:
        rows = [[float(v) for v in row.split(",")] for row in text.split(";") if row.strip()]
        matrix = np.array(rows, dtype=float)
    except ValueError:
        parser.error(f"--cost-matrix must be numbers, rows separated by ';' and entries by ',' "
                     f"(e.g. '0,4,12;20,4,12'); got {text!r}")
    if matrix.ndim != 2 or not np.all(np.isfinite(matrix)):
        parser.error(f"--cost-matrix rows must all have the same number of finite entries; got "
                     f"{text!r}")
    return matrix


def _class_handler(args: argparse.Namespace, parser: argparse.ArgumentParser) -> int:
    columns = _split(args.class_columns)
    if len(columns) < 2:
        parser.error("--class-columns needs at least two columns")
    if any(getattr(args, f"cost_{k}") is not None for k in ("fp", "fn")):
        parser.error("with --class-columns give costs as --cost-matrix, not --cost-fp/--cost-fn")
    if args.batch_size is not None:
        parser.error("--batch-size is available for binary score files only")
    matrix = None if args.cost_matrix is None else _cost_matrix(args.cost_matrix, parser)
    if matrix is not None and matrix.shape[0] != len(columns):
        parser.error(f"--cost-matrix has {matrix.shape[0]} rows but --class-columns names "
                     f"{len(columns)} classes; one row per class")
    actions = None if args.actions is None else _split(args.actions)
    if actions is not None and (matrix is None or len(actions) != matrix.shape[1]):
        parser.error(f"--actions must name the {0 if matrix is None else matrix.shape[1]} "
                     f"columns of --cost-matrix; got {len(actions)}")
    if matrix is not None and actions is None and matrix.shape[1] != len(columns):
        parser.error("--actions must name the columns of --cost-matrix (it is not square)")
    capacity = None
    if args.capacity is not None:
        if matrix is None:
            parser.error("--capacity needs --cost-matrix")
        names = actions or columns
        if args.capacity_action is None or args.capacity_action not in names:
            parser.error(f"--capacity needs --capacity-action, one of {', '.join(names)}")
        capacity = {args.capacity_action: args.capacity}

    def probabilities(path, frame):
        P = np.column_stack([_probabilities(frame, c, path, "--class-columns") for c in columns])
        sums = P.sum(axis=1)
        bad = np.abs(sums - 1.0) > 1e-6
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise DataError(f"{path}: row {row + 2} (counting the header as row 1): the class "
                            f"probabilities sum to {sums[row]!r}, not 1")
        return P

    frame = read_table(args.scores)
    P = probabilities(args.scores, frame)
    if args.label_column not in frame.columns:
        raise DataError(f"{args.scores}: no column '{args.label_column}' (given by "
                        f"--label-column)")
    raw = frame[args.label_column]
    as_text = raw.astype(str).to_numpy()
    import pandas as pd

    numeric = pd.to_numeric(raw, errors="coerce").notna().to_numpy()
    named = np.isin(as_text, columns)
    if named.any() or not numeric.all():
        if not named.all():
            row = int(np.flatnonzero(~named)[0])
            raise DataError(
                f"{args.scores}: column '{args.label_column}', row {row + 2} (counting the "
                f"header as row 1): label {raw.iloc[row]!r} is not one of the class columns "
                f"{', '.join(columns)}"
            )
        y = np.array([columns.index(v) for v in as_text], dtype=np.intp)
    else:
        y = numeric_column(frame, args.label_column, args.scores, flag="--label-column")
        bad = (y != np.round(y)) | (y < 0) | (y >= len(columns))
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise DataError(
                f"{args.scores}: column '{args.label_column}', row {row + 2} (counting the "
                f"header as row 1): label {raw.iloc[row]!r} is neither a class column name nor "
                f"an index 0..{len(columns) - 1}"
            )
        y = y.astype(np.intp)
    q = None
    if args.unlabelled is not None:
        q = probabilities(args.unlabelled, read_table(args.unlabelled))
    from probwrap.report import write_report

    try:
        content = write_report(
            args.out, y_true=y, y_prob=P, costs=matrix, capacity=capacity,
            action_names=actions, unlabelled_prob=q, n_bins=args.bins,
            n_resamples=args.resamples, random_state=args.seed, title=args.title,
            class_names=columns,
        )
    except ValueError as exc:
        raise DataError(f"{args.scores}: {exc}") from None
    line = f"wrote {args.out}: {content.n_rows} labelled rows, {content.n_classes} classes"
    if content.rules:
        line += f", mean cost of the rule in use {content.rules[0].mean_cost:.4f}"
    if content.shift_pvalue is not None:
        line += f", shift p = {content.shift_pvalue:.3g}"
    print(line)
    return 0


def _handler(args: argparse.Namespace) -> int:
    parser: argparse.ArgumentParser = args._parser
    if (args.score_column is None) == (args.class_columns is None):
        parser.error("give either --score-column (binary) or --class-columns (one per class)")
    if args.class_columns is not None:
        return _class_handler(args, parser)
    if args.cost_matrix is not None or args.actions is not None or args.capacity_action:
        parser.error("--cost-matrix, --actions and --capacity-action need --class-columns")
    given = [k for k in ("fp", "fn") if getattr(args, f"cost_{k}") is not None]
    if len(given) == 1:
        parser.error("give both --cost-fp and --cost-fn, or neither")
    if args.capacity is not None and not 0 < args.capacity <= 1:
        parser.error(f"--capacity must be a share in (0, 1]; got {args.capacity}")
    if args.capacity is not None and not given:
        parser.error("--capacity needs costs (--cost-fp and --cost-fn)")
    if args.batch_size is not None and (args.batch_size < 1 or args.unlabelled is None):
        parser.error("--batch-size needs --unlabelled and a positive N")
    if args.bins < 1 or args.resamples < 2:
        parser.error("--bins must be >= 1 and --resamples >= 2")

    frame = read_table(args.scores)
    p = _probabilities(frame, args.score_column, args.scores, "--score-column")
    y = _labels(frame, args.label_column, args.scores)
    q = None
    if args.unlabelled is not None:
        uframe = read_table(args.unlabelled)
        column = args.unlabelled_score_column or args.score_column
        q = _probabilities(uframe, column, args.unlabelled,
                           "--unlabelled-score-column" if args.unlabelled_score_column
                           else "--score-column")
    costs = None
    if given:
        costs = {"fp": args.cost_fp, "fn": args.cost_fn, "tp": args.cost_tp,
                 "tn": args.cost_tn}
        if not (costs["fp"] > costs["tn"] and costs["fn"] > costs["tp"]):
            raise DataError(
                "costs: each error must cost more than the matching correct decision "
                "(--cost-fp > --cost-tn and --cost-fn > --cost-tp)"
            )
    from probwrap.report import write_report

    content = write_report(
        args.out, y_true=y, y_prob=p, costs=costs, capacity=args.capacity,
        unlabelled_prob=q, batch_size=args.batch_size, n_bins=args.bins,
        n_resamples=args.resamples, random_state=args.seed, title=args.title,
    )
    line = f"wrote {args.out}: {content.n_rows} labelled rows"
    if content.chosen_cutoff is not None:
        line += f", cutoff {content.chosen_cutoff:.4f}"
    if content.target_prevalence is not None:
        line += (f", prevalence {content.source_prevalence:.4f} -> "
                 f"{content.target_prevalence:.4f} (shift p = {content.shift_pvalue:.3g})")
    print(line)
    return 0
