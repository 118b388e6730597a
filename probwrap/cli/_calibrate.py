"""``probwrap calibrate fit`` and ``probwrap calibrate apply``: calibration maps for score files.

``fit`` reads a labelled score file, fits a calibration map exactly as
:class:`probwrap.CalibrationWrapper` would on an already-fitted model (the score column acts as
the model's output, so ``--method auto`` makes the same choice the wrapper makes) and saves the
map as JSON (:func:`probwrap.calibration.map_to_dict`). ``apply`` adds a column of calibrated
probabilities to a score file. Also holds the small readers that the ``cutoff`` and
``prevalence`` verbs share.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin

from ._common import DataError, numeric_column, progress, read_table

__all__ = [
    "register", "read_labels", "read_scores", "write_table", "add_scale_flag", "whole_number",
    "report_warnings",
]

SCALES = ("proba", "log-odds")
#: rows predicted per step in ``apply`` (a progress bar counts the steps on a terminal)
_CHUNK = 200_000


# -- shared readers ------------------------------------------------------------------------------
def add_scale_flag(parser: argparse.ArgumentParser) -> None:
    """The ``--scale`` flag: what the score column holds."""
    parser.add_argument(
        "--scale",
        choices=SCALES,
        default="proba",
        help="what the score column holds: probabilities of the positive class in [0, 1] "
        "(default) or log-odds (any real number, e.g. a decision_function value)",
    )


def read_scores(frame: Any, column: str, path: str | Path, *, scale: str) -> np.ndarray:
    """The score column as finite floats; probabilities must lie in [0, 1]."""
    values = numeric_column(frame, column, path, flag="--score-column")
    if scale == "proba":
        bad = (values < 0.0) | (values > 1.0)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise DataError(
                f"{path}: column '{column}', row {row + 2} (counting the header as row 1): "
                f"{frame[column].iloc[row]!r} is not a probability in [0, 1] (use --scale log-odds for "
                "log-odds scores)"
            )
    return values


def read_labels(
    frame: Any, column: str, path: str | Path, *, positive: str | None = None
) -> tuple[np.ndarray, list[Any]]:
    """Binary labels as 0/1 and the two original labels ``[negative, positive]``.

    The positive label is ``positive`` when given (compared as text); otherwise ``1`` or
    ``True`` when the labels are 0/1 or booleans, else the second label in sorted order.
    """
    import pandas as pd

    if column not in frame.columns:
        raise DataError(
            f"{path}: no column '{column}' (given by --label-column); the file has columns "
            f"{', '.join(map(str, frame.columns[:10]))}"
        )
    series = frame[column]
    missing = series.isna().to_numpy()
    if missing.any():
        row = int(np.flatnonzero(missing)[0])
        raise DataError(
            f"{path}: column '{column}', row {row + 2} (counting the header as row 1): the "
            "label is missing"
        )
    values = series.to_numpy()
    if series.dtype == object:
        values = series.astype(str).to_numpy()
    distinct = pd.unique(values)
    if distinct.shape[0] != 2:
        shown = ", ".join(repr(v.item() if hasattr(v, "item") else v) for v in distinct[:6])
        more = ", ..." if distinct.shape[0] > 6 else ""
        raise DataError(
            f"{path}: column '{column}' must hold exactly two labels (binary outcome); it holds "
            f"{distinct.shape[0]}: {shown}{more}"
        )
    labels = sorted(distinct.tolist())
    if positive is not None:
        names = [str(v) for v in labels]
        if positive not in names:
            raise DataError(
                f"{path}: column '{column}' has no label {positive!r} (given by "
                f"--positive-label); its labels are {', '.join(names)}"
            )
        pos = labels[names.index(positive)]
    else:
        pos = labels[1]  # 1 for 0/1 labels, True for booleans, else the second in sorted order
    neg = labels[0] if labels[1] == pos else labels[1]
    y = (values == pos).astype(np.intp)
    plain = [v.item() if hasattr(v, "item") else v for v in (neg, pos)]
    return y, plain


def write_table(frame: Any, path: str | Path) -> None:
    """Write a DataFrame as Parquet (``.parquet``/``.pq``) or CSV (any other extension)."""
    path = Path(path)
    if path.parent and not path.parent.exists():
        raise DataError(f"{path}: the folder {path.parent} does not exist")
    try:
        if path.suffix.lower() in (".parquet", ".pq"):
            frame.to_parquet(path, index=False)
        else:
            frame.to_csv(path, index=False)
    except OSError as exc:
        raise DataError(f"{path}: cannot be written ({exc.strerror or exc})") from None


def whole_number(minimum: int):
    """An argparse type: an integer of at least ``minimum`` (a usage error otherwise)."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"must be at least {minimum}; got {value}")
        return value

    return parse


