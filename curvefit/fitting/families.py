"""Parametric learning-curve families: formula, parameters, bounds, Jacobian, first guesses.

Every family is a small declarative :class:`Family` written for an error that falls
with the number of labelled samples ``n``. The fitting engine (``curvefit.fitting.engine``)
only uses the attributes defined here, so adding a family is a call to
:func:`register` in this file and nothing else::

    register(Family(
        name="power-law", formula="a·n^(−b)", params=("a", "b"),
        func=lambda n, t: t[0] * np.exp(-t[1] * np.log(n)),
        jac=..., lower=(0, 0), upper=(inf, 10), guesses=_power_law_guess,
        asymptote=lambda t: 0.0, exponent=lambda t: t[1]))

This module is pure numerics: it imports neither the command line nor any I/O.

References
----------
.. [1] T. Viering and M. Loog, "The Shape of Learning Curves: A Review", IEEE TPAMI
       45(6), 2023 (the family catalogue power-law … weibull, last-value).
.. [2] T. Domhan, J. T. Springenberg and F. Hutter, "Speeding up automatic
       hyperparameter optimization of deep neural networks by extrapolation of
       learning curves", IJCAI 2015 (vapor-pressure, morgan-mercer-flodin, weibull,
       shifted-power-law, inverse-log, log-decline).
.. [3] J. Hestness et al., "Deep Learning Scaling is Predictable, Empirically",
       arXiv:1712.00409, 2017 (power law with a floor, power-law-floor).
.. [4] C. Cortes, L. D. Jackel, S. A. Solla, V. Vapnik and J. S. Denker, "Learning
       curves: asymptotic values and rate of convergence", NIPS 6, 1994 (joint-train-test).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from curvefit.core.legacy import LEGACY_NAMES, current_name, rename_legacy  # noqa: F401

INF = math.inf
# Exponents above this are treated as a fit gone astray (a step, not a learning curve).
MAX_EXPONENT = 10.0
_TINY = 1e-12


@dataclass(frozen=True)
class Family:
    """One parametric learning-curve family.

    Attributes
    ----------
    name : str
        Short name used on the command line (``power-law-floor``).
    formula : str
        The formula in plain text, for tables and reports.
    params : tuple of str
        Parameter names, in the order ``func`` expects them.
    func : callable ``(n, theta) -> ndarray``
        The (test) curve. ``n`` is a float array of sample sizes.
    jac : callable ``(n, theta) -> ndarray (len(n), n_params)`` or None
        Analytic Jacobian of ``func``; None means finite differences.
    lower, upper : tuple of float
        Box bounds of the parameters.
    guesses : callable
        ``(n, y, w) -> list of theta`` first guesses from linearised fits
        (``(n, y_test, y_train, w_test, w_train)`` for joint families).
    levels : tuple of str
        Parameters measured in error units (an asymptote, a start value). Their lower
        bound of 0 is dropped when the fitted quantity can be negative.
    asymptote : callable ``theta -> float`` or None
        The error as ``n -> inf`` where the family has one.
    exponent : callable ``theta -> float`` or None
        The power-law decay exponent where the family has one.
    baseline : bool
        True for ``last-value``: not fitted by least squares, never chosen while a real
        family converges.
    train_func, train_jac : callable or None
        For a joint family, the train curve and its Jacobian (same ``theta``).
    reference : str
        Published source of the formula.
    approach : str
        How the curve nears its asymptote: ``"power"`` (algebraically or faster, so
        the asymptote is a practical floor) or ``"logarithmic"`` (like 1/ln n, so the
        asymptote is reached only as ln n → ∞ and is far from any practical size).
    """

    name: str
    formula: str
    params: tuple
    func: Callable
    jac: Callable | None
    lower: tuple
    upper: tuple
    guesses: Callable
    levels: tuple = ()
    asymptote: Callable | None = None
    exponent: Callable | None = None
    baseline: bool = False
    train_func: Callable | None = None
    train_jac: Callable | None = None
    reference: str = ""
    extra: dict = field(default_factory=dict)
    approach: str = "power"

    @property
    def n_params(self) -> int:
        return len(self.params)

    @property
    def joint(self) -> bool:
        """True when the family is fitted to train and test curves at once."""
        return self.train_func is not None

    def bounds(self, signed: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper bounds; ``signed`` frees level parameters to go below 0."""
        lo = np.array(self.lower, dtype=float)
        hi = np.array(self.upper, dtype=float)
        if signed:
            for name in self.levels:
                lo[self.params.index(name)] = -INF
        return lo, hi

    def __call__(self, n, theta) -> np.ndarray:
        return self.func(np.asarray(n, dtype=float), np.asarray(theta, dtype=float))

    def __repr__(self) -> str:
        return f"Family({self.name}: {self.formula})"


