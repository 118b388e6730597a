"""Flags several verbs share: labels that arrive late, and a cutoff with a guarantee.

Late labels (``cutoff``, ``report``, ``calibrate fit``): ``--time-column`` (how long each row
has been observed), ``--event-column`` (1 when its event happened, 0 when not yet) and
``--horizon`` (the outcome is "event within the horizon") replace ``--label-column``; the labels
and inverse-probability-of-censoring weights of
:func:`probwrap.late_labels.labels_at_horizon` go where the labels and weights would.

Guarantee (``cutoff``, ``report``): ``--guarantee`` (which metric), ``--guarantee-target``,
``--guarantee-confidence``, ``--guarantee-method``, the arguments of
:func:`probwrap.decision.guaranteed_cutoff`.
"""

from __future__ import annotations

import argparse
import re
from typing import Any

import numpy as np

from .._validation import cutoff_text, plain
from ._common import DataError, clean, not_a_number, percent_hint, row_number, shown
from ._tables import numeric_column

__all__ = ["add_late_label_flags", "late_label_columns", "read_late_labels",
           "late_label_summary", "add_guarantee_flags", "guarantee_args", "level"]


def level(text: str) -> float:
    """A probability strictly between 0 and 1 (a confidence level, a target)."""
    try:
        value = float(text)
    except ValueError:
        raise not_a_number(text) from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"must be in (0, 1); got {text}{percent_hint(value)}")
    return value


