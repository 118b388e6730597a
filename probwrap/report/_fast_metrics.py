"""Bootstrap intervals of the binary report's five metrics, for many rows, in one pass each.

The library's :func:`probwrap.metrics.bootstrap_interval` evaluates each metric anew on every
resample (validation, sorting, Newton fits), which takes minutes at 10^6 rows. Here the rows are
resampled exactly as there (``randint(0, n, size=n)`` per resample from one seeded
``RandomState``, counts as weights), once for all five metrics, and every metric of a resample
is a weighted sum of per-row values computed once:

- Brier score and log loss: weighted means of the per-row losses (the library's formulas and
  clip), so their resampled values equal ``bootstrap_interval``'s up to summation order;
- expected calibration error (equal-width bins): per-bin sums by ``np.bincount``; also equal;
- calibration slope and calibration-in-the-large: one Newton step from the full-data fit with
  the resample's weights (the one-step bootstrap of generalised linear models, Moulton & Zeger
  1991, Computational Statistics & Data Analysis 11:53-63 -- cited from memory). Its error is of
  the order of the squared resampling deviation, about 1/n: far below the interval's width at
  the sizes where this path is used.

A resample on which ``bootstrap_interval``'s refit would fail is left out and counted as there
(``dropped_resamples``, no interval above 10 %): one class only (slope and intercept), or the
classes not overlapping in the log-odds (slope). Its one-step values are finite but stand for a
fit that does not exist.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import expit
from sklearn.utils import check_random_state

from ..calibration import proba_to_log_odds
from ..metrics import (
    brier_score,
    expected_calibration_error,
    log_loss,
)
from ..metrics._slope import slope_intercept_fit, slope_intercept_fit_log_odds
from ._common import MetricRow, NoteLog, withheld_interval

__all__ = ["FAST_BOOTSTRAP_ROWS", "fast_metric_rows"]

#: from this many labelled rows on, the binary report uses the one-pass bootstrap
FAST_BOOTSTRAP_ROWS = 50_000

_SLOPE_CLIP = 1e-12


def fast_metric_rows(y: np.ndarray, p: np.ndarray, w: np.ndarray | None, n_bins: int,
                     n_resamples: int, level: float, seed: int, notes: NoteLog,
                     labels: dict[str, str], groups: np.ndarray | None = None,
                     log_odds: np.ndarray | None = None) -> list[MetricRow]:
    """The five binary metric rows (see the module docstring); ``labels`` key -> label;
    ``groups``: the cell (``0 .. n_cells - 1``) of every row, resampled whole as
    ``bootstrap_interval(groups=)`` does (None: rows); ``log_odds``: the forecasts as given
    on the log-odds scale, which the slope, intercept and log loss read (None: ``logit(p)``
    and ``log p``, clipped)."""
    from ..metrics._scores import LOG_LOSS_CLIP

    n = p.shape[0]
    bw = np.ones(n) if w is None else np.asarray(w, dtype=float)
    yf = y.astype(float)
    point = {
        "brier": notes.compute("metric:brier", labels["brier"], brier_score, y, p,
                               sample_weight=w),
        "log_loss": (notes.compute("metric:log_loss", labels["log_loss"], log_loss, y, p,
                                   sample_weight=w) if log_odds is None else
                     float(np.average(np.logaddexp(0.0, np.where(y == 1, -log_odds, log_odds)),
                                      weights=w))),
        "ece": notes.compute("metric:ece", labels["ece"], expected_calibration_error, y, p,
                             n_bins=n_bins, sample_weight=w, labels=[0.0, 1.0]),
    }
    if log_odds is None:
        fit = notes.compute("metric:slope", labels["slope"], slope_intercept_fit, y, p,
                            sample_weight=w, expected=(ValueError, np.linalg.LinAlgError))
    else:
        fit = notes.compute("metric:slope", labels["slope"], slope_intercept_fit_log_odds, y,
                            log_odds, sample_weight=w,
                            expected=(ValueError, np.linalg.LinAlgError))
    no_slope = fit is not None and bool(fit.notes)
    if no_slope:  # forecasts that do not vary or separate the classes: intercept only
        notes.add("metric:slope", labels["slope"], "not computed", fit.notes[0])
        warnings.warn(f"report, {labels['slope']}: not computed: {fit.notes[0]}", UserWarning,
                      stacklevel=3)
    # per-row values
    p_obs = np.where(yf == 1.0, p, 1.0 - p)
    per_row_loss = (-np.log(np.maximum(p_obs, LOG_LOSS_CLIP)) if log_odds is None else
                    np.logaddexp(0.0, np.where(yf == 1.0, -log_odds, log_odds)))
    cols = [bw * (p - yf) ** 2, bw * per_row_loss, bw]
    if fit is not None:
        x = (proba_to_log_odds(p, clip=_SLOPE_CLIP) if log_odds is None
             else np.asarray(log_odds, dtype=float))
        mu = (np.full_like(p, 0.5) if no_slope
              else expit(fit.slope_fit_intercept + fit.slope * x))
        r, v = yf - mu, mu * (1.0 - mu)
        mu0 = expit(fit.intercept + x)
        cols += [bw * r, bw * r * x, bw * v, bw * v * x, bw * v * x * x, bw * (yf - mu0),
                 bw * mu0 * (1.0 - mu0)]
    V = np.column_stack(cols)
    # the resamples on which bootstrap_interval's full refits fail, so that they are left out
    # and counted as there: the slope and the intercept need both classes with positive weight
    # (slope_intercept_fit raises otherwise), the slope also classes that overlap in the
    # log-odds (its notes; that check also covers forecasts that are all the same). The
    # one-step values of such a resample are finite but stand for a fit that does not exist.
    if fit is not None:  # each class's rows in increasing log-odds, for _drawn_ends
        by_x = [rows[np.argsort(x[rows], kind="stable")]
                for rows in (np.flatnonzero(yf == 1.0), np.flatnonzero(yf != 1.0))]
    # the library's equal-width edges j / n_bins with bins closed on the left
    idx = np.searchsorted(np.arange(1, n_bins, dtype=float) / n_bins, p, side="right")
    py, pp = bw * yf, bw * p
    rng = check_random_state(seed)
    dist = np.empty((n_resamples, 5))
    n_vanished = n_separated = 0  # resamples with one class only; with classes not overlapping
    n_units = n if groups is None else int(groups.max()) + 1
    for k in range(n_resamples):
        c = np.bincount(rng.randint(0, n_units, size=n_units), minlength=n_units).astype(float)
        if groups is not None:
            c = c[groups]  # every row as often as its cell was drawn
        s = c @ V
        total = s[2]
        gap = np.abs(np.bincount(idx, weights=c * py, minlength=n_bins)
                     - np.bincount(idx, weights=c * pp, minlength=n_bins))
        row = [s[0] / total, s[1] / total, gap.sum() / total, np.nan, np.nan]
        if fit is not None:
            ends = [_drawn_ends(rows, c, bw, x) for rows in by_x]
            if ends[0] is None or ends[1] is None:  # a class vanished: neither number
                n_vanished += 1
                dist[k] = row
                continue
            (pos_lo, pos_hi), (neg_lo, neg_hi) = ends
            if not no_slope and (pos_lo >= neg_hi or neg_lo >= pos_hi):
                row[4] = fit.intercept + s[8] / s[9]  # separated: the intercept only
                n_separated += 1
                dist[k] = row
                continue
            g = np.array([s[3], s[4]])
            H = np.array([[s[5], s[6]], [s[6], s[7]]])
            try:
                row[3] = fit.slope + np.linalg.solve(H, g)[1]
            except np.linalg.LinAlgError:
                row[3] = np.nan
            row[4] = fit.intercept + s[8] / s[9]
        dist[k] = row
    alpha = 1.0 - level
    out = []
    keys = ("brier", "log_loss", "ece", "slope", "intercept")
    ideals = ("0 (lower is better)", "0 (lower is better)", "0", "1", "0")
    values = [point["brier"], point["log_loss"], point["ece"],
              None if fit is None or no_slope else fit.slope,
              None if fit is None else fit.intercept]
    for j, (key, ideal, value) in enumerate(zip(keys, ideals, values, strict=True)):
        if value is None:
            nan = float("nan")
            out.append(MetricRow(key, labels[key], nan, nan, nan, ideal))
            continue
        finite = np.isfinite(dist[:, j])
        d = dist[:, j][finite]
        dropped = int(n_resamples - d.shape[0])
        if dropped:
            why = _why_dropped(dropped, n_vanished, n_separated if key == "slope" else 0)
            message = (f"{dropped} of {n_resamples} resamples were left out because the number "
                       f"could not be computed on them{why}.")
            warnings.warn(f"report, {labels[key]}: {message}", UserWarning, stacklevel=3)
            notes.add(f"metric:{key}", labels[key], "UserWarning", message)
        why = withheld_interval(notes, key, labels[key], dropped, n_resamples)
        lo, hi = ((np.nan, np.nan) if why is not None
                  else np.quantile(d, [alpha / 2.0, 1.0 - alpha / 2.0]))
        extra = {"dropped_resamples": dropped, "interval_note": why}
        if key == "ece":
            corrected = 2.0 * value - (float(np.median(d)) if d.size else value)
            out.append(MetricRow(key, labels[key], max(corrected, 0.0),
                                 max(2.0 * value - hi, 0.0), max(2.0 * value - lo, 0.0), ideal,
                                 interval_method="basic, bias-corrected", plain_value=value,
                                 **extra))
        else:
            method = "percentile" if key in ("brier", "log_loss") else "percentile, one-step"
            out.append(MetricRow(key, labels[key], float(value), float(lo), float(hi), ideal,
                                 interval_method=method, **extra))
    return out


_ENDS = 64  # rows looked at first from each end of a class's order (then all of them)


def _drawn_ends(rows: np.ndarray, c: np.ndarray, bw: np.ndarray,
                x: np.ndarray) -> tuple[float, float] | None:
    """The lowest and highest log-odds ``x`` among ``rows`` (one class, in increasing ``x``)
    drawn with positive weight (``c * bw > 0``) in a resample; None when none is. The first
    ``_ENDS`` rows from each end nearly always hold a drawn one (each is missed with
    probability about e^-1), so a resample of 10^6 rows costs a few lookups, not a pass."""
    ends = []
    for order in (rows, rows[::-1]):
        side = order[:_ENDS]
        hit = c[side] * bw[side] > 0
        if not hit.any():
            side = order
            hit = c[side] * bw[side] > 0
            if not hit.any():
                return None
        ends.append(float(x[side[int(np.argmax(hit))]]))
    return ends[0], ends[1]


def _why_dropped(dropped: int, n_vanished: int, n_separated: int) -> str:
    """Why ``dropped`` resamples of one metric were left out, in words (empty if unknown)."""
    parts = []
    if n_vanished:
        parts.append(f"{n_vanished} held one class only (`y_true` must contain both classes, "
                     "with positive weight, for a calibration slope and intercept)")
    if n_separated:
        parts.append(f"in {n_separated} the classes did not overlap in the log-odds, so the "
                     "slope is unbounded")
    other = dropped - n_vanished - n_separated
    if parts and other > 0:
        parts.append(f"{other} gave a value that is not finite")
    return f": {'; '.join(parts)}" if parts else ""