FAMILIES: dict[str, Family] = {}


def register(family: Family) -> Family:
    """Add a family to the catalogue (replacing one of the same name)."""
    if len(family.lower) != family.n_params or len(family.upper) != family.n_params:
        raise ValueError(f"family {family.name}: bounds must have one entry per parameter")
    FAMILIES[family.name] = family
    return family


def get_family(name: str) -> Family:
    """Look up a family by name (``KeyError`` lists the known names)."""
    try:
        return FAMILIES[name]
    except KeyError:
        raise KeyError(f"unknown curve family {name!r}; known: {', '.join(FAMILIES)}") from None


def family_names() -> list[str]:
    """Names of all registered families, in catalogue order."""
    return list(FAMILIES)


# --------------------------------------------------------------------- helpers
def _ln(n):
    return np.log(np.maximum(n, 1.0))


def _npow(n, e):
    """n ** (-e) computed through logs, safe for large n and exponents."""
    return np.exp(np.clip(-e * _ln(n), -700.0, 700.0))


def stack_columns(columns) -> np.ndarray:
    """Jacobian columns stacked on the last axis, broadcasting scalars and batches.

    With one parameter vector the result is (len(n), p); with parameters of shape
    (p, B, 1), as the batched bootstrap passes them, it is (B, len(n), p).
    """
    return np.stack(np.broadcast_arrays(*columns), axis=-1)


def _linfit(columns: Sequence[np.ndarray], z: np.ndarray, w: np.ndarray | None = None):
    """Weighted linear least squares of z on the given columns; None if it fails."""
    X = np.column_stack(columns)
    ok = np.all(np.isfinite(X), axis=1) & np.isfinite(z)
    if ok.sum() < X.shape[1]:
        return None
    sw = np.sqrt(w[ok]) if w is not None else np.ones(ok.sum())
    try:
        coef, *_ = np.linalg.lstsq(X[ok] * sw[:, None], z[ok] * sw, rcond=None)
    except np.linalg.LinAlgError:
        return None
    return coef if np.all(np.isfinite(coef)) else None


def _floor_candidates(y: np.ndarray) -> list[float]:
    """Trial asymptotes below the smallest value, for linearising c + g(n)."""
    lo, hi = float(np.min(y)), float(np.max(y))
    span = max(hi - lo, abs(lo) * 1e-3, _TINY)
    cands = [lo - 0.5 * span, lo - 0.1 * span, lo - 0.02 * span]
    if lo > 0:
        cands += [0.0, 0.5 * lo]
    return sorted({c for c in cands if c < lo})


def _power_guesses(n, y, w):
    """(a, b, c) for c + a·n^(−b) from log–log fits at several trial floors."""
    out = []
    L = _ln(n)
    for c in _floor_candidates(y):
        z = np.log(np.maximum(y - c, _TINY))
        coef = _linfit([np.ones_like(L), L], z, w)
        if coef is None:
            continue
        b = float(np.clip(-coef[1], 0.01, MAX_EXPONENT))
        out.append(np.array([math.exp(min(coef[0], 700.0)), b, c]))
    if not out:
        out.append(np.array([max(float(np.ptp(y)), _TINY) * float(np.min(n)) ** 0.5, 0.5,
                             float(np.min(y))]))
    return out


# --------------------------------------------------------------------- last-value
def _last_value(n, t):
    return t[0] + 0.0 * np.asarray(n, dtype=float)


register(Family(
    name="last-value", formula="the last observed value", params=("value",),
    func=_last_value, jac=lambda n, t: stack_columns([np.ones_like(_last_value(n, t))]),
    lower=(-INF,), upper=(INF,), guesses=lambda n, y, w: [np.array([y[-1]])],
    asymptote=lambda t: float(t[0]), baseline=True,
    reference="Viering & Loog 2023 (baseline)"))


# --------------------------------------------------------------------- power-law
def _power_law(n, t):
    return t[0] * _npow(n, t[1])


def _power_law_jac(n, t):
    e = _npow(n, t[1])
    return stack_columns([e, -t[0] * _ln(n) * e])


def _power_law_guess(n, y, w):
    L = _ln(n)
    coef = _linfit([np.ones_like(L), L], np.log(np.maximum(y, _TINY)), w)
    if coef is None:
        return [np.array([max(float(np.max(y)), _TINY), 0.3])]
    return [np.array([math.exp(min(coef[0], 700.0)), float(np.clip(-coef[1], 0.0, MAX_EXPONENT))])]


