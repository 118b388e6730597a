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

``--data cluster`` draws a cluster sample instead: 40 cells of 10-60 rows, a row's feature the
cell's share plus its own (``x = a_g + e``, sd 1 and 0.5) and its true log-odds ``-1 + 1.2 x +
b_g`` with a cell effect ``b_g`` (sd 1) the model does not see (a logistic regression on ``x``
fitted once on 200,000 such rows); half the cells labelled, with ``--shift s`` each unlabelled
positive row dropped with probability ``s``.

Besides coverage and the test's level it prints the evidence gate of ``PriorShiftWrapper``
(``adaptation_weight_ > 0``, defaults ``max_harm=0.01, min_evidence=1``) against its nominal
rate ``P(chi2_1 > evidence_cutoff_)``, and the error of the shrunk estimate.

    nice python benchmarks/shift_cells.py --reps 300            # ~2 min
    nice python benchmarks/shift_cells.py --reps 300 --shift 0.3
    nice python benchmarks/shift_cells.py --reps 200 --data cluster
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np


def star98_draws(reps: int, shift: float, seed: int):
    """Labelled (posteriors, labels, weights, cells), unlabelled (posteriors, weights, cells)
    and the unlabelled rows' true share, per replicate (module docstring)."""
    import statsmodels.api as sm
    from sklearn.linear_model import LogisticRegression

    from probwrap.aggregated import expand_counts

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
    rng = np.random.default_rng(seed)
    for _ in range(reps):
        k = rng.binomial(n.astype(int), rate).astype(float)
        fail_u = rng.binomial((n - k).astype(int), 1.0 - shift).astype(float)
        lab = np.zeros(g, bool)
        lab[rng.permutation(g)[: g // 2]] = True
        w_l = np.column_stack([k, n - k]).ravel()
        w_u = np.column_stack([k, fail_u]).ravel()
        truth = k[~lab].sum() / (k[~lab].sum() + fail_u[~lab].sum())
        keep_l = lab[cell] & (w_l > 0)
        keep_u = ~lab[cell] & (w_u > 0)
        yield ((post[keep_l], y[keep_l], w_l[keep_l], cell[keep_l]),
               (post[keep_u], w_u[keep_u], cell[keep_u]), truth)


def cluster_draws(reps: int, shift: float, seed: int, n_cells: int = 40):
    """The cluster sample of the module docstring, as :func:`star98_draws` yields it."""
    from sklearn.linear_model import LogisticRegression

    rng = np.random.default_rng(seed)
    xb = rng.normal(size=200_000) * np.sqrt(1.25)
    bb = rng.normal(size=200_000)
    yb = rng.random(200_000) < 1 / (1 + np.exp(-(-1.0 + 1.2 * xb + bb)))
    model = LogisticRegression().fit(xb[:, None], yb)
    for _ in range(reps):
        cell = np.repeat(np.arange(n_cells), rng.integers(10, 61, size=n_cells))
        b = rng.normal(size=n_cells)[cell]
        x = rng.normal(size=n_cells)[cell] + rng.normal(scale=0.5, size=cell.size)
        y = (rng.random(cell.size) < 1 / (1 + np.exp(-(-1.0 + 1.2 * x + b)))).astype(int)
        lab = np.zeros(n_cells, bool)
        lab[rng.permutation(n_cells)[: n_cells // 2]] = True
        keep_l = lab[cell]
        keep_u = ~keep_l & ~((y == 1) & (rng.random(cell.size) < shift))
        post = model.predict_proba(x[:, None])
        yield ((post[keep_l], y[keep_l], None, cell[keep_l]),
               (post[keep_u], None, cell[keep_u]), float(y[keep_u].mean()))


def main() -> None:
    from scipy.stats import chi2

    from probwrap._prior_shift import evidence_gate
    from probwrap.shift import PriorEstimator

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reps", type=int, default=300)
    ap.add_argument("--shift", type=float, default=0.0,
                    help="share of each unlabelled district's failing pupils dropped (star98) "
                         "or of the unlabelled positive rows (cluster)")
    ap.add_argument("--data", choices=("star98", "cluster"), default="star98")
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args()
    draws = star98_draws if args.data == "star98" else cluster_draws
    out: dict[bool, list] = {False: [], True: []}
    for r, ((p_l, y_l, w_l, c_l), (p_u, w_u, c_u), truth) in enumerate(
            draws(args.reps, args.shift, args.seed)):
        for use in (False, True):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                est = PriorEstimator(random_state=r).fit(p_l, y_l, w_l,
                                                         cells=c_l if use else None)
                res = est.estimate(p_u, w_u, cells=c_u if use else None)
            lo, hi = res.interval[1]
            weight, cutoff = evidence_gate(res, 2)
            out[use].append((lo <= truth <= hi, hi - lo, res.shift_pvalue < 0.05,
                             res.prior[1] - truth, weight > 0, chi2.sf(cutoff, 1)))
    print(f"{args.data}, {args.reps} replicates, shift {args.shift}: 95 % interval of the "
          "unlabelled share; shift test at 5 %; evidence gate (nominal rate)")
    for use in (False, True):
        a = np.asarray(out[use], dtype=float)
        print(f"  {'cells' if use else 'Kish (no cells)'}: coverage "
              f"{a[:, 0].mean():.3f}, mean width {a[:, 1].mean():.3f}, test rejects "
              f"{a[:, 2].mean():.3f}, gate moves {a[:, 4].mean():.3f} ({a[:, 5].mean():.3f}), "
              f"RMSE of the estimate {np.sqrt(np.mean(a[:, 3] ** 2)):.4f}")


if __name__ == "__main__":
    main()
