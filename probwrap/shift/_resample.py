"""The resampling behind :class:`PriorEstimator`'s bootstrap intervals.

Poisson resamples of the labelled and the unlabelled rows, each re-estimating the calibration by
one Newton step, the source prior, the confusion matrices and the prior; the grouped jackknife
for the BCa acceleration; the tally that replaces many labelled rows; and the interval built
from the resampled estimates.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import expit

from ._analytic import _logit_jacobian
from ._calibration import _log_softmax
from ._confusion import _simplex_least_squares
from ._estimate import _solve_prior
from ._interval import bca_interval

#: Groups of rows left out per sample by the grouped jackknife behind the BCa acceleration.
JACKKNIFE_GROUPS = 10


def _softmax(z: np.ndarray, scale: np.ndarray, bias: np.ndarray) -> np.ndarray:
    """``softmax(z * scale + bias)`` row-wise; for two columns one logistic function."""
    if z.shape[1] == 2:
        p1 = expit(z[:, 1] * scale[1] - z[:, 0] * scale[0] + (bias[1] - bias[0]))
        return np.column_stack([1.0 - p1, p1])
    return np.exp(_log_softmax(z * scale + bias, axis=1))


class _Resampling:
    """Bootstrap machinery of :class:`PriorEstimator` (a mixin: it reads the fitted estimator's
    ``_src``, ``calibrator_``, ``source_prior_``, confusion matrices and parameters)."""

    def __getstate__(self) -> dict:
        # the per-row bootstrap pieces are a cache, recomputed on demand: never pickled
        state = self.__dict__.copy()
        state["_boot"] = None
        return state

    def _condense_source(self, resolution: float, max_bins: int) -> None:
        """Replace the kept labelled rows of a binary fit by a tally of their log-odds.

        Everything :meth:`fit` derives from the rows (calibration, source prior, confusion
        matrices, the score moments of the shift test) stays as computed on every row; only the
        intervals, which re-read the labelled rows, then read bins instead: per class, the rows
        whose raw log-odds fall in one bin of width ``resolution`` (doubled until at most
        ``max_bins`` bins span the scores) become one entry with the bin's weighted mean
        probability, the bin's total weight and Kish's count of its rows (for the Poisson
        bootstrap: a bin of ``c`` unit-weight rows drawn Poisson(1) times each holds
        Poisson(``c``) rows of a resample). Exact up to the binning for unit weights.
        """
        src = self._source_rows()
        if src is None or self.n_classes_ != 2 or self._source_row_counts() is not None:
            return
        p, y, w = src
        keep = w > 0
        p, y, w = p[keep], y[keep], w[keep]
        with np.errstate(divide="ignore"):
            s = np.log(p[:, 1]) - np.log(p[:, 0])
        finite = np.isfinite(s)
        res = float(resolution)
        if finite.any():
            lo, hi = float(s[finite].min()), float(s[finite].max())
            while (hi - lo) / res + 1.0 > max_bins:
                res *= 2.0
            b = np.floor((np.where(finite, s, lo) - lo) / res).astype(np.int64) + 1
        else:
            b = np.zeros(s.shape[0], dtype=np.int64)
        b = np.where(finite, b, np.where(s > 0, max_bins + 2, 0))  # scores 0 and 1 apart
        key = b * 2 + y
        uniq, inverse = np.unique(key, return_inverse=True)
        inverse = inverse.ravel()
        m = uniq.shape[0]
        total = np.bincount(inverse, weights=w, minlength=m)
        square = np.bincount(inverse, weights=w * w, minlength=m)
        # the bin's weighted mean log-odds (scores of exactly 0 or 1 keep their own bins)
        mean = np.bincount(inverse, weights=w * np.where(finite, s, 0.0), minlength=m) / total
        edge = uniq // 2
        mean = np.where(edge == 0, -np.inf, np.where(edge == max_bins + 2, np.inf, mean))
        proba = np.column_stack([expit(-mean), expit(mean)])
        self._src = (proba, (uniq % 2).astype(int), total)
        # a labelled count table (_src_cases): a bin holds its total of cases (not Kish's
        # count of its rows); the per-row counts no longer match the bins
        cases = getattr(self, "_src_cases", None)
        self._src_rows = total.copy() if cases is not None else total * total / square
        self._src_cases = None
        self._src_fold = None  # bins mix the folds' rows
        self._boot = None

    def _drop_source_for_analytic(self) -> None:
        """Drop the kept labelled rows of a fit with more than two classes whose interval is
        the analytic one (``method="em"``, ``interval="score"``): it reads only the labelled
        summary ``_labelled_cov``, so the fitted estimator no longer grows with the rows. A
        bootstrap interval asked for later redraws the unlabelled rows only (and says so)."""
        if (self.n_classes_ > 2 and self.method == "em"
                and getattr(self, "interval", "score") == "score"
                and getattr(self, "_labelled_cov", None) is not None):
            self._src = None
            self._src_rows = None
            self._src_fold = None
            self._boot = None

    # -- the pieces the bootstrap re-uses ------------------------------------------------------
    def _bootstrap_parts(self) -> dict:
        """Per-row gradients and Hessians of the calibration loss at the fitted parameters.

        A resample with row weights ``v`` moves the calibration parameters by one Newton step,
        ``-(sum v H)^-1 sum v g`` (the one-step bootstrap: asymptotically equivalent to refitting
        each resample, at the cost of two weighted sums).
        """
        parts = getattr(self, "_boot", None)
        if parts is not None:
            return parts
        sp, sy, sw = self._src
        k = self.n_classes_
        parts = {"y": sy, "w": sw, "onehot": np.eye(k)[sy]}
        cal = self.calibrator_
        if cal is None:
            parts["p"] = sp
        else:
            z = cal.log_scores(sp)
            n_scale = 1 if cal.kind == "temperature" else k
            p = np.exp(_log_softmax(z * cal.scale_ + cal.bias_, axis=1))
            n = z.shape[0]
            jac = _logit_jacobian(z, n_scale)
            resid = p - parts["onehot"]
            parts["grad"] = np.einsum("nkp,nk->np", jac, resid)
            curv = p[:, :, None] * np.eye(k)[None] - p[:, :, None] * p[:, None, :]
            parts["hess"] = np.einsum("nkp,nkl,nlq->npq", jac, curv, jac).reshape(n, -1)
            parts["z"] = z
            parts["p"] = p
            parts["n_scale"] = n_scale
        self._boot = parts
        return parts

    def _calibration_at(self, v: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
        """One-step re-estimate of the calibration's (scale, bias) under labelled weights v."""
        cal = self.calibrator_
        if cal is None:
            return None
        parts = self._bootstrap_parts()
        k, n_scale = self.n_classes_, parts["n_scale"]
        m = n_scale + k - 1
        g = v @ parts["grad"]
        h = (v @ parts["hess"]).reshape(m, m)
        try:
            step = np.linalg.solve(h + 1e-12 * max(float(np.trace(h)), 1.0) * np.eye(m), g)
        except np.linalg.LinAlgError:  # pragma: no cover - h is positive definite here
            step = np.zeros(m)
        theta = np.concatenate([cal.scale_[:n_scale], cal.bias_[1:]]) - step
        scale = np.broadcast_to(np.maximum(theta[:n_scale], 0.0), (k,)).astype(float)
        return scale, np.concatenate([[0.0], theta[n_scale:]])

    def _replicate(
        self,
        z_target: np.ndarray | None,
        p_target: np.ndarray,
        v_source: np.ndarray | None,
        v_target: np.ndarray,
        init: np.ndarray,
    ) -> np.ndarray | None:
        """The (unpenalised) estimate under labelled weights ``v_source`` and target weights.

        Returns None when a class has no labelled weight left (its prior is undefined).
        """
        k = self.n_classes_
        src, hard, soft = self.source_prior_, self.confusion_, self.soft_confusion_
        pt = p_target
        if v_source is not None:
            parts = self._bootstrap_parts()
            counts = v_source @ parts["onehot"]
            if np.any(counts <= 0):
                return None
            src = counts / counts.sum()
            params = self._calibration_at(v_source)
            ps = parts["p"]
            if params is not None:
                scale, bias = params
                pt = _softmax(z_target, scale, bias)
                if self.method != "em":
                    ps = _softmax(parts["z"], scale, bias)
            if self.method != "em":
                vn = v_source / v_source.sum()
                onehot = parts["onehot"]
                hard = (np.eye(k)[np.argmax(ps, axis=1)] * vn[:, None]).T @ onehot
                soft = (ps * vn[:, None]).T @ onehot
        if v_target.sum() <= 0:
            return None
        m = self.method
        if m == "em":
            start = init if np.all(init > 0) else src
            return _solve_prior(pt, v_target, src, start, self.tol, self.max_iter)[0]
        soft_mode = m in ("bbse_soft", "pacc")
        c = soft if soft_mode else hard
        wn = v_target / v_target.sum()
        mu = wn @ (pt if soft_mode else np.eye(k)[np.argmax(pt, axis=1)])
        if m.startswith("bbse"):
            from ._adjust import project_to_simplex

            weights = np.linalg.lstsq(c / c.sum(), mu, rcond=None)[0]
            return project_to_simplex(weights * src)
        col = c.sum(axis=0)
        if np.any(col <= 0):
            return None
        return _simplex_least_squares(c / col, mu)[0]

    def _bootstrap(
        self,
        p_raw: np.ndarray,
        w: np.ndarray,
        centre: np.ndarray,
        rng: np.random.RandomState,
        copies: int = 1,
        cells: np.ndarray | None = None,
        cases: np.ndarray | None = None,
    ) -> tuple[np.ndarray, int]:
        """Bootstrap interval around ``centre`` from ``n_resamples`` Poisson resamples.

        ``cases`` (the whole-number counts of an unlabelled count table, one per row) and the
        labelled table's counts kept by ``fit`` (``_src_cases``): a row standing for ``c``
        cases holds Poisson(``c``) cases of a resample, as ``c`` rows of weight 1 drawn
        Poisson(1) times each would (since 5 December 2026; before, Poisson(1) copies of the row),
        and the jackknife leaves out groups of cases (:meth:`_jackknife`).

        ``cells`` (codes ``0 .. G - 1`` of the unlabelled rows), and the labelled rows' cells
        given to ``fit``: every row of a cell gets its cell's Poisson count, so whole cells
        are drawn (and the jackknife leaves whole cells out).

        ``copies`` > 1: ``p_raw`` and ``w`` hold the unlabelled rows ``copies`` times over, one
        block per fold model of a base model refit on the labelled rows (each block that fold
        model's posteriors, its weights the rows' weights times the fold's share of the
        labelled rows; see :meth:`PriorEstimator.estimate`). A resample draws each unlabelled
        row once and gives every copy of it the same count, and the jackknife leaves a row's
        copies out together, so the resampled unit is still the row.
        """
        k = self.n_classes_
        source = self._source_rows()
        B = int(self.n_resamples)
        n = p_raw.shape[0] // int(copies)
        resample_source = bool(self.resample_source) and source is not None
        ws = source[2] if resample_source else None
        # all resample weights drawn up front, labelled then unlabelled, so a seed fixes both
        gen = np.random.default_rng(rng.randint(2**31 - 1))
        rows = self._source_row_counts() if resample_source else None
        src_cells = getattr(self, "_src_cells", None) if resample_source else None
        src_cases = getattr(self, "_src_cases", None) if resample_source else None
        if rows is None and src_cells is None and src_cases is not None:
            # a labelled count table: a row of c cases holds Poisson(c) cases of a resample
            src_counts = gen.poisson(src_cases, size=(B, ws.shape[0]))
            unit = np.divide(ws, src_cases, out=np.zeros_like(ws), where=src_cases > 0)
        elif rows is None and src_cells is not None:
            # whole labelled cells: one Poisson count per cell, shared by its rows
            src_counts = gen.poisson(1.0, size=(B, int(src_cells.max()) + 1))[:, src_cells]
            unit = ws
        elif rows is None:
            src_counts = gen.poisson(1.0, size=(B, ws.shape[0])) if resample_source else None
            unit = ws
        else:
            # tallied labelled rows: a bin of c rows holds Poisson(c) rows of a resample
            src_counts = gen.poisson(rows, size=(B, ws.shape[0]))
            unit = ws / rows
        if cases is not None and cells is None:
            # an unlabelled count table: Poisson(c) cases of a row of c cases
            tgt_counts = gen.poisson(cases, size=(B, n)) / np.where(cases > 0, cases, 1)
        elif cells is None:
            tgt_counts = gen.poisson(1.0, size=(B, n))
        else:
            tgt_counts = gen.poisson(1.0, size=(B, int(cells.max()) + 1))[:, cells]

        def draw_source(b: int) -> np.ndarray | None:
            return None if src_counts is None else src_counts[b] * unit

        def draw_target(b: int) -> np.ndarray:
            counts = tgt_counts[b] if copies == 1 else np.tile(tgt_counts[b], int(copies))
            return counts * w

        draws, dropped = self.replicate_draws(p_raw, draw_source, draw_target, B, centre)
        jack = None
        if self.interval == "bca" and draws.shape[0] > 0:
            jack = self._jackknife(p_raw, w, centre, ws, rng, copies,
                                   cells=(cells, src_cells),
                                   cases=(None if cells is not None else cases,
                                          None if src_cells is not None or rows is not None
                                          else src_cases))
        bounds = _interval_from_draws(
            centre, draws, jack, self.confidence_level, dropped, B, k,
        )
        # more than two classes: the same replicates at the per-share level that makes the k
        # intervals hold every share at once (read by PriorEstimator.estimate)
        self._last_all_shares = None
        if k > 2:
            from ._analytic import all_shares_level
            from ._interval import bca_interval

            self._last_all_shares = (
                np.column_stack([np.zeros(k), np.ones(k)]) if draws.shape[0] == 0
                else bca_interval(centre, draws, jack or None,
                                  confidence_level=all_shares_level(self.confidence_level, k)))
        return bounds, dropped

    def _jackknife(
        self,
        p_raw: np.ndarray,
        w: np.ndarray,
        centre: np.ndarray,
        ws: np.ndarray | None,
        rng: np.random.RandomState,
        copies: int = 1,
        cells: tuple = (None, None),
        cases: tuple = (None, None),
    ) -> list[np.ndarray]:
        """Leave-one-group-out estimates per sample (target rows; labelled rows when resampled);
        with ``copies`` > 1 (see :meth:`_bootstrap`) a target row's copies share its group, and
        with ``cells`` (target, labelled cell codes or None) a cell's rows share theirs. With
        ``cases`` (target, labelled whole-number counts of a count table, or None) the groups
        are of cases: the cases are dealt to the groups at random (each group gets about its
        share of every row's count; the cases themselves are not expanded), and leaving a group
        out removes its cases from every row."""
        out = []
        samples = [("target", w)] + ([("source", ws)] if ws is not None else [])
        for name, weights in samples:
            times = int(copies) if name == "target" else 1
            n = weights.shape[0] // times
            codes = cells[0] if name == "target" else cells[1]
            counts = cases[0] if name == "target" else cases[1]
            if counts is not None and codes is None:
                total = int(counts.sum())
                groups = min(JACKKNIFE_GROUPS, total)
                if groups < 2:
                    continue
                # the cases dealt at random to groups of (nearly) equal size, as the rows'
                # groups are: each group's cases drawn without replacement from those left
                # (multivariate hypergeometric), per row, never expanding the cases
                gen = np.random.default_rng(rng.randint(2**31 - 1))
                left = counts.astype(np.int64)
                split = np.zeros((groups, n), dtype=np.int64)
                for g in range(groups - 1):
                    size = (total - g + groups - 1) // groups  # cases of group g
                    split[g] = gen.multivariate_hypergeometric(left, size)
                    left = left - split[g]
                split[groups - 1] = left
                per_case = np.divide(weights, np.tile(counts, times).astype(float),
                                     out=np.zeros(weights.shape[0]),
                                     where=np.tile(counts, times) > 0)
                drop = [np.tile(split[g], times) * per_case for g in range(groups)]
            else:
                units = n if codes is None else int(codes.max()) + 1
                groups = min(JACKKNIFE_GROUPS, units)
                if groups < 2:
                    continue
                label = np.empty(units, dtype=int)
                label[rng.permutation(units)] = np.arange(units) % groups
                if codes is not None:
                    label = label[codes]
                if times > 1:
                    label = np.tile(label, times)
                drop = None
            values = []
            for g in range(groups):
                if drop is not None:
                    keep = weights - drop[g]
                else:
                    keep = np.where(label == g, 0.0, weights)
                if name == "target":
                    v_s, v_t = ws, keep
                else:
                    v_s, v_t = keep, w
                draws, _ = self.replicate_draws(
                    p_raw, lambda b, v=v_s: v, lambda b, v=v_t: v, 1, centre
                )
                if draws.shape[0] == 0:
                    break
                values.append(draws[0])
            else:
                out.append(np.asarray(values))
        return out