register(Family(
    name="power-law", formula="a·n^(−b)", params=("a", "b"),
    func=_power_law, jac=_power_law_jac, lower=(0.0, 0.0), upper=(INF, MAX_EXPONENT),
    guesses=_power_law_guess, asymptote=lambda t: 0.0, exponent=lambda t: float(t[1]),
    reference="Viering & Loog 2023"))


# --------------------------------------------------------------------- power-law-floor
def _power_law_floor(n, t):
    return t[2] + t[0] * _npow(n, t[1])


def _power_law_floor_jac(n, t):
    e = _npow(n, t[1])
    return stack_columns([e, -t[0] * _ln(n) * e, np.ones_like(e)])


register(Family(
    name="power-law-floor", formula="c + a·n^(−b)", params=("a", "b", "c"),
    func=_power_law_floor, jac=_power_law_floor_jac, lower=(0.0, 0.0, 0.0), upper=(INF, MAX_EXPONENT, INF),
    guesses=_power_guesses, levels=("c",),
    asymptote=lambda t: float(t[2]), exponent=lambda t: float(t[1]),
    reference="Hestness et al. 2017; Viering & Loog 2023"))


# --------------------------------------------------------------------- shifted-power-law
def _shifted_power_law(n, t):
    a, b, alpha, c = t
    u = np.maximum(a * n + b, 1e-300)
    return c + np.exp(np.clip(-alpha * np.log(u), -700.0, 700.0))


def _shifted_power_law_jac(n, t):
    a, b, alpha, c = t
    u = np.maximum(a * n + b, 1e-300)
    g = np.exp(np.clip(-alpha * np.log(u), -700.0, 700.0))
    return stack_columns([-alpha * n * g / u, -alpha * g / u, -np.log(u) * g, np.ones_like(g)])


def _shifted_power_law_guess(n, y, w):
    out = []
    for A, B, C in _power_guesses(n, y, w):
        # (a·n)^(−α) = A·n^(−B)  ⇒  α = B, a = A^(−1/B)
        alpha = max(B, 0.05)
        a = math.exp(-math.log(max(A, _TINY)) / alpha)
        out.append(np.array([a, 0.0, alpha, C]))
        out.append(np.array([a, 0.1 * a * float(np.min(n)), alpha, C]))
    return out


register(Family(
    name="shifted-power-law", formula="c + (a·n + b)^(−α)", params=("a", "b", "alpha", "c"),
    func=_shifted_power_law, jac=_shifted_power_law_jac, lower=(1e-300, 0.0, 0.0, 0.0),
    upper=(INF, INF, MAX_EXPONENT, INF), guesses=_shifted_power_law_guess, levels=("c",),
    asymptote=lambda t: float(t[3]), exponent=lambda t: float(t[2]),
    reference="Viering & Loog 2023; Domhan et al. 2015"))


# --------------------------------------------------------------------- exponential-floor
def _exponential_floor(n, t):
    return t[2] + t[0] * np.exp(np.clip(-t[1] * n, -700.0, 700.0))


def _exponential_floor_jac(n, t):
    e = np.exp(np.clip(-t[1] * n, -700.0, 700.0))
    return stack_columns([e, -t[0] * n * e, np.ones_like(e)])


def _exponential_floor_guess(n, y, w):
    out = []
    for c in _floor_candidates(y):
        coef = _linfit([np.ones_like(n), n], np.log(np.maximum(y - c, _TINY)), w)
        if coef is not None:
            out.append(np.array([math.exp(min(coef[0], 700.0)), max(-coef[1], 1e-12), c]))
    out.append(np.array([max(float(np.ptp(y)), _TINY) * math.e, 1.0 / float(np.median(n)),
                         float(np.min(y))]))
    return out


register(Family(
    name="exponential-floor", formula="c + a·e^(−b·n)", params=("a", "b", "c"),
    func=_exponential_floor, jac=_exponential_floor_jac, lower=(0.0, 0.0, 0.0), upper=(INF, INF, INF),
    guesses=_exponential_floor_guess, levels=("c",), asymptote=lambda t: float(t[2]),
    reference="Viering & Loog 2023"))


# --------------------------------------------------------------------- log-decline
def _log_decline(n, t):
    return t[1] - t[0] * _ln(n)


def _log_decline_jac(n, t):
    L = _ln(n)
    return stack_columns([-L, np.ones_like(L)])


def _log_decline_guess(n, y, w):
    L = _ln(n)
    coef = _linfit([np.ones_like(L), L], y, w)
    if coef is None:
        return [np.array([0.0, float(np.mean(y))])]
    return [np.array([max(-coef[1], 0.0), coef[0]])]