# -- late labels ----------------------------------------------------------------------------
def add_late_label_flags(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group(
        "labels that arrive late (instead of --label-column)",
        "The outcome 'event within --horizon', weighted for rows still open "
        "(docs/late_labels.md).")
    group.add_argument("--time-column", metavar="T",
                       help="how long each row has been observed (until its event, or until "
                       "now), in the unit of --horizon")
    group.add_argument("--event-column", metavar="E",
                       help="1 (or True) when the row's event happened at that time, 0 (or "
                       "False) when not yet")
    group.add_argument("--horizon", type=_positive, metavar="H",
                       help="the outcome is 'the event happened within H'")


def late_label_columns(args: argparse.Namespace, parser: argparse.ArgumentParser,
                       ) -> list[str] | None:
    """The two columns to read, or None without late labels; usage errors for half a set."""
    given = {flag: getattr(args, name) for flag, name in (
        ("--time-column", "time_column"), ("--event-column", "event_column"),
        ("--horizon", "horizon"))}
    if all(v is None for v in given.values()):
        if args.label_column is None:
            parser.error("give --label-column, or late labels (--time-column, --event-column "
                         "and --horizon)")
        return None
    missing = [flag for flag, v in given.items() if v is None]
    if missing:
        parser.error(f"late labels need --time-column, --event-column and --horizon; missing "
                     f"{', '.join(missing)}")
    if args.label_column is not None:
        parser.error("give either --label-column or late labels (--time-column, "
                     "--event-column, --horizon), not both")
    if getattr(args, "positive_label", None) is not None:
        parser.error("--positive-label is for --label-column; with late labels the positive "
                     "class is 'event within --horizon'")
    return [args.time_column, args.event_column]


def read_late_labels(frame: Any, args: argparse.Namespace, path: str,
                     sample_weight: np.ndarray | None = None) -> Any:
    """:class:`~probwrap.late_labels.HorizonLabels` from the file's time and event columns
    (``sample_weight``: the rows' own weights, ``--weight-column``, which the censoring
    weights then multiply)."""
    from probwrap.late_labels import labels_at_horizon

    if args.time_column in frame.columns:
        _refuse_year_months(frame[args.time_column], args.time_column, path)
    # a time written with a dot between thousands (4.190 days) in a semicolon- or
    # tab-separated file without decimal commas was read as 4.19: the dots are settled as
    # the weights' are (--weight-dots)
    time = numeric_column(frame, args.time_column, path, flag="--time-column",
                          dots=getattr(args, "weight_dots", None) or "ask")
    try:
        event = numeric_column(_true_false_as_numbers(frame, args.event_column),
                               args.event_column, path, flag="--event-column")
    except DataError as exc:
        # "'yes' is not a finite number" did not say what an event column takes
        raise DataError(f"{exc}; --event-column takes 1 (the event happened) or 0 (not yet), "
                        "or True / False: write other words (yes / no, ...) as 1 and 0"
                        ) from None
    bad = ~np.isin(event, (0.0, 1.0))
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise DataError(f"{path}: column {shown(args.event_column)}, {row_number(path, row)} "
                        f"holds {shown(event[row])}; events are 1 "
                        "(happened) or 0 (not yet), or True / False")
    try:
        hl = labels_at_horizon(time, event.astype(int), args.horizon,
                               sample_weight=sample_weight)
    except ValueError as exc:
        # the library names its arguments; a user of the command line knows the flags
        text = re.sub(r"`horizon`=(\S+)", r"--horizon \1", str(exc))
        text = text.replace("`horizon`", "--horizon").replace(
            "`time`", "the time column (--time-column)").replace(
            "`event`", "the event column (--event-column)")
        raise DataError(f"{path}: late labels: {clean(text)}") from None
    known = hl.sample_weight > 0
    for value, what, fix in ((0, "without the event within", "a shorter"),
                             (1, "with the event within", "a longer")):
        if not np.any(known & (hl.y == value)):
            # every known outcome is one class: a cutoff, a map or a report on it would be
            # computed on one class (the cutoff verb printed a zero cost for acting on all)
            n_open = int(np.count_nonzero(hl.is_open))
            held = f" ({n_open} rows are still open and weigh 0)" if n_open else ""
            raise DataError(
                f"{path}: late labels: no row is known to be {what} --horizon "
                f"{hl.horizon:g}{held}, so there are not both outcomes to learn from; choose "
                f"{fix} horizon, or wait for more outcomes")
    return hl


_TRUE_FALSE = {"true": "1", "false": "0"}

#: a year and a month written as a number, 2026.01 to 2026.12 (1900-2099)
_YEAR_MONTH = re.compile(r"(?:19|20)\d\d\.(?:0[1-9]|1[0-2])")


def _refuse_year_months(column: Any, name: str, path: str) -> None:
    """Refuse a time column whose every value is a year and month written as a number
    (``2026.01``): read as numbers, October (2026.10 = 2026.1) lies nine hundredths after
    January and a year's months span 0.11, so the horizon would be read wrongly without a
    word. The column must hold how long each row has been observed."""
    text = [str(v).strip().strip('"') for v in column.tolist()
            if v is not None and not (isinstance(v, float) and v != v) and str(v).strip()]
    if text and all(_YEAR_MONTH.fullmatch(t) for t in text) and len(set(text)) > 1:
        raise DataError(
            f"{path}: column {shown(name)} (--time-column) holds values like {shown(text[0])}, "
            "which look like a year and a month (read as numbers, 2026.10 would be 2026.1 and "
            "the months would be hundredths of a year apart); give how long each row has been "
            "observed (for example days since it was shipped), in the unit of --horizon")


def _true_false_as_numbers(frame: Any, column: str) -> Any:
    """``frame`` with the words True / False (any case) or booleans of ``column`` as 1 / 0, as
    label columns take them; other values are left for :func:`numeric_column` to judge."""
    import pandas as pd

    if column not in frame.columns:
        return frame
    series = frame[column]
    if pd.api.types.is_bool_dtype(series.dtype):
        return pd.DataFrame({column: series.astype(float)}, index=frame.index)
    if series.dtype != object and not pd.api.types.is_string_dtype(series.dtype):
        return frame

    def number(value: Any) -> Any:
        if isinstance(value, bool | np.bool_):
            return "1" if value else "0"
        if isinstance(value, str):
            return _TRUE_FALSE.get(value.strip().lower(), value)
        return value

    return pd.DataFrame({column: series.map(number)}, index=frame.index)


def late_label_summary(hl: Any) -> dict[str, Any]:
    """The JSON block that describes late labels."""
    return {"horizon": float(hl.horizon), "open_rows": int(np.count_nonzero(hl.is_open)),
            "open_share": float(hl.open_share),
            "weighted_prevalence": float(np.average(hl.y, weights=hl.sample_weight))}


def late_label_line(hl: Any) -> str:
    """One line of text output about late labels."""
    n = int(hl.is_open.shape[0])
    return (f"late labels: event within {hl.horizon:g}; {int(np.count_nonzero(hl.is_open))} "
            f"of {n} rows still open (weight 0), the others weighted by the inverse "
            "probability of still being observed")


__all__ += ["late_label_line", "add_alarm_flags", "alarm_settings", "promise_summary"]


# -- prevalence alarm -----------------------------------------------------------------------
def _nonnegative(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise not_a_number(text) from None
    if not (np.isfinite(value) and value >= 0):
        raise argparse.ArgumentTypeError(f"must be a finite number >= 0; got {text}")
    return value


def _positive(text: str) -> float:
    value = _nonnegative(text)
    if value == 0:
        raise argparse.ArgumentTypeError("must be greater than 0; got 0")
    return value


#: the alarm's settings when the flags are not given
ALARM_DEFAULTS = {"alarm_reference": 0.5, "alarm_decision_interval": 5.0}


def add_alarm_flags(parser: argparse.ArgumentParser) -> None:
    """``--alarm-reference`` and ``--alarm-decision-interval`` of the prevalence alarm (None
    when not given: :func:`alarm_settings` checks them and puts in the defaults)."""
    parser.add_argument(
        "--alarm-reference", type=_nonnegative, default=None, metavar="K",
        help="reference value k of the alarm, in standard deviations of the batches' "
        "standardised shift tests: half the shift it should catch fastest (default 0.5)",
    )
    parser.add_argument(
        "--alarm-decision-interval", type=_positive, default=None, metavar="H",
        help="decision interval h of the alarm, in the same units: larger means fewer false "
        "alarms and slower detection (default 5: about one false alarm in 465 batches when "
        "the source prevalence is exact, far fewer batches when it was estimated from few "
        "labelled rows; the output says how many)",
    )


def alarm_settings(args: argparse.Namespace, parser: argparse.ArgumentParser, *,
                   batched: bool, batches: str) -> None:
    """A usage error for alarm flags given without batches (the alarm would not run, and the
    flags would be ignored); then the defaults in place of flags not given."""
    if not batched:
        given = [f"--{name.replace('_', '-')}" for name in ALARM_DEFAULTS
                 if getattr(args, name) is not None]
        if given:
            verb = "sets" if len(given) == 1 else "set"
            parser.error(f"{' and '.join(given)} {verb} the prevalence alarm, which runs only "
                         f"on batches: add {batches}, or leave {' and '.join(given)} out")
    for name, default in ALARM_DEFAULTS.items():
        if getattr(args, name) is None:
            setattr(args, name, default)


# -- guarantee -------------------------------------------------------------------------------
def add_guarantee_flags(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--guarantee", default=None,
        choices=["recall", "precision", "false_positive_rate", "flagged_share"],
        help="also find the least-cost cutoff certified to keep this metric at or above "
        "(recall, precision) or at or below (false_positive_rate, flagged_share) "
        "--guarantee-target on new rows",
    )
    parser.add_argument(
        "--guarantee-target", type=level, default=None, metavar="X",
        help="the floor or ceiling of --guarantee, e.g. 0.9",
    )
    parser.add_argument(
        "--guarantee-confidence", type=level, default=0.9, metavar="LEVEL",
        help="probability that the guarantee holds (default 0.9)",
    )
    parser.add_argument(
        "--guarantee-method", default="high_probability",
        choices=["high_probability", "expectation"],
        help="high_probability (default): holds with --guarantee-confidence; expectation: "
        "holds on average (not for precision)",
    )


def guarantee_args(args: argparse.Namespace,
                   parser: argparse.ArgumentParser) -> dict[str, Any] | None:
    """The ``guarantee`` keyword arguments, or None; usage errors (exit 2) for a half-given
    guarantee."""
    if args.guarantee is None:
        if args.guarantee_target is not None:
            parser.error("--guarantee-target needs --guarantee (which metric)")
        return None
    if args.guarantee_target is None:
        parser.error(f"--guarantee {args.guarantee} needs --guarantee-target (e.g. 0.9)")
    if args.guarantee == "precision" and args.guarantee_method == "expectation":
        # precision does not move one way with the cutoff, so no cutoff is certified on average
        parser.error("--guarantee precision takes --guarantee-method high_probability only "
                     "(precision does not move one way with the cutoff, which the expectation "
                     "method needs)")
    return {"requirement": args.guarantee, "target": args.guarantee_target,
            "confidence": args.guarantee_confidence, "method": args.guarantee_method}


# -- the report verb's JSON summary of the three ----------------------------------------------
def promise_summary(content, summary: dict) -> str:
    """Guarantee, alarm and late labels in the JSON summary, and their words in the line."""
    line = ""
    g = content.guarantee
    if g is not None:
        summary["guarantee"] = {
            "requirement": g.requirement, "target": g.target, "method": g.method,
            "confidence": g.confidence, "cutoff": g.cutoff, "achieved": g.achieved,
            "bound": g.bound, "p_value": g.p_value, "moved_the_cutoff": g.binding,
            "unreachable": g.unreachable,
        }
        line += (f", guarantee unreachable ({g.promise})" if g.unreachable is not None else
                 f", guaranteed cutoff {cutoff_text(g.cutoff, '.4f')} ({g.promise}; bound {g.bound:.4f})")
    a = getattr(content, "alarm", None)
    if a is not None:
        res = a.result
        summary["alarm"] = {
            "reference": float(res.reference), "decision_interval": float(res.decision_interval),
            "alarms": [{"batch": plain(a.batches[i]), "direction":
                        "up" if res.direction[j] > 0 else "down"}
                       for j, i in enumerate(res.alarms)],
            "first_alarm": None if a.first_batch is None else plain(a.first_batch),
            "in_control_run_length": float(a.in_control_run_length),
            "run_length_probability": float(a.run_length_probability),
            "median_in_control_run_length": float(a.median_run_length),
            "exact_baseline_run_length": float(a.exact_baseline_run_length),
            "labelled_share": float(a.labelled_share),
            "assured_decision_interval": float(a.assured_decision_interval),
            "batches_to_detect": None if a.batches_to_detect is None
            else float(a.batches_to_detect),
            "warnings": list(a.warnings),
        }
        line += (", no prevalence alarm" if a.first_batch is None else
                 f", prevalence alarm after batch {a.first_batch}")
    hl = getattr(content, "late_labels", None)
    if hl is not None:
        summary["late_labels"] = late_label_summary(hl)
        line += f"; {int(hl.is_open.sum())} rows still open at horizon {hl.horizon:g}"
    return line
