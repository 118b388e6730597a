"""Loops and tallies shared by the benchmark hunts (hunt23_sweep.py ... hunt29_sweep.py and
shift_real_hunt22.py ... shift_real_hunt29.py).

Importing this module only defines functions (tests/test_benchmark_import_guard.py).

Row-cell hunts: one cell is a set (a ``hunt21_sweep.Task``), a setup (``mode``: ``cross``,
``frozen``, ``rare``, ...), a number of labelled rows, a model and a seed. A script brings its
sets, models, cell function and summary; the loop, the draw, the references and the tallies
are here. A new hunt, from its benchmarks/ script::

    sys.path.insert(0, str(Path(__file__).parent))
    import _hunt_loop as L
    import hunt21_sweep as H

    def one_cell(rec, task, mname, model, n_cal, mode, seed):
        tr, cal, te = L.draw_cell(task, n_cal, mode, seed)          # stratified; tr: frozen rows
        Xc, yc, Xt, yt, classes = L.split_cell(task.X, task.y, cal, te)
        where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
        row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed}
        base, own = L.base_and_own(model, task.X, task.y, tr, Xc, yc, None, H._fit)
        row["own"] = H.log_loss(yt, own.predict_proba(Xt), classes)
        sig = L.sigmoid_reference(base, Xc, yc, None, tr is not None)  # None: no sigmoid
        row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)
        L.score_proba(rec, row, where, "cal", lambda: CalibrationWrapper(base), H._fit,
                      Xc, yc, None, Xt, yt, classes, seed)                # row["cal"], flags
        rec.rows.append(row)

    a = L.sweep_arguments("my hunt", models="lr,nb").parse_args(argv)
    ms, rec, t0 = H.models(), H.Rec(), time.time()
    L.run_cells(rec, tasks, a.modes.split(","), lambda t, mode: L.sizes_for(t, mode, (40, 100)),
                a.models.split(","), range(a.first_seed, a.first_seed + a.seeds),
                lambda t, m, n_cal, mode, s: one_cell(rec, t, m, ms[m], n_cal, mode, s), t0=t0, csv=a.csv)
    L.finish(rec, t0, a.csv, my_summary)     # my_summary(df), the CSV, then "N flags; S s"

``run_cells(..., variants=f)`` runs a cell once per keyword set ``f(task, mode, n_cal)``
gives (e.g. weight kinds), ``keep_size`` / ``keep_model`` skip sizes / models. Tallies:
``geo_mean``, ``warned``, ``warning_names``, ``cost_rows``; ``fit_listing_warnings`` fits and lists
the warnings (probwrap's marked ``*``, plain-class warnings raised from probwrap included).

Prior-shift hunts: ``run_sets(sets(), seeds, models, cell, crashes, picked=picked_by(names))``
calls ``cell(name, X, y, model, seed)`` for every set, seed and model and keeps the script's own
crashes (``shift_real_hunt24.saver`` writes the rows after every set).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from collections.abc import Callable, Iterable
from contextlib import contextmanager

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator

RARE = 0.05  # the positives' share in the ``rare`` setup
FROZEN_TRAIN = 0.3  # share of a set's rows that fits the frozen model (at most 300 rows)


# --- sets and draws ------------------------------------------------------------------------

def cap_frame(d: pd.DataFrame, max_rows: int = 1500, seed: int = 0) -> pd.DataFrame:
    """``d`` with a fresh index; above ``max_rows`` rows, a draw of that many (pandas' ``sample``)."""
    if len(d) <= max_rows:
        return d.reset_index(drop=True)
    return d.sample(max_rows, random_state=seed).reset_index(drop=True)


def frozen_rows(units: int, frozen_train: float = FROZEN_TRAIN) -> int:
    """Rows that fit the frozen model: ``frozen_train`` of the set, at most 300."""
    return min(300, int(frozen_train * units))


def draw_cell(task, n_cal: int, mode: str, seed: int, *, frozen_train: float = FROZEN_TRAIN,
              rare: float | None = RARE):
    """(train index for a frozen model or None, labelled index, test index), stratified.

    ``mode="rare"`` (unless ``rare`` is None) first drops positives until they are ``rare`` of
    the rows; ``mode="frozen"`` keeps :func:`frozen_rows` rows apart for the model. The labelled
    rows take each class's share of ``n_cal``, at least 2 rows of a class when it has 4.
    """
    rng = np.random.default_rng(seed)
    y = task.y
    idx = rng.permutation(task.units)
    if mode == "rare" and rare is not None:  # drop positives until they are ``rare`` of the rows
        pos, neg = idx[y[idx] == 1], idx[y[idx] == 0]
        k = max(int(round(rare / (1 - rare) * len(neg))), 1)
        idx = rng.permutation(np.concatenate([neg, pos[:k]]))
    tr = None
    if mode == "frozen":
        n_tr = frozen_rows(task.units, frozen_train)
        tr, idx = idx[:n_tr], idx[n_tr:]
    cal = []
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.maximum(np.round(counts / counts.sum() * n_cal).astype(int), np.minimum(2, counts // 2))
    for c, k in zip(classes, want, strict=True):
        cal.extend(idx[y[idx] == c][:k])
    cal = np.array(sorted(cal))
    te = np.setdiff1d(idx, cal)
    return tr, cal, te


def sizes_for(task, mode: str, sizes: tuple[int, ...], *, frozen_train: float = FROZEN_TRAIN,
              rare: float | None = RARE, smallest: Callable[[int], int] | None = None) -> list[int]:
    """The numbers of labelled rows of ``sizes`` a set has room for (at most 60 % of its rows).

    ``rare``: the sizes after the first, on the rows left once positives are thinned. Where
    none fits: ``smallest(room)`` (default: the first size or half the room, the smaller).
    """
    room = task.units - (frozen_rows(task.units, frozen_train) if mode == "frozen" else 0)
    if mode == "rare" and rare is not None:
        room = int(np.sum(task.y == 0) / (1 - rare))
        return [s for s in sizes[1:] if s <= 0.6 * room]
    fits = [s for s in sizes if s <= 0.6 * room]
    if fits:
        return fits
    return [min(sizes[0], int(0.5 * room)) if smallest is None else smallest(room)]


def split_cell(X: pd.DataFrame, y: np.ndarray, cal: np.ndarray, te: np.ndarray):
    """(Xc, yc, Xt, yt, classes): the labelled rows, and the test rows of the labelled classes."""
    Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
    Xt, yt = X.iloc[te].reset_index(drop=True), y[te]
    classes = np.unique(yc)
    keep = np.isin(yt, classes)
    return Xc, yc, Xt[keep].reset_index(drop=True), yt[keep], classes


# --- fits -----------------------------------------------------------------------------------

def base_and_own(model, X: pd.DataFrame, y: np.ndarray, tr, Xc, yc, w, fit: Callable):
    """(what the wrappers wrap, the fitted model whose own probabilities are the baseline).

    A frozen cell (``tr``, the model's rows, not None): the model fitted on ``X.iloc[tr]``
    unweighted, and that in a ``FrozenEstimator``; else a fresh clone, and the model fitted on
    the labelled rows with ``w``. ``fit(est, X, y, w, caught)`` fits (e.g. ``hunt21_sweep._fit``).
    """
    if tr is not None:
        fitted = fit(clone(model), X.iloc[tr].reset_index(drop=True), y[tr], None, [])
        return FrozenEstimator(fitted), fitted
    return clone(model), fit(clone(model), Xc, yc, w, [])


def score_proba(rec, row: dict, where: str, tag: str, make: Callable, fit: Callable, Xc, yc, w, Xt, yt,
                classes, seed: int, *, brier: Callable | None = None, crash_chars: int | None = None):
    """Fit ``make()`` on the labelled rows and score its test probabilities into ``row``.

    ``fit(est, Xc, yc, w, caught)`` fits and lists the warnings; NumPy's global state is seeded
    ``1000 + seed`` first (``random_state=None`` shuffles with it). Keys: ``tag`` (log loss),
    ``tag_b`` (``brier(yt, P, classes)``, with ``brier``), ``tag_01`` (entries exactly 0 or 1),
    ``tag_warn``; flagged in ``rec`` above 1.10x and 0.01 nats over ``row["sig"]``. A crash is
    flagged and kept as ``tag_crash``: its text cut to ``crash_chars`` (with ``tag_warn``), or 1
    without ``crash_chars``. Returns the fitted estimator, or None after a crash.
    """
    import hunt21_sweep as H  # the hunts' log loss and probability checks

    caught: list = []
    np.random.seed(1000 + seed)  # noqa: NPY002  (random_state=None shuffles with the global state)
    try:
        est = fit(make(), Xc, yc, w, caught)
        P = est.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        if crash_chars is None:
            rec.flag(f"{where}/{tag}", f"crash {type(e).__name__}: {e}"[:300])
            row[f"{tag}_crash"] = 1
        else:
            row[f"{tag}_crash"] = f"{type(e).__name__}: {e}"[:crash_chars]
            row[f"{tag}_warn"] = ",".join(caught)
            rec.flag(f"{where}/{tag}", f"raises {row[f'{tag}_crash']}")
        return None
    H.check_proba(rec, f"{where}/{tag}", P)
    row[tag] = H.log_loss(yt, P, classes)
    if brier is not None:
        row[f"{tag}_b"] = brier(yt, P, classes)
    row[f"{tag}_01"] = int(np.sum((P <= 0) | (P >= 1)))
    row[f"{tag}_warn"] = ",".join(caught)
    if np.isfinite(row["sig"]) and row[tag] > 1.10 * row["sig"] and row[tag] - row["sig"] > 0.01:
        rec.flag(where, f"{tag} {row[tag]:.3f} against sigmoid {row['sig']:.3f}, own {row['own']:.3f}"
                 f" ({getattr(est, 'method_', '')}; {row[f'{tag}_warn'] or 'no warning'})")
    return est


# --- references -----------------------------------------------------------------------------

def sigmoid_reference(base, X, y, w=None, frozen: bool = False,
                      errors: tuple[type[Exception], ...] = (ValueError,)):
    """scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` fitted on the rows (``cv`` up
    to 5, as the rarest class allows; ``ensemble=False`` on a frozen model), or None where a
    class has a single row or the fit raises one of ``errors``."""
    _, counts = np.unique(y, return_counts=True)
    cv = int(min(5, counts.min()))
    if cv < 2:
        return None
    est = (CalibratedClassifierCV(base, method="sigmoid", cv=cv, ensemble=False) if frozen
           else CalibratedClassifierCV(clone(base), method="sigmoid", cv=cv))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return est.fit(X, y) if w is None else est.fit(X, y, sample_weight=w)
        except errors:
            return None


def cost_rows(decided: np.ndarray, pos: np.ndarray, fn: float = 4.0, fp: float = 1.0) -> np.ndarray:
    """Each row's cost: ``fp`` for a positive decision on a negative, ``fn`` for a missed positive."""
    return np.where(decided & ~pos, fp, 0.0) + np.where(~decided & pos, fn, 0.0)


# --- tallies --------------------------------------------------------------------------------

def geo_mean(r: pd.Series) -> float:
    """Geometric mean of the finite, positive ratios (NaN when there are none)."""
    r = r.replace([np.inf, -np.inf], np.nan).dropna()
    r = r[r > 0]
    return float(np.exp(np.log(r).mean())) if len(r) else np.nan


@contextmanager
def warnings_by_origin():
    """Record every warning, with the module that raised it.

    Yields ``(records, origin)``: ``records`` as ``warnings.catch_warnings(record=True)`` keeps
    them (filter ``"always"``), ``origin(record)`` the name of the module whose code called
    ``warnings.warn`` for it ("" if unknown: raised from C, or before the block). A warning
    raised with ``stacklevel`` carries the caller's file, not the raiser's, so a plain
    ``UserWarning`` from probwrap cannot be told from the file path; ``warnings.warn`` is
    wrapped for the block to note its caller (keyed by class and text, so a warning probwrap
    caught and raised again with ``warn_explicit`` keeps the module that first raised it).
    """
    seen: dict[tuple[type, str], str] = {}
    real = warnings.warn

    def warn(message, category=None, stacklevel=1, source=None, **kw):
        cat = type(message) if isinstance(message, Warning) else (category or UserWarning)
        seen.setdefault((cat, str(message)), sys._getframe(1).f_globals.get("__name__", ""))
        return real(message, category, stacklevel + 1, source, **kw)

    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        warnings.warn = warn
        try:
            yield ws, lambda x: seen.get((x.category, str(x.message)), "")
        finally:
            warnings.warn = real


def probwrap_warning(x, origin: str = "") -> bool:
    """A recorded warning is probwrap's: a probwrap class, raised from probwrap's code
    (``origin``, from :func:`warnings_by_origin`), or its file in a ``probwrap`` folder."""
    return (getattr(x.category, "__module__", "").startswith("probwrap")
            or origin == "probwrap" or origin.startswith("probwrap.")
            or "probwrap" in str(x.filename))


def fit_listing_warnings(est, X, y, w, caught: list):
    """Fit ``est`` (with ``sample_weight=w`` unless None) keeping every warning but
    deprecations; ``caught`` gets their sorted distinct class names, probwrap's marked ``*``
    (:func:`probwrap_warning`: plain-class warnings raised from probwrap count too)."""
    with warnings_by_origin() as (ws, origin):
        if w is None:
            est.fit(X, y)
        else:
            est.fit(X, y, sample_weight=w)
    for x in ws:
        if issubclass(x.category, DeprecationWarning):
            continue
        caught.append(("*" if probwrap_warning(x, origin(x)) else "") + x.category.__name__)
    caught[:] = sorted(set(caught))
    return est


def warned(s) -> bool:
    """A cell's warning list names one of probwrap's warnings (marked ``*`` by
    :func:`fit_listing_warnings`)."""
    return isinstance(s, str) and "*" in s


def warning_names(values: Iterable) -> list[str]:
    """The sorted distinct names in comma-separated warning lists (gaps skipped)."""
    return sorted({n for s in values for n in str(s).split(",") if n})


# --- the loops ------------------------------------------------------------------------------

def sweep_arguments(description: str, *, seeds: int = 1, models: str = "",
                    modes: str = "cross,frozen,rare") -> argparse.ArgumentParser:
    """The options of a row-cell hunt: ``--quick``, ``--seeds``, ``--first-seed``, ``--sets``,
    ``--models``, ``--modes`` and ``--sizes`` (comma-separated), ``--list``, ``--csv FILE``
    (the rows, kept set by set) and ``--from-csv A,B`` (summarise saved rows without refitting).
    A script adds its own options to the parser it gets."""
    ap = argparse.ArgumentParser(description=description)
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=seeds)
    ap.add_argument("--first-seed", type=int, default=0)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default=models)
    ap.add_argument("--modes", default=modes)
    ap.add_argument("--sizes", default="", help="only these numbers of labelled rows, e.g. 40,100")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    ap.add_argument("--from-csv", default="", help="summarise saved cells (with --csv's columns) without refitting")
    return ap


def from_csv(paths: str) -> pd.DataFrame:
    """``--from-csv A,B``: the saved rows of every file, one frame."""
    return pd.concat([pd.read_csv(f) for f in paths.split(",")], ignore_index=True)


def list_tasks(tasks, width: int = 16) -> None:
    """``--list``: a line per set (rows, columns, the rarest class's share, the note)."""
    for t in tasks:
        share = pd.Series(t.y).value_counts(normalize=True).min()
        print(f"{t.name:{width}s} rows {t.units:5d} features {t.X.shape[1]:3d} rarest {share:.3f}  {t.note}")


def run_cells(rec, tasks, modes: list[str], sizes: Callable, model_names: list[str], seeds: Iterable[int],
              cell: Callable, *, t0: float, keep_size: Callable[[int], bool] | None = None,
              keep_model: Callable | None = None, variants: Callable | None = None,
              rare: float | None = RARE, csv: str = "") -> None:
    """Every cell of ``tasks``: set, mode, size (``sizes(task, mode)``), model, seed, variant.

    ``cell(task, mname, n_cal, mode, seed, **variant)`` appends at most one row to
    ``rec.rows``; the loop stamps it with the seconds since ``t0``. ``variants(task, mode,
    n_cal)`` gives the keyword sets a cell runs with (default: one, empty). ``rare`` setups are
    skipped on multiclass sets and where positives are under twice ``rare``. With ``csv`` the
    rows so far are written after every set.
    """
    seeds = list(seeds)
    for t in tasks:
        print(f"{t.name} ({t.units} rows): {t.note}", flush=True)
        binary = len(np.unique(t.y)) == 2
        for mode in modes:
            if mode == "rare" and rare is not None and (not binary or np.mean(t.y) < 2 * rare):
                continue
            for n_cal in sizes(t, mode):
                if keep_size is not None and not keep_size(n_cal):
                    continue
                kws = [{}] if variants is None else variants(t, mode, n_cal)
                for m in model_names:
                    if keep_model is not None and not keep_model(t, m):
                        continue
                    for s in seeds:
                        for kw in kws:
                            before = len(rec.rows)
                            cell(t, m, n_cal, mode, s, **kw)
                            if len(rec.rows) > before:
                                rec.rows[-1]["seconds"] = round(time.time() - t0, 1)
        if csv:  # kept set by set
            pd.DataFrame(rec.rows).to_csv(csv, index=False)


def finish(rec, t0: float, csv: str, *summaries: Callable[[pd.DataFrame], None]) -> pd.DataFrame:
    """The rows as a frame, each summary printed, the CSV written, then ``N flags; S s``."""
    df = pd.DataFrame(rec.rows)
    for summarise in summaries:
        summarise(df)
    if csv:
        df.to_csv(csv, index=False)
    print(f"\n{len(rec.flags)} flags; {time.time() - t0:.0f} s")
    return df


def picked_by(patterns: list[str] | None) -> Callable[[str], bool]:
    """``--sets``: a set is run when its name holds one of ``patterns`` (any case), or all sets."""
    return lambda name: not patterns or any(s.lower() in name.lower() for s in patterns)


def run_sets(named: Iterable[tuple], seeds: Iterable[int], models: Iterable[str], cell: Callable,
             crashes: list, *, picked: Callable[[str], bool] | None = None,
             after_set: Callable[[], None] | None = None, echo: bool = True) -> None:
    """``cell(name, *data, model, seed)`` for each ``(name, *data)`` of ``named`` that is
    ``picked`` (default: all), each seed and each model. An error of the script's own (a draw the cell could
    not make) goes to ``crashes`` as ``("name/model/sSEED (script)", text)``, printed with
    ``echo``; ``after_set()`` runs after every set (e.g. to save the rows so far)."""
    seeds, models = list(seeds), list(models)
    for name, *data in named:
        if picked is not None and not picked(name):
            continue
        for seed in seeds:
            for m in models:
                try:
                    cell(name, *data, m, seed)
                except Exception as e:  # noqa: BLE001 (the script's own draw, not the wrapper)
                    crashes.append((f"{name}/{m}/s{seed} (script)", f"{type(e).__name__}: {e}"))
                    if echo:
                        print(f"  CRASH {name}/{m}/s{seed} (script): {type(e).__name__}: {e}")
        if after_set is not None:
            after_set()