register(Family(
    name="log-decline", formula="c − a·ln n", params=("a", "c"),
    func=_log_decline, jac=_log_decline_jac, lower=(0.0, -INF), upper=(INF, INF),
    guesses=_log_decline_guess, reference="Viering & Loog 2023; Domhan et al. 2015"))


# --------------------------------------------------------------------- inverse-log
def _inv_ln(n):
    # ln 1 = 0 would divide by zero; sizes of one sample are treated as ln 2
    return 1.0 / np.log(np.maximum(n, 2.0))


def _inverse_log(n, t):
    return t[1] + t[0] * _inv_ln(n)


def _inverse_log_jac(n, t):
    q = _inv_ln(n)
    return stack_columns([q, np.ones_like(q)])


def _inverse_log_guess(n, y, w):
    q = _inv_ln(n)
    coef = _linfit([np.ones_like(q), q], y, w)
    if coef is None:
        return [np.array([0.0, float(np.mean(y))])]
    return [np.array([max(coef[1], 0.0), coef[0]])]


register(Family(
    name="inverse-log", formula="c + a/ln n", params=("a", "c"),
    func=_inverse_log, jac=_inverse_log_jac, lower=(0.0, 0.0), upper=(INF, INF),
    guesses=_inverse_log_guess, levels=("c",), asymptote=lambda t: float(t[1]),
    reference="Viering & Loog 2023; Domhan et al. 2015",
    # a/ln n halves only when n is squared: c is a limit, not a level reached in practice
    approach="logarithmic"))


# --------------------------------------------------------------------- vapor-pressure
def _vapor_pressure(n, t):
    return np.exp(np.clip(t[0] + t[1] / n + t[2] * _ln(n), -700.0, 700.0))


def _vapor_pressure_jac(n, t):
    f = _vapor_pressure(n, t)
    return stack_columns([f, f / n, f * _ln(n)])


def _vapor_pressure_guess(n, y, w):
    L = _ln(n)
    coef = _linfit([np.ones_like(L), 1.0 / n, L], np.log(np.maximum(y, _TINY)), w)
    if coef is None:
        return [np.array([math.log(max(float(np.mean(y)), _TINY)), 0.0, -0.3])]
    return [np.asarray(coef, dtype=float)]


def _vapor_pressure_asymptote(t):
    if t[2] < 0:
        return 0.0
    return math.exp(t[0]) if t[2] == 0 else INF


register(Family(
    name="vapor-pressure", formula="exp(a + b/n + c·ln n)", params=("a", "b", "c"),
    func=_vapor_pressure, jac=_vapor_pressure_jac,
    lower=(-INF, -INF, -MAX_EXPONENT), upper=(INF, INF, MAX_EXPONENT),
    guesses=_vapor_pressure_guess, asymptote=_vapor_pressure_asymptote, exponent=lambda t: float(-t[2]),
    reference="Domhan et al. 2015; Viering & Loog 2023"))


# --------------------------------------------------------------------- morgan-mercer-flodin
def _mmf(n, t):
    a, b, c, d = t
    p = np.exp(np.clip(d * _ln(n), -700.0, 700.0))
    return (a * b + c * p) / (b + p)


def _mmf_jac(n, t):
    a, b, c, d = t
    L = _ln(n)
    p = np.exp(np.clip(d * L, -700.0, 700.0))
    D = b + p
    f = (a * b + c * p) / D
    return stack_columns([b / D, (a - f) / D, p / D, p * L * (c - f) / D])


def _mmf_guess(n, y, w):
    out = []
    top = float(np.max(y))
    for A, B, C in _power_guesses(n, y, w)[:3]:
        a = C + 1.5 * max(top - C, _TINY)
        # far from the start, (y − c) ≈ b·(a − c)·n^(−d), matching the power law A·n^(−B)
        b = max(A / (a - C), _TINY)
        out.append(np.array([a, b, C, max(B, 0.05)]))
    return out


register(Family(
    name="morgan-mercer-flodin", formula="(a·b + c·n^d)/(b + n^d)", params=("a", "b", "c", "d"),
    func=_mmf, jac=_mmf_jac, lower=(0.0, 1e-300, 0.0, 0.0),
    upper=(INF, INF, INF, MAX_EXPONENT), guesses=_mmf_guess, levels=("a", "c"),
    asymptote=lambda t: float(t[2]), exponent=lambda t: float(t[3]),
    reference="Domhan et al. 2015; Viering & Loog 2023"))