def report_warnings(verb: str, caught: list) -> None:
    """Print each distinct library warning once, on one line of stderr (no source lines)."""
    seen: set[str] = set()
    for w in caught:
        message = " ".join(str(w.message).split())
        if message not in seen:
            seen.add(message)
            print(f"probwrap {verb}: warning: {message}", file=sys.stderr)


# -- the score column as an already-fitted model -------------------------------------------------
class _ScoreColumn(ClassifierMixin, BaseEstimator):
    """A fitted "model" whose decision function is the first column of ``X`` (log-odds)."""

    def fit(self, X: Any = None, y: Any = None) -> _ScoreColumn:
        self.classes_ = np.array([0, 1])
        return self

    def decision_function(self, X: Any) -> np.ndarray:
        return np.asarray(X, dtype=float)[:, 0]


def to_log_odds(scores: np.ndarray, scale: str) -> np.ndarray:
    """Scores on the log-odds scale that the maps take (probabilities via proba_to_log_odds)."""
    from probwrap.calibration import proba_to_log_odds

    return proba_to_log_odds(scores) if scale == "proba" else scores


def fit_map(
    log_odds: np.ndarray, y: np.ndarray, *, method: str, folds: int, seed: int | None
) -> Any:
    """Fit :class:`probwrap.CalibrationWrapper` on the scores as a frozen model; return it."""
    from sklearn.frozen import FrozenEstimator

    from probwrap import CalibrationWrapper

    wrapper = CalibrationWrapper(
        FrozenEstimator(_ScoreColumn().fit()), method=method, cv=folds, random_state=seed
    )
    return wrapper.fit(log_odds[:, None], y)


# -- verbs ---------------------------------------------------------------------------------------
def _fit(args: argparse.Namespace) -> int:
    from probwrap.calibration import map_to_dict

    frame = read_table(args.scores)
    scores = read_scores(frame, args.score_column, args.scores, scale=args.scale)
    y, labels = read_labels(frame, args.label_column, args.scores, positive=args.positive_label)
    counts = np.bincount(y, minlength=2)
    if args.method == "auto" and counts.min() < 2:
        raise DataError(
            f"{args.scores}: column '{args.label_column}' has only {counts.min()} row(s) of one "
            "label; --method auto needs at least two of each to compare maps by cross-validation"
        )
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            wrapper = fit_map(
                to_log_odds(scores, args.scale), y, method=args.method, folds=args.folds,
                seed=args.seed,
            )
    except ValueError as exc:
        raise DataError(f"{args.scores}: the map cannot be fitted ({exc})") from None
    report_warnings("calibrate", caught)
    metadata: dict[str, Any] = {
        "score_scale": args.scale,
        "labels": labels,
        "n_rows": int(scores.shape[0]),
        "n_positive": int(counts[1]),
        "fitted_on": Path(args.scores).name,
        "score_column": args.score_column,
    }
    if args.method == "auto":
        metadata["auto_log_loss"] = {
            name: {"log_loss": loss, "standard_error": se}
            for name, (loss, se) in wrapper.method_scores_.items()
        }
    description = map_to_dict(wrapper.calibrator_, **metadata)
    out = Path(args.out)
    try:
        out.write_text(json.dumps(description, indent=2, allow_nan=False) + "\n")
    except OSError as exc:
        raise DataError(f"{out}: cannot be written ({exc.strerror or exc})") from None
    print(
        f"fitted a {wrapper.method_} map on {scores.shape[0]} rows ({counts[1]} with label "
        f"{labels[1]!r}) and saved it to {out}"
    )
    if args.method == "auto":
        for name, (loss, se) in sorted(wrapper.method_scores_.items(), key=lambda kv: kv[1][0]):
            mark = "  <- chosen" if name == wrapper.method_ else ""
            print(f"  {name:<11} cross-validated log loss {loss:.5f} (+- {se:.5f}){mark}")
    return 0


