"""Coverage of the prevalence interval and level of the shift test on counts (k of n), with and
without the cells.

statsmodels' bundled star98 (303 school districts, pupils above / below the median in maths; no
download). Every replicate takes each district's observed pass rate as its truth and redraws
its pupils above the median as Binomial(n, rate), so the districts vary around a model's
forecasts as much as the real ones do (Pearson dispersion about 14). The districts are split at
random in half, labelled and unlabelled; with ``--shift s`` each unlabelled district keeps each
failing pupil with probability ``1 - s`` (a prior shift inside every district). The posteriors
come from a logistic regression on four covariates fitted once to the real counts (frozen).
``PriorEstimator`` (defaults: EM, score interval) is fitted to the labelled rows and estimates
the unlabelled rows' pass rate, once counting the rows by Kish's size (no cells) and once with
``cells=`` (the districts); the interval covers when it holds the unlabelled districts' realised
pass rate.

    nice python benchmarks/shift_cells.py --reps 300            # ~2 min
    nice python benchmarks/shift_cells.py --reps 300 --shift 0.3
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np


def main() -> None:
    import statsmodels.api as sm
    from sklearn.linear_model import LogisticRegression

    from probwrap.aggregated import expand_counts
    from probwrap.shift import PriorEstimator

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=300)
    ap.add_argument("--shift", type=float, default=0.0,
                    help="share of each unlabelled district's failing pupils dropped")
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()

    d = sm.datasets.star98.load_pandas()
    k0 = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    g = n.shape[0]
    Xr, yr, w0 = expand_counts(X, k0, n, drop_empty=False)
    model = LogisticRegression(C=1e6, max_iter=2000).fit(Xr, yr, sample_weight=w0)
    p1 = np.repeat(model.predict_proba(X)[:, 1], 2)  # a district's two rows: one forecast
    post = np.column_stack([1.0 - p1, p1])
    y = np.tile([1, 0], g)
    cell = np.repeat(np.arange(g), 2)
    rate = k0 / n
    rng = np.random.default_rng(args.seed)
    out: dict[bool, list] = {False: [], True: []}
    for r in range(args.reps):
        k = rng.binomial(n.astype(int), rate).astype(float)
        fail_u = rng.binomial((n - k).astype(int), 1.0 - args.shift).astype(float)
        lab = np.zeros(g, bool)
        lab[rng.permutation(g)[: g // 2]] = True
        w_l = np.column_stack([k, n - k]).ravel()
        w_u = np.column_stack([k, fail_u]).ravel()
        truth = k[~lab].sum() / (k[~lab].sum() + fail_u[~lab].sum())
        keep_l = lab[cell] & (w_l > 0)
        keep_u = ~lab[cell] & (w_u > 0)
        for use in (False, True):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                est = PriorEstimator(random_state=r).fit(
                    post[keep_l], y[keep_l], w_l[keep_l], cells=cell[keep_l] if use else None)
                res = est.estimate(post[keep_u], w_u[keep_u],
                                   cells=cell[keep_u] if use else None)
            lo, hi = res.interval[1]
            out[use].append((lo <= truth <= hi, hi - lo, res.shift_pvalue < 0.05,
                             res.prior[1] - truth))
    print(f"star98, {args.reps} replicates, shift {args.shift}: 95 % interval of the unlabelled "
          "pass rate; shift test at 5 %")
    for use in (False, True):
        a = np.asarray(out[use], dtype=float)
        print(f"  {'cells (districts)' if use else 'Kish (no cells)  '}: coverage "
              f"{a[:, 0].mean():.3f}, mean width {a[:, 1].mean():.3f}, test rejects "
              f"{a[:, 2].mean():.3f}, RMSE of the estimate {np.sqrt(np.mean(a[:, 3] ** 2)):.4f}")


if __name__ == "__main__":
    main()