# --------------------------------------------------------------------- weibull
def _weibull(n, t):
    a, b, c, d = t
    p = np.exp(np.clip(d * _ln(n), -700.0, 700.0))
    return c - b * np.exp(np.clip(-a * p, -700.0, 700.0))


def _weibull_jac(n, t):
    a, b, c, d = t
    L = _ln(n)
    p = np.exp(np.clip(d * L, -700.0, 700.0))
    q = np.exp(np.clip(-a * p, -700.0, 700.0))
    return stack_columns([b * p * q, -q, np.ones_like(q), b * q * a * p * L])


def _weibull_guess(n, y, w):
    out = []
    L = _ln(n)
    for c in _floor_candidates(y)[:3]:
        B = 1.5 * max(float(np.max(y)) - c, _TINY)
        # c + B·e^(−a·n^d) = y  ⇒  ln(−ln((y − c)/B)) = ln a + d·ln n
        r = np.clip((y - c) / B, 1e-12, 1 - 1e-12)
        coef = _linfit([np.ones_like(L), L], np.log(-np.log(r)), w)
        if coef is None:
            continue
        d = float(np.clip(coef[1], 0.05, 5.0))
        out.append(np.array([math.exp(float(np.clip(coef[0], -700, 700))), -B, c, d]))
    if not out:
        out.append(np.array([1.0 / float(np.median(n)), -float(np.ptp(y)) - _TINY,
                             float(np.min(y)), 1.0]))
    return out


register(Family(
    name="weibull", formula="c − b·e^(−a·n^d)", params=("a", "b", "c", "d"),
    func=_weibull, jac=_weibull_jac, lower=(0.0, -INF, 0.0, 0.0), upper=(INF, INF, INF, 5.0),
    guesses=_weibull_guess, levels=("c",), asymptote=lambda t: float(t[2]),
    reference="Domhan et al. 2015; Viering & Loog 2023"))


# --------------------------------------------------------------------- joint-train-test
def _joint_test(n, t):
    a, b, alpha, c, beta = t
    return a + b * _npow(n, alpha)


def _joint_train(n, t):
    a, b, alpha, c, beta = t
    return a - c * _npow(n, beta)


def _joint_test_jac(n, t):
    a, b, alpha, c, beta = t
    e = _npow(n, alpha)
    z = np.zeros_like(e)
    return stack_columns([np.ones_like(e), e, -b * _ln(n) * e, z, z])


def _joint_train_jac(n, t):
    a, b, alpha, c, beta = t
    e = _npow(n, beta)
    z = np.zeros_like(e)
    return stack_columns([np.ones_like(e), z, z, -e, c * _ln(n) * e])


def _joint_guess(n, y_test, y_train, w_test=None, w_train=None):
    L = _ln(n)
    ok = np.isfinite(y_train)
    out = []
    last_mid = float(np.nanmean((y_test + y_train)[ok][-2:]) / 2) if ok.any() else float(y_test[-1])
    for a in {last_mid, float(np.min(y_test)) - 0.1 * float(np.ptp(y_test)),
              0.5 * (last_mid + float(np.min(y_test)))}:
        up = _linfit([np.ones_like(L), L], np.log(np.maximum(y_test - a, _TINY)), w_test)
        dn = _linfit([np.ones_like(L[ok]), L[ok]], np.log(np.maximum(a - y_train[ok], _TINY)),
                     None if w_train is None else w_train[ok])
        b, alpha = (math.exp(min(up[0], 700.0)), float(np.clip(-up[1], 0.01, MAX_EXPONENT))) \
            if up is not None else (1.0, 0.5)
        c, beta = (math.exp(min(dn[0], 700.0)), float(np.clip(-dn[1], 0.01, MAX_EXPONENT))) \
            if dn is not None else (1.0, 0.5)
        out.append(np.array([a, b, alpha, c, beta]))
    return out


register(Family(
    name="joint-train-test", formula="test = a + b·n^(−α), train = a − c·n^(−β)",
    params=("a", "b", "alpha", "c", "beta"),
    func=_joint_test, jac=_joint_test_jac, train_func=_joint_train, train_jac=_joint_train_jac,
    lower=(0.0, 0.0, 0.0, 0.0, 0.0), upper=(INF, INF, MAX_EXPONENT, INF, MAX_EXPONENT),
    guesses=_joint_guess, levels=("a",), asymptote=lambda t: float(t[0]),
    exponent=lambda t: float(t[2]), extra={"train_exponent": lambda t: float(t[4])},
    reference="Cortes, Jackel, Solla, Vapnik & Denker 1994"))
