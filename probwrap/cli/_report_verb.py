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
        "deployment population.",
    )
    parser.add_argument("--scores", required=True, metavar="FILE",
                        help="labelled score file (CSV or Parquet)")
    parser.add_argument("--score-column", required=True, metavar="C",
                        help="column of positive-class probabilities in [0, 1]")
    parser.add_argument("--label-column", required=True, metavar="L",
                        help="column of labels coded 0 / 1")
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


def _handler(args: argparse.Namespace) -> int:
    parser: argparse.ArgumentParser = args._parser
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
