"""Weighted nonlinear least squares of one curve family, one curve or a batch at once.

``Target`` holds the residuals and Jacobian of a family on a data set; ``batch_lm`` takes
projected Levenberg–Marquardt steps on many problems at once (the bootstrap refits, the
several starts of one fit); ``solve_least_squares`` polishes the best start with
``scipy.optimize.least_squares``; ``fit_family`` fits one family and says how well
determined its parameters are.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import least_squares

from curvefit.fitting.data import FitData
from curvefit.fitting.families import Family

# Column-scaled Jacobian condition number above which a fit counts as poorly determined.
MAX_CONDITION = 1e7


@dataclass
class FamilyFit:
    """Fit of one family (internal to the fitting part)."""

    family: Family
    theta: np.ndarray | None
    status: str
    message: str = ""
    forecast_error: float = math.nan
    aicc: float = math.nan
    drift: float = 0.0        # model error per unit of ln n beyond the data, from validation
    eligible: bool = True     # False when the extrapolation is impossible (e.g. below zero)
    tied: bool = False        # forecasts about as well as the chosen family
    lack_of_fit: float = math.nan  # reduced chi-square against the per-size standard errors
    # rolling-origin forecasts: (origin c, forecast − mean at the sizes c.., their
    # estimation variance from the origin's fit), one entry per origin that could be fitted
    origins: list = field(default_factory=list)
    weight: float = 0.0       # share of this family in the averaged forecast


class Target:
    """Residuals r(θ) = √w·(f(n; θ) − z) of one family on one data set.

    ``z`` may be one curve (shape (m,)) or a batch of bootstrap curves (shape (B, m));
    ``theta`` may be one vector (p,) or a batch (B, p).
    """

    def __init__(self, fam: Family, n, z, w, z_train=None, w_train=None):
        self.fam = fam
        self.n = np.asarray(n, dtype=float)
        z = np.asarray(z, dtype=float)
        sw = np.sqrt(np.asarray(w, dtype=float))
        if fam.joint:
            zt = np.asarray(z_train, dtype=float)
            mask = np.all(np.isfinite(np.atleast_2d(zt)), axis=0)
            self.n_train = self.n[mask]
            z = np.concatenate([z, zt[..., mask]], axis=-1)
            sw = np.concatenate([sw, np.sqrt(np.asarray(w_train, dtype=float))[mask]])
        self.z, self.sw = z, sw

    def row(self, b: int) -> "Target":
        """The single-curve problem of row ``b`` of a batched target."""
        one = Target.__new__(Target)
        one.fam, one.n, one.sw, one.z = self.fam, self.n, self.sw, self.z[b]
        if self.fam.joint:
            one.n_train = self.n_train
        return one

    @property
    def size(self) -> int:
        return self.z.shape[-1]

    def model(self, theta):
        theta = np.asarray(theta, dtype=float)
        t = theta.T[:, :, None] if theta.ndim == 2 else theta
        with np.errstate(all="ignore"):
            f = self.fam.func(self.n, t)
            if self.fam.joint:
                f = np.concatenate([f, self.fam.train_func(self.n_train, t)], axis=-1)
        return f

    def _raw_jac(self, theta):
        theta = np.asarray(theta, dtype=float)
        t = theta.T[:, :, None] if theta.ndim == 2 else theta
        with np.errstate(all="ignore"):
            J = self.fam.jac(self.n, t)
            if self.fam.joint:
                Jr = self.fam.train_jac(self.n_train, t)
                if theta.ndim == 2:
                    B = theta.shape[0]
                    J = np.broadcast_to(J, (B,) + J.shape[-2:])
                    Jr = np.broadcast_to(Jr, (B,) + Jr.shape[-2:])
                J = np.concatenate([J, Jr], axis=-2)
        if theta.ndim == 2 and J.ndim == 2:
            J = np.broadcast_to(J, (theta.shape[0],) + J.shape)
        return J

    def residuals(self, theta):
        r = self.sw * (self.model(theta) - self.z)
        return np.where(np.isfinite(r), r, 1e6)

    def jacobian(self, theta):
        J = self.sw[:, None] * self._raw_jac(theta)
        return np.where(np.isfinite(J), J, 0.0)


def batch_lm(tgt: Target, theta0: np.ndarray, lo, hi, iters: int = 40):
    """Projected Levenberg–Marquardt on a batch of problems at once.

    Each row of ``theta0`` (B, p) starts one problem; ``tgt.z`` is one curve shared by
    all rows or one curve per row. Returns (theta, cost, settled) where ``settled``
    marks rows whose last steps no longer reduced the cost.

    References
    ----------
    .. [1] D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
           parameters", J. SIAM 11(2), 1963.
    """
    th = np.array(theta0, dtype=float)
    th = np.clip(th, lo, hi)
    B, p = th.shape

    def cost_of(theta):
        with np.errstate(all="ignore"):
            r = tgt.sw * (tgt.model(theta) - tgt.z)
            c = 0.5 * np.sum(r * r, axis=-1)
        c = np.where(np.isfinite(c), c, np.inf)
        return np.broadcast_to(r, (B, r.shape[-1])), np.broadcast_to(c, (B,)).copy()

    r, cost = cost_of(th)
    lam = np.full(B, 1e-3)
    last_gain = np.full(B, np.inf)
    eye = np.eye(p)
    for _ in range(iters):
        with np.errstate(all="ignore"):
            J = tgt.sw[:, None] * tgt._raw_jac(th)
            J = np.where(np.isfinite(J), J, 0.0)
            rr = np.where(np.isfinite(r), r, 0.0)
            g = np.einsum("bmp,bm->bp", J, rr)
            H = np.einsum("bmp,bmq->bpq", J, J)
            D = np.einsum("bpp->bp", H) + 1e-12
            A = H + (lam[:, None] * D)[:, :, None] * eye
            try:
                step = -np.linalg.solve(A, g[:, :, None])[:, :, 0]
            except np.linalg.LinAlgError:
                step = -np.linalg.lstsq(A[0], g[0], rcond=None)[0][None, :].repeat(B, 0)
        step = np.where(np.isfinite(step), step, 0.0)
        trial = np.clip(th + step, lo, hi)
        r_new, c_new = cost_of(trial)
        better = c_new < cost
        with np.errstate(over="ignore", invalid="ignore"):   # an infinite cost improved on
            gain = np.where(better, (cost - c_new) / np.maximum(cost, 1e-300), 0.0)
        th = np.where(better[:, None], trial, th)
        r = np.where(better[:, None], r_new, r)
        last_gain = np.where(better, gain, np.minimum(last_gain, 1.0) * 0.5)
        cost = np.where(better, c_new, cost)
        lam = np.clip(np.where(better, lam / 3.0, lam * 4.0), 1e-12, 1e12)
    settled = (last_gain < 1e-6) | (lam >= 1e11)
    return th, cost, settled


def solve_least_squares(tgt: Target, starts, lo, hi, max_nfev=100):
    """Best least-squares solution over several starts.

    All starts are first improved together by a few batched Levenberg–Marquardt steps;
    the best is then polished by ``scipy.optimize.least_squares`` (trust-region
    reflective, box bounds, analytic Jacobian). Returns the OptimizeResult or None.
    """
    x0s = []
    for x0 in starts:
        x0 = np.asarray(x0, dtype=float)
        if x0.shape == lo.shape and np.all(np.isfinite(x0)):
            x0s.append(np.clip(x0, lo, hi))
    if not x0s:
        return None
    X0 = np.array(x0s)
    if len(X0) > 1:
        th, cost, _ = batch_lm(tgt, X0, lo, hi, iters=15)
        order = np.argsort(cost)
        candidates = [th[i] for i in order[:2] if np.isfinite(cost[i])] or [X0[0]]
    else:
        candidates = [X0[0]]
    best = None
    for x0 in candidates:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                res = least_squares(tgt.residuals, x0,
                                    jac=tgt.jacobian if tgt.fam.jac is not None else "2-point",
                                    bounds=(lo, hi), method="trf", x_scale="jac",
                                    max_nfev=max_nfev)
        except (ValueError, np.linalg.LinAlgError, FloatingPointError):
            continue
        if not np.all(np.isfinite(res.x)) or not math.isfinite(res.cost):
            continue
        if best is None or res.cost < best.cost:
            best = res
    return best


def fit_family(fam: Family, n, y, w, data: FitData, idx=None, starts_extra=(),
               warm_only: bool = False) -> FamilyFit:
    """Fit one family to sizes ``n`` (a subset ``idx`` of the data, or all).

    ``warm_only`` skips the linearised guesses and starts from ``starts_extra`` alone.
    """
    sel = slice(None) if idx is None else idx
    if fam.baseline:
        return FamilyFit(fam, np.array([float(y[-1])]), "converged")
    p = fam.n_params
    n_res = len(n) * (2 if fam.joint else 1)
    if fam.joint:
        z_train = data.train[sel]
        n_res = len(n) + int(np.isfinite(z_train).sum())
    if n_res < p or len(n) < 2:
        return FamilyFit(fam, None, "failed", f"needs at least {p} fitted points")
    signed = data.sign < 0 or bool(np.nanmin(y) < 0)
    lo, hi = fam.bounds(signed=signed and not fam.joint)
    if fam.joint:
        z_test, wt, wr = data.test[sel], data.w_test[sel], data.w_train[sel]
        tgt = Target(fam, n, z_test, wt / wt.mean(), z_train, wr / np.nanmean(wr))
        try:
            starts = fam.guesses(n, z_test, z_train, wt, wr)
        except Exception:  # a guess that cannot be formed falls back to the generic start
            starts = []
    else:
        z = data.sign * y
        tgt = Target(fam, n, z, w / w.mean())
        try:
            with np.errstate(all="ignore"):
                starts = fam.guesses(n, z, w)
        except Exception:
            starts = []
    starts = list(starts_extra) if warm_only and len(starts_extra) else list(starts) + list(starts_extra)
    if not starts:
        starts = [np.clip(np.ones(p), lo, hi)]
    res = solve_least_squares(tgt, starts, lo, hi)
    if res is None:
        return FamilyFit(fam, None, "failed", "least squares did not converge from any start")
    status, message = "converged", ""
    if not res.success:
        status, message = "poorly determined", "iteration limit reached"
    elif tgt.size <= p:
        status, message = "poorly determined", "no spare points: as many parameters as points"
    else:
        J = tgt.jacobian(res.x)
        norms = np.linalg.norm(J, axis=0)
        if np.any(norms == 0):
            status, message = "poorly determined", "a parameter has no effect on the fit"
        else:
            sv = np.linalg.svd(J / norms, compute_uv=False)
            if sv[-1] <= 0 or sv[0] / sv[-1] > MAX_CONDITION:
                status, message = "poorly determined", "parameters are not separately identifiable"
    return FamilyFit(fam, res.x, status, message)


def natural_gradient(fam: Family, theta, n, on: str, sign: float) -> np.ndarray:
    """(len(n), p) derivative of the natural-scale prediction with respect to θ."""
    n = np.asarray(n, dtype=float)
    theta = np.asarray(theta, dtype=float)
    with np.errstate(all="ignore"):
        if fam.joint:
            if on == "test":
                return fam.jac(n, theta)
            if on == "train":
                return fam.train_jac(n, theta)
            return fam.jac(n, theta) - fam.train_jac(n, theta)
        return sign * fam.jac(n, theta)


def prediction_variance(fam: Family, theta, data: FitData, idx, n_pred) -> np.ndarray:
    """Variance of the fitted prediction at ``n_pred`` from the noise of the fitted means.

    The delta method on the weighted fit to the sizes ``idx``: with J the Jacobian at
    those sizes scaled by 1/σ (σ the floored standard errors, ``fitting.data.noise_scale``)
    and g the gradient at ``n_pred``, the variance is g (JᵀJ)⁺ gᵀ. Zeros when the
    family has no Jacobian or the data no standard errors. A joint family is judged on
    the fitted quantity alone (its other curve would narrow the variance a little).

    References
    ----------
    .. [1] G. A. F. Seber and C. J. Wild, "Nonlinear Regression", Wiley, 1989, ch. 5
           (linearised variance of a least-squares prediction).
    """
    from curvefit.fitting.data import noise_scale

    n_pred = np.asarray(n_pred, dtype=float)
    scale = noise_scale(data.sem)
    if fam.jac is None or fam.baseline or scale is None:
        return np.zeros(len(n_pred))
    idx = np.asarray(idx)
    with np.errstate(all="ignore"):
        J = natural_gradient(fam, theta, data.sizes[idx], data.on, data.sign) / scale[idx, None]
        g = natural_gradient(fam, theta, n_pred, data.on, data.sign)
    if not (np.all(np.isfinite(J)) and np.all(np.isfinite(g))):
        return np.full(len(n_pred), math.nan)
    cov = np.linalg.pinv(J.T @ J, rcond=1e-10)
    return np.maximum(np.einsum("ip,pq,iq->i", g, cov, g), 0.0)


def predict_natural(fam: Family, theta, n, on: str, sign: float):
    """Prediction of a fitted family on the natural scale of the fitted quantity."""
    n = np.asarray(n, dtype=float)
    theta = np.asarray(theta, dtype=float)
    with np.errstate(all="ignore"):
        if fam.joint:
            if on == "test":
                return fam.func(n, theta)
            if on == "train":
                return fam.train_func(n, theta)
            return fam.func(n, theta) - fam.train_func(n, theta)
        return sign * fam.func(n, theta)


def asymptote_function(fam: Family, on: str, sign: float):
    """``theta -> level as n → ∞`` of the fitted quantity, or None without an asymptote."""
    if fam.joint:
        return (lambda t: 0.0) if on == "gap" else fam.asymptote
    if fam.asymptote is None:
        return None
    return lambda t: sign * fam.asymptote(t)


def exponent_function(fam: Family, on: str):
    """``theta -> power-law decay exponent`` of the fitted quantity, or None."""
    if fam.joint:
        if on == "train":
            return fam.extra["train_exponent"]
        if on == "gap":
            return lambda t: float(min(t[2], t[4]))
    return fam.exponent