def load_map(path: str | Path) -> tuple[Any, dict[str, Any]]:
    """A saved map and its description, or a DataError naming the file and the problem."""
    from probwrap.calibration import map_from_dict

    path = Path(path)
    if not path.exists():
        raise DataError(f"{path}: file not found")
    try:
        description = json.loads(path.read_text())
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DataError(f"{path}: not a JSON file ({exc})") from None
    try:
        cal_map = map_from_dict(description)
    except ValueError as exc:
        raise DataError(f"{path}: not a usable probwrap map: {exc}") from None
    if cal_map.n_score_columns_ != 1:
        raise DataError(f"{path}: the map is multiclass; score files here hold one binary score")
    return cal_map, description


def _apply(args: argparse.Namespace) -> int:
    cal_map, description = load_map(args.map)
    from probwrap.calibration import map_score_scale

    scale = map_score_scale(description)  # load_map has refused a file without a valid scale
    frame = read_table(args.scores)
    scores = read_scores(frame, args.score_column, args.scores, scale=scale)
    if args.output_column in frame.columns:
        raise DataError(
            f"{args.scores}: already has a column '{args.output_column}'; choose another name "
            "with --output-column"
        )
    log_odds = to_log_odds(scores, scale)
    out = np.empty(log_odds.shape[0])
    starts = range(0, log_odds.shape[0], _CHUNK)
    for start in progress(starts, desc="calibrating", total=len(starts)):
        out[start : start + _CHUNK] = cal_map.predict(log_odds[start : start + _CHUNK])
    frame = frame.copy()
    frame[args.output_column] = out
    write_table(frame, args.out)
    print(
        f"wrote {frame.shape[0]} rows with column '{args.output_column}' "
        f"({description['method']} map) to {args.out}"
    )
    return 0


def register(subparsers: Any) -> None:
    """Add ``calibrate fit`` and ``calibrate apply``."""
    from probwrap.calibration._serialize import MAP_NAMES

    parser = subparsers.add_parser(
        "calibrate",
        help="fit a calibration map on a labelled score file, or apply a saved one",
        description="Fit a calibration map on held-out scores and labels and save it as JSON, "
        "or apply a saved map to new scores.",
    )
    steps = parser.add_subparsers(dest="step", metavar="STEP")
    steps.required = True

    fit = steps.add_parser(
        "fit",
        help="fit a map on a labelled score file and save it as JSON",
        description="Fit a calibration map on a labelled score file (held-out scores: rows the "
        "model was not trained on) and save it as JSON.",
    )
    fit.add_argument("--scores", required=True, metavar="FILE", help="CSV or Parquet score file")
    fit.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    fit.add_argument("--label-column", required=True, metavar="L", help="column of true labels")
    fit.add_argument(
        "--positive-label", metavar="VALUE", default=None,
        help="which label is the positive class (default: 1/True, else the second in sorted "
        "order)",
    )
    add_scale_flag(fit)
    fit.add_argument(
        "--method", choices=("auto", *MAP_NAMES), default="auto",
        help="calibration map; auto (default) keeps the simplest map whose cross-validated log "
        "loss is within one standard error of the best",
    )
    fit.add_argument(
        "--folds", type=whole_number(2), default=5, metavar="K",
        help="cross-validation folds used by --method auto (default 5)",
    )
    fit.add_argument("--seed", type=int, default=0, help="seed of the folds (default 0)")
    fit.add_argument("--out", required=True, metavar="MAP.json", help="where to save the map")
    fit.set_defaults(func=_fit)

    apply = steps.add_parser(
        "apply",
        help="add calibrated probabilities to a score file",
        description="Apply a saved map: write the score file with an added column of calibrated "
        "probabilities (CSV or Parquet, by the extension of --out).",
    )
    apply.add_argument("--map", required=True, metavar="MAP.json", help="map saved by 'fit'")
    apply.add_argument("--scores", required=True, metavar="FILE", help="CSV or Parquet score file")
    apply.add_argument("--score-column", required=True, metavar="C", help="column of scores")
    apply.add_argument(
        "--output-column", default="calibrated_probability", metavar="NAME",
        help="name of the added column (default calibrated_probability)",
    )
    apply.add_argument("--out", required=True, metavar="FILE", help="output CSV or Parquet file")
    apply.set_defaults(func=_apply)
