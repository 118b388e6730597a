"""Many no-shift draws of one hunt22 cell: the realised harm of ``adapt`` against ``max_harm``.

The cell of ``benchmarks/shift_real_hunt22.py`` (its split for seed 1): the model fitted on its
third of the rows and frozen; then, per draw, the other rows split at random by class into
labelled and unlabelled rows (both sides redrawn, the shares the same: nothing moved). Printed:
the mean, 95th percentile and worst of adapted / no adjustment - 1 beside the expected harm
``max_harm`` promises, the share of draws above 2 %, how often the rule moved, and, on the moved
draws, the harm predicted by ``draw_harm`` (first- and second-order terms) against the
realised one (docs/evidence/prior_shift_log.md, "One draw's harm when nothing moved").

Run: PYTHONPATH=$PWD nice python benchmarks/shift_no_shift_draws.py [--set ad_data] [--model lr]
[--draws 120]
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper
from probwrap.shift._shift_tests import draw_harm, null_harm

sys.path.insert(0, str(Path(__file__).parent))
import shift_real_hunt22 as hunt  # noqa: E402


def main() -> None:
    """Run the draws and print the summary."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--set", default="ad_data")
    ap.add_argument("--model", default="lr")
    ap.add_argument("--draws", type=int, default=120)
    a = ap.parse_args()
    name, X, y = next((n, X, y) for n, X, y, _, _ in hunt.sets() if a.set.lower() in n.lower())
    classes = np.unique(y)
    A, B, C = hunt.split3(y, 1)
    model = hunt.make_model(a.model).fit(X.iloc[A], y[A])
    rest = np.concatenate([B, C])
    out = []
    for r in range(a.draws):
        rng = np.random.default_rng([99, r])
        lab, unl = [], []
        for c in classes:
            idx = rng.permutation(rest[y[rest] == c])
            m = int(round(len(idx) * len(B) / len(rest)))
            lab += idx[:m].tolist()
            unl += idx[m:].tolist()
        lab, unl = np.array(lab), np.array(unl)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw = PriorShiftWrapper(FrozenEstimator(model), random_state=r, n_resamples=0)
            psw.fit(X.iloc[lab], y[lab]).adapt(X.iloc[unl])
        none = hunt.log_loss(y[unl], psw._calibrated(X.iloc[unl]), classes)
        adapted = hunt.log_loss(y[unl], psw.predict_proba(X.iloc[unl]), classes)
        res = psw.prior_estimate_
        scale = res.null_harm_scale or 0.0
        out.append((adapted / none - 1, scale * null_harm(psw.evidence_cutoff_, len(classes) - 1),
                    psw.adaptation_weight_, psw.shift_pvalue_,
                    draw_harm(scale, res.null_move_ratio, psw.shift_statistic_,
                              psw.adaptation_weight_)))
    h, promised, w, p, pred = np.array(out).T
    print(f"{name}, {a.model}, {a.draws} no-shift draws: {len(lab)} labelled, {len(unl)} unlabelled")
    print(f"realised harm: mean {h.mean():.4f}, 95th percentile {np.quantile(h, 0.95):.4f}, worst "
          f"{h.max():.4f}; share of draws above 0.02: {np.mean(h > 0.02):.3f}")
    print(f"expected harm promised (max_harm): mean {promised.mean():.4f}; moved in "
          f"{np.mean(w > 0):.3f} of the draws; shift test p < 0.05 in {np.mean(p < 0.05):.3f}")
    moved = w > 0
    if moved.sum() > 2:
        print(f"moved draws: realised {h[moved].mean():.4f} on average, draw_harm predicted "
              f"{pred[moved].mean():.4f}; correlation {np.corrcoef(h[moved], pred[moved])[0, 1]:.3f}")


if __name__ == "__main__":
    main()