def _widen(
    bounds: np.ndarray, point: np.ndarray, centre: np.ndarray, n_eff: float, level: float
) -> np.ndarray:
    """Widen a bootstrap interval to contain the point estimate and a Clopper-Pearson floor.

    No estimate from ``n_eff`` unlabelled rows can know a class share better than ``n_eff``
    labelled rows would, so the interval contains the Clopper & Pearson (1934) interval of the
    unpenalised estimate on ``n_eff`` rows. This matters where the bootstrap degenerates: an
    estimate on the edge of the simplex (every resample at 0) would otherwise give [0, 0].
    """
    from ._confusion import binomial_interval

    out = bounds.copy()
    cp = binomial_interval(np.clip(centre, 0.0, 1.0), max(n_eff, 1e-9), level)
    out[:, 0] = np.minimum(np.minimum(out[:, 0], cp[:, 0]), point)
    out[:, 1] = np.maximum(np.maximum(out[:, 1], cp[:, 1]), point)
    return out


def _interval_from_draws(
    centre: np.ndarray,
    draws: np.ndarray,
    jackknife: list | None,
    confidence_level: float,
    dropped: int,
    n_resamples: int,
    k: int,
) -> np.ndarray:
    """BCa (with ``jackknife``) or bias-corrected percentile interval, with dropped-resample warnings."""
    if dropped:
        warnings.warn(
            f"{dropped} of {n_resamples} bootstrap resamples were dropped because a class had "
            "no labelled rows left in them; the interval rests on the other "
            f"{n_resamples - dropped}. Few labelled rows of some class make every estimate "
            "of its prior fragile.",
            UserWarning,
            stacklevel=4,
        )
    if draws.shape[0] == 0:
        warnings.warn(
            "Every bootstrap resample was dropped; the interval is [0, 1] for every class "
            "(nothing is known from the resamples).",
            UserWarning,
            stacklevel=4,
        )
        return np.column_stack([np.zeros(k), np.ones(k)])
    if jackknife is None:
        alpha = (1.0 - confidence_level) / 2.0
        lo, hi = np.quantile(draws, [alpha, 1.0 - alpha], axis=0)
        return np.column_stack([lo, hi])
    return bca_interval(centre, draws, jackknife or None, confidence_level=confidence_level)
