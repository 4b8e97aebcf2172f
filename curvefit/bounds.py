"""Worst-case calculators of learning theory and test-set sizing.

Pure numerics (no CLI, no I/O): growth-function bounds, the VC generalization error
bar and the sample size it implies, the realizable-case PAC sample size, and the error
bar of a held-out test set (Hoeffding, exact Clopper–Pearson) with the test-set size
each one needs.

The VC quantities are distribution-free worst cases: they hold for every data
distribution and are typically one to two orders of magnitude larger than what a real
learner needs. Use them as a ceiling, beside a measured learning curve, not as a plan.

Formulas (N samples, VC dimension d, tolerance ε, failure probability δ):

- growth function ``m_H(N) <= sum_{i<=d} C(N, i) <= N**d + 1`` (Sauer 1972);
- VC error bar ``sqrt((8/N) * ln(4 * m_H(2N) / δ))`` (Vapnik & Chervonenkis 1971);
- VC sample size: the smallest N with ``N >= (8/ε²) * ln(4 * m_H(2N) / δ)``;
- test-set error bar ``sqrt(ln(2/δ) / (2L))`` for L held-out points (Hoeffding 1963).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from curvefit.core.errors import InputError
from curvefit.core.stats import binomial_limits, hoeffding_width
from curvefit.core.validate import LARGEST_SIZE, SMALLEST_PROBABILITY, check_count

GROWTH_KINDS = ("polynomial", "sauer")
TEST_METHODS = ("hoeffding", "exact")

# The default start of the fixed-point iteration, a round guess far below typical roots.
DEFAULT_START = 1000.0
# Largest answer (samples) the calculators give; beyond it floats cannot hold the numbers.
LARGEST_ANSWER = 1e300
# Sauer's sum is added term by term up to this many terms; past it the smaller terms are
# bounded by a geometric series (an upper bound, so the growth bound stays a bound).
SAUER_EXACT_TERMS = 20_000
# Cover's count is exact integer arithmetic: refuse work past about this many bit operations.
COVER_WORK_LIMIT = 2e9


# ---------------------------------------------------------------- result objects
@dataclass(frozen=True)
class ConfidenceInterval:
    """An interval for an error rate; ``low``/``high`` are floats or arrays."""

    low: Any
    high: Any

    @property
    def width(self):
        return self.high - self.low

    def to_dict(self) -> dict:
        return {"low": self.low, "high": self.high}

    def __repr__(self) -> str:
        if np.ndim(self.low) == 0:
            return f"ConfidenceInterval(low={float(self.low):.6g}, high={float(self.high):.6g})"
        return f"ConfidenceInterval(low={self.low!r}, high={self.high!r})"


@dataclass(frozen=True)
class VCSampleSize:
    """Worst-case sample size from the VC bound, with the fixed-point iterates.

    ``n_samples`` is the smallest integer satisfying the implicit inequality, ``root``
    the real root found by the bracketing solver, ``iterates`` the fixed-point sequence
    ``N_{k+1} = (8/ε²) ln(4 m_H(2 N_k) / δ)`` from ``start`` (for display; the answer
    does not depend on it; empty unless asked for with ``trace=True``). ``int(r)`` is
    ``r.n_samples``.
    """

    n_samples: int
    root: float
    iterates: tuple = field(default=())
    vc_dim: int = 0
    eps: float = math.nan
    delta: float = math.nan
    growth: str = "polynomial"

    def __int__(self) -> int:
        return self.n_samples

    def to_dict(self) -> dict:
        d = asdict(self)
        d["iterates"] = list(self.iterates)
        return d

    def __repr__(self) -> str:
        return (f"VCSampleSize(n_samples={self.n_samples}, root={self.root:.1f}, "
                f"{len(self.iterates)} iterates, vc_dim={self.vc_dim}, eps={self.eps:g}, "
                f"delta={self.delta:g}, growth={self.growth!r})")


# ---------------------------------------------------------------- validation
def _array(x, name: str) -> np.ndarray:
    if isinstance(x, (str, bytes, bool)):
        raise InputError(f"{name} must be a number, got {x!r}")
    try:
        a = np.asarray(x, dtype=float)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"{name} must be a number, got {x!r}") from None
    if a.size > 10 ** 6 or a.size == 0:
        raise InputError(f"{name} holds {a.size:,} values; give 1 to 1,000,000 per call")
    if not np.all(np.isfinite(a)):
        raise InputError(f"{name} must be finite, got {_show(x)}")
    return a


def _unit_open(x, name: str) -> np.ndarray:
    """Probabilities (ε, δ, p): strictly inside (0, 1), and not below 1e-300 (the range of
    `curvefit.core.validate.check_probability`, here for arrays too)."""
    a = _array(x, name)
    if np.any(a <= 0) or np.any(a >= 1):
        raise InputError(f"{name} must lie strictly between 0 and 1, got {_show(x)}; "
                         f"use e.g. {name}=0.05")
    if np.any(a < SMALLEST_PROBABILITY):
        raise InputError(f"{name} must be at least {SMALLEST_PROBABILITY:g} (smaller values are "
                         f"not representable in the bounds' logarithms), got {_show(x)}")
    return a


def _positive(x, name: str) -> np.ndarray:
    a = _array(x, name)
    if np.any(a <= 0):
        raise InputError(f"{name} must be positive, got {_show(x)}")
    return a


def _count(x, name: str, minimum: int = 0) -> np.ndarray:
    a = _array(x, name)
    if np.any(a != np.round(a)) or np.any(a < minimum):
        what = "a non-negative integer" if minimum == 0 else f"an integer >= {minimum}"
        raise InputError(f"{name} must be {what}, got {_show(x)}")
    if np.any(a > LARGEST_SIZE):
        raise InputError(f"{name} must be at most 2**53 (whole numbers beyond it are not exact "
                         f"as floats), got {_show(x)}")
    return a


def _answer(value: float, what: str) -> int:
    """A sample size as an int, or a one-line refusal when it is beyond the float range."""
    if not math.isfinite(value) or value > LARGEST_ANSWER:
        raise InputError(f"the {what} is beyond {LARGEST_ANSWER:g} samples, outside the range "
                         "this calculator represents; use a larger eps or delta")
    return int(math.ceil(value - 1e-9))


def _broadcast(**arrays: np.ndarray) -> None:
    """Arrays given together must broadcast (same length, or single values)."""
    try:
        np.broadcast_shapes(*(np.shape(a) for a in arrays.values()))
    except ValueError:
        shapes = ", ".join(f"{k} {np.shape(a)}" for k, a in arrays.items())
        raise InputError(f"lists of different lengths cannot be combined ({shapes}); give "
                         "lists of one length, or single values") from None


def _one(a: np.ndarray, name: str) -> float:
    """The single value of a validated input; lists belong to the vectorised functions."""
    if a.ndim != 0:
        raise InputError(f"{name} takes one value here, got {a.size}; call once per value")
    return float(a)


def _show(x) -> str:
    a = np.asarray(x)
    return repr(a.item()) if a.ndim == 0 else repr(a.tolist())


def _kind(kind: str, allowed: tuple, name: str) -> str:
    if kind not in allowed:
        raise InputError(f"{name} must be one of {', '.join(allowed)}, got {kind!r}")
    return kind


def _like(value: np.ndarray, *inputs):
    """Return a float when every input was a scalar, else the array."""
    if all(np.ndim(i) == 0 for i in inputs):
        return float(value)
    return value


# ---------------------------------------------------------------- growth functions
def log_growth_bound(n, vc_dim, kind: str = "polynomial"):
    """Natural log of the growth-function bound ``m_H(n)`` for VC dimension ``vc_dim``.

    ``kind="polynomial"``: ``ln(n**d + 1)``; ``kind="sauer"``: ``ln sum_{i=0}^{d} C(n, i)``
    (equal to ``n ln 2`` when ``d >= n``). Computed in log space, so large ``n`` and ``d``
    do not overflow; ``n`` may be real (binomials via the gamma function).

    Parameters
    ----------
    n : float or array_like
        Number of points, ``n >= 0``.
    vc_dim : int or array_like
        VC dimension ``d >= 0``.
    kind : {"polynomial", "sauer"}

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] N. Sauer, "On the density of families of sets", Journal of Combinatorial
       Theory A 13(1), 1972.
    .. [2] V. Vapnik and A. Chervonenkis, "On the uniform convergence of relative
       frequencies of events to their probabilities", Theory of Probability and its
       Applications 16(2), 1971.

    Examples
    --------
    >>> round(math.exp(log_growth_bound(10, 2, kind="sauer")))
    56
    >>> round(log_growth_bound(1e9, 50), 2)
    1036.16
    """
    _kind(kind, GROWTH_KINDS, "growth")
    n_a = _array(n, "n")
    if np.any(n_a < 0):
        raise InputError(f"n must be >= 0, got {_show(n)}")
    d_a = _count(vc_dim, "vc_dim")
    _broadcast(n=n_a, vc_dim=d_a)
    nb, db = np.broadcast_arrays(n_a, d_a)
    if kind == "polynomial":
        with np.errstate(divide="ignore"):
            # ln(n^d + 1) = logaddexp(d ln n, 0); 0^0 + 1 = 2 by convention of the bound
            log_pow = np.where(db == 0, 0.0, db * np.log(np.where(nb > 0, nb, 1.0)))
            log_pow = np.where((nb == 0) & (db > 0), -np.inf, log_pow)
        out = np.logaddexp(log_pow, 0.0)
    else:
        out = np.array([_log_sauer(float(a), int(b)) for a, b in zip(nb.ravel(), db.ravel())])
        out = out.reshape(nb.shape)
    return _like(out, n, vc_dim)


def _log_binomial(n: float, i: np.ndarray) -> np.ndarray:
    """ln C(n, i) through the beta function (accurate for large n; real n allowed)."""
    from scipy import special  # scipy loads slowly: `curvefit bound` starts without it

    return -math.log1p(n) - special.betaln(n - i + 1.0, i + 1.0)


def _log_sum_exp(values: np.ndarray) -> float:
    top = float(np.max(values))
    return top + math.log(float(np.sum(np.exp(values - top))))


def _log_sauer(n: float, d: int) -> float:
    """ln sum_{i=0}^{min(d, n)} C(n, i) by log-sum-exp of log binomials.

    Up to `SAUER_EXACT_TERMS` terms are summed one by one. With more, only the largest
    terms are (i from ``top - SAUER_EXACT_TERMS + 1`` to ``top``, where they grow with
    i while ``2 top < n``), and the rest is bounded by a geometric series of ratio
    ``r = first / (n - first + 1)``; when ``2 top >= n`` the sum is bounded by ``2^n``.
    Either way the result never falls below the sum, so the growth bound stays a bound,
    and no array longer than `SAUER_EXACT_TERMS` is built (no MemoryError for huge d).
    """
    if n <= d and n == int(n):
        return n * math.log(2.0)  # every subset is realised: 2^n
    top = min(d, int(math.floor(n)))
    if top < SAUER_EXACT_TERMS:
        return _log_sum_exp(_log_binomial(n, np.arange(top + 1, dtype=float)))
    if 2 * top >= n:
        return n * math.log(2.0)  # at least half of all subsets: 2^n is within a factor 2
    first = top - SAUER_EXACT_TERMS + 1
    log_terms = _log_binomial(n, np.arange(first, top + 1, dtype=float))
    ratio = first / (n - first + 1.0)  # C(n, i-1) / C(n, i) <= ratio for every i <= first
    log_rest = float(log_terms[0]) + math.log(ratio) - math.log1p(-ratio)
    return _log_sum_exp(np.append(log_terms, log_rest))


def growth_bound(n, vc_dim, kind: str = "polynomial"):
    """Upper bound on the growth function ``m_H(n)`` of a class with VC dimension ``vc_dim``.

    ``kind="polynomial"``: ``n**d + 1``; ``kind="sauer"``: ``sum_{i=0}^{d} C(n, i)``.
    The value is ``exp(log_growth_bound(...))``, so it is ``inf`` beyond the float range;
    use `log_growth_bound` for large arguments.

    References
    ----------
    .. [1] N. Sauer, "On the density of families of sets", Journal of Combinatorial
       Theory A 13(1), 1972.

    Examples
    --------
    >>> growth_bound(5, 1, kind="sauer"), growth_bound(5, 2, kind="sauer")
    (6.0, 16.0)
    >>> growth_bound(3, 2)
    10.0
    """
    logs = log_growth_bound(n, vc_dim, kind=kind)
    with np.errstate(over="ignore", invalid="ignore"):
        val = np.exp(logs)
        # exp(log) loses the last unit for exact integers; round where the value is exact
        val = np.where(np.asarray(val) < 2.0 ** 52, np.round(val, 6), val)
    return _like(val, n, vc_dim)


def cover_dichotomies(n: int, d: int) -> int:
    """Cover's count of homogeneously linearly separable dichotomies.

    The number of labelings of ``n`` points in general position in ``R^d`` that a
    hyperplane through the origin separates: ``C(n, d) = 2 * sum_{k=0}^{d-1} C(n-1, k)``.
    Exact integer arithmetic. With a bias term, use ``d + 1`` (the points lifted by a
    constant coordinate).

    References
    ----------
    .. [1] T. M. Cover, "Geometrical and statistical properties of systems of linear
       inequalities with applications in pattern recognition", IEEE Transactions on
       Electronic Computers EC-14(3), 1965.

    Examples
    --------
    >>> cover_dichotomies(4, 2), cover_dichotomies(3, 3)
    (8, 8)
    """
    n_i = int(_one(_count(n, "n", minimum=1), "n"))
    d_i = int(_one(_count(d, "d", minimum=1), "d"))
    terms = min(d_i, n_i)  # C(n-1, k) = 0 for k > n-1
    if float(terms) * n_i > COVER_WORK_LIMIT:
        raise InputError(f"the exact count for n={n_i:,}, d={d_i:,} has up to {n_i:,} bits and "
                         f"{terms:,} terms, too large to compute exactly; use "
                         "log_growth_bound(n - 1, d - 1, kind='sauer') + ln 2 (its logarithm)")
    total, term = 0, 1  # term = C(n-1, k), updated exactly: no big binomial from scratch
    for k in range(terms):
        total += term
        term = term * (n_i - 1 - k) // (k + 1)
    return 2 * total


# ---------------------------------------------------------------- VC bound
def vc_error_bar(n, vc_dim, delta, growth: str = "polynomial"):
    """VC generalization error bar ``sqrt((8/N) ln(4 m_H(2N) / δ))``.

    With probability at least ``1 - delta`` over the sample, every hypothesis of a class
    with VC dimension ``vc_dim`` has ``E_out <= E_in + vc_error_bar``. Worst case over
    all distributions; typically far larger than the gap seen in practice.

    Parameters
    ----------
    n : float or array_like
        Training-set size ``N > 0``.
    vc_dim : int or array_like
        VC dimension ``d >= 0``.
    delta : float or array_like
        Failure probability in (0, 1).
    growth : {"polynomial", "sauer"}
        Bound used for ``m_H(2N)``: ``(2N)**d + 1`` or Sauer's sum.

    Returns
    -------
    float or ndarray

    References
    ----------
    .. [1] V. Vapnik and A. Chervonenkis, "On the uniform convergence of relative
       frequencies of events to their probabilities", Theory of Probability and its
       Applications 16(2), 1971.
    .. [2] V. Vapnik, "Statistical Learning Theory", Wiley, 1998.

    Examples
    --------
    >>> round(vc_error_bar(100, 1, 0.1), 3), round(vc_error_bar(1000, 1, 0.1), 3)
    (0.848, 0.301)
    """
    n_a = _positive(n, "n")
    if np.any(n_a > LARGEST_ANSWER):
        raise InputError(f"n must be at most {LARGEST_ANSWER:g} samples, got {_show(n)}")
    delta_a = _unit_open(delta, "delta")
    _broadcast(n=n_a, vc_dim=_count(vc_dim, "vc_dim"), delta=delta_a)
    log_m = np.asarray(log_growth_bound(2.0 * n_a, vc_dim, kind=growth))
    with np.errstate(over="ignore"):  # a bar beyond the float range is inf: vacuous anyway
        out = np.sqrt(8.0 / n_a * (math.log(4.0) + log_m - np.log(delta_a)))
    return _like(out, n, vc_dim, delta)


def _vc_gap(n: float, vc_dim: int, eps: float, delta: float, growth: str) -> float:
    """N - (8/ε²) ln(4 m_H(2N)/δ): negative below the root, positive above."""
    return n - _vc_map(n, vc_dim, eps, delta, growth)


def _vc_map(n: float, vc_dim: int, eps: float, delta: float, growth: str) -> float:
    """The fixed-point map N -> (8/ε²) ln(4 m_H(2N)/δ)."""
    log_m = _log_sauer(2.0 * n, vc_dim) if growth == "sauer" else \
        float(np.logaddexp(vc_dim * math.log(2.0 * n) if vc_dim else 0.0, 0.0))
    return 8.0 / eps / eps * (math.log(4.0) - math.log(delta) + log_m)


def vc_sample_size(vc_dim, eps, delta, growth: str = "polynomial", trace: bool = False,
                   start: float = DEFAULT_START, max_iter: int = 200) -> VCSampleSize:
    """Worst-case training-set size from the VC bound.

    The smallest integer ``N`` with ``N >= (8/ε²) ln(4 m_H(2N) / δ)``, i.e. the size at
    which the VC error bar falls to ``eps`` at confidence ``1 - delta``. The implicit
    inequality is solved with a bracketing root finder (bisection); the
    bracket starts at ``(8/ε²) ln(4/δ)`` (where the right-hand side exceeds ``N``) and
    doubles until the sign changes. The function ``N - rhs(N)`` is negative below its
    single root and positive above it, so the root's ceiling is the answer.

    Parameters
    ----------
    vc_dim : int
        VC dimension ``d >= 0``.
    eps : float
        Tolerance on ``E_out - E_in``, in (0, 1).
    delta : float
        Failure probability, in (0, 1).
    growth : {"polynomial", "sauer"}
        Bound used for ``m_H(2N)``.
    trace : bool
        If True, also record the fixed-point ``iterates`` from ``start`` (stopping when
        a step moves by less than 0.01 or after ``max_iter`` steps).

    Returns
    -------
    VCSampleSize
        ``n_samples`` (the answer; also ``int(result)``), the real ``root`` and, with
        ``trace``, the ``iterates``.

    References
    ----------
    .. [1] V. Vapnik and A. Chervonenkis, "On the uniform convergence of relative
       frequencies of events to their probabilities", Theory of Probability and its
       Applications 16(2), 1971.
    .. [2] R. P. Brent, "Algorithms for Minimization without Derivatives", Prentice-Hall,
       1973 (the root finder).

    Examples
    --------
    >>> vc_sample_size(3, 0.1, 0.1).n_samples
    29300
    >>> r = vc_sample_size(3, 0.1, 0.1, trace=True)
    >>> round(r.root, 1), round(r.iterates[1]), int(r)
    (29299.4, 21193, 29300)
    """
    _kind(growth, GROWTH_KINDS, "growth")
    d = int(_one(_count(vc_dim, "vc_dim"), "vc_dim"))
    e = _one(_unit_open(eps, "eps"), "eps")
    dl = _one(_unit_open(delta, "delta"), "delta")
    start = _one(_positive(start, "start"), "start")
    if start > LARGEST_ANSWER:
        raise InputError(f"start must be at most {LARGEST_ANSWER:g} samples, got {start:g}")

    max_iter = check_count(max_iter, "max_iter", maximum=10_000)

    lo = 8.0 / e / e * (math.log(4.0) - math.log(dl))
    _answer(lo, "VC sample size")  # refuses eps and delta whose answer is beyond the floats
    f_lo = _vc_gap(lo, d, e, dl, growth)
    if f_lo >= 0:  # m_H = 1 (d = 0 with Sauer): the bound is explicit
        root = lo
    else:
        hi = 2.0 * lo
        while _vc_gap(hi, d, e, dl, growth) <= 0:
            lo, hi = hi, 2.0 * hi
            _answer(hi, "VC sample size")
        root = _bisect(_vc_gap, lo, hi, (d, e, dl, growth))
    n = _smallest_whole_root(lambda m: _vc_gap(m, d, e, dl, growth), root)
    iterates = _fixed_point_iterates(start, d, e, dl, growth, max_iter) if trace else ()
    return VCSampleSize(n_samples=n, root=float(root), iterates=iterates, vc_dim=d,
                        eps=e, delta=dl, growth=growth)


def _smallest_whole_root(gap, root: float) -> int:
    """The smallest whole ``n >= 1`` with ``gap(n) >= 0``, searched near the real ``root``.

    The real root is correct to about 1e-14 relative, so the answer is within a few
    units of its ceiling, but not always on it (rounding). Steps that double away from
    the ceiling bracket it, then bisection on whole numbers finds it: about 2 log2(k)
    evaluations for an answer k units off, never a walk of one unit at a time (which
    never ended for answers near 1e16 and beyond, where floats are spaced wider than 1).
    """
    start = max(1, math.ceil(root))
    step, hi = 1, start
    while gap(hi) < 0:  # hi: the answer or above it
        hi, step = start + step, step * 2
    step, lo = 1, hi - 1
    while lo >= 1 and gap(lo) >= 0:  # lo: below the answer (0 never satisfies it)
        hi, lo, step = lo, max(lo - step, 0), step * 2
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if gap(mid) >= 0:
            hi = mid
        else:
            lo = mid
    return hi


def _bisect(f, lo: float, hi: float, args: tuple, rtol: float = 1e-14) -> float:
    """The root of ``f`` in ``[lo, hi]`` with ``f(lo) < 0 <= f(hi)``, by bisection.

    Plain bisection (no scipy: ``curvefit bound`` starts without it) halves the bracket
    until it is below ``rtol`` relative to the root, or floating point cannot halve it
    further; the caller's rounding guard then fixes the whole-number answer.
    """
    for _ in range(2000):
        mid = 0.5 * (lo + hi)
        if not lo < mid < hi or hi - lo <= rtol * max(abs(mid), 1.0):
            break
        if f(mid, *args) < 0:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _fixed_point_iterates(start: float, d: int, e: float, dl: float, growth: str,
                          max_iter: int) -> tuple:
    """``N_{k+1} = (8/ε²) ln(4 m_H(2 N_k)/δ)`` from ``start`` until a step moves < 0.01."""
    iterates = [start]
    for _ in range(max_iter):
        nxt = _vc_map(iterates[-1], d, e, dl, growth)
        iterates.append(nxt)
        if abs(nxt - iterates[-2]) < 0.01:
            break
    return tuple(iterates)


def pac_sample_size(vc_dim, eps, delta) -> int:
    """Realizable-case PAC sample size (consistent learner, zero training error).

    ``m >= max((4/ε) log₂(2/δ), (8d/ε) log₂(13/ε))`` samples suffice for a learner that
    fits the sample exactly to have true error at most ``eps`` with probability at least
    ``1 - delta``. Applies only when the target is in the class (realizable case).

    References
    ----------
    .. [1] A. Blumer, A. Ehrenfeucht, D. Haussler and M. K. Warmuth, "Learnability and
       the Vapnik–Chervonenkis dimension", Journal of the ACM 36(4), 1989.

    Examples
    --------
    >>> pac_sample_size(3, 0.1, 0.1)
    1686
    """
    d = int(_one(_count(vc_dim, "vc_dim"), "vc_dim"))
    e = _one(_unit_open(eps, "eps"), "eps")
    dl = _one(_unit_open(delta, "delta"), "delta")
    m = max(4.0 / e * (1.0 - math.log2(dl)), 8.0 * d / e * (math.log2(13.0) - math.log2(e)))
    return _answer(m, "PAC sample size")


def rule_of_thumb_samples(vc_dim, factor: float = 10) -> int:
    """The practitioner's rule ``N ≈ factor × d_vc`` (common practice, no single source).

    About ten samples per unit of VC dimension are often enough in practice; the
    worst-case `vc_sample_size` is typically one to two orders of magnitude larger.

    References
    ----------
    .. [1] Common practice (no single published source); see e.g. Y. S. Abu-Mostafa,
       M. Magdon-Ismail and H.-T. Lin, "Learning From Data", AMLBook, 2012 (from memory).

    Examples
    --------
    >>> rule_of_thumb_samples(3)
    30
    """
    d = int(_one(_count(vc_dim, "vc_dim"), "vc_dim"))
    f = _one(_positive(factor, "factor"), "factor")
    return _answer(f * d, "rule-of-thumb size")


# ---------------------------------------------------------------- test sets
def hoeffding_half_width(n_test, delta):
    """Two-sided Hoeffding half-width ``sqrt(ln(2/δ) / (2L))`` for ``L`` test points.

    References
    ----------
    .. [1] W. Hoeffding, "Probability inequalities for sums of bounded random
       variables", Journal of the American Statistical Association 58(301), 1963.

    Examples
    --------
    >>> round(hoeffding_half_width(1000, 0.05), 5)
    0.04295

    A half-width of 1 or more (fewer than ``ln(2/δ)/2`` test points) is vacuous: an
    error rate lies in [0, 1] anyway. It is returned as computed (`test_sample_size`
    inverts it); the command line marks it vacuous.
    """
    n_a = _count(n_test, "n_test", minimum=1)
    d_a = _unit_open(delta, "delta")
    _broadcast(n_test=n_a, delta=d_a)
    return _like(hoeffding_width(n_a, d_a), n_test, delta)


def clopper_pearson(errors, n_test, delta=0.05) -> ConfidenceInterval:
    """Exact (Clopper–Pearson) two-sided interval for an error rate from ``errors`` of ``n_test``.

    ``low = B^{-1}(δ/2; k, n-k+1)`` (0 when k = 0), ``high = B^{-1}(1-δ/2; k+1, n-k)``
    (1 when k = n), with ``B^{-1}`` the inverse regularised incomplete beta function.
    ``errors`` may be non-integer (an expected count); arrays broadcast.

    References
    ----------
    .. [1] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
       illustrated in the case of the binomial", Biometrika 26(4), 1934.

    Examples
    --------
    >>> ci = clopper_pearson(0, 100, 0.05)
    >>> ci.low, round(ci.high, 4)
    (0.0, 0.0362)
    """
    n_a = _count(n_test, "n_test", minimum=1)
    k_a = _array(errors, "errors")
    d_a = _unit_open(delta, "delta")
    _broadcast(errors=k_a, n_test=n_a, delta=d_a)
    if np.any(k_a < 0) or np.any(k_a > n_a):
        raise InputError(f"errors must lie between 0 and n_test, got errors={_show(errors)} "
                         f"for n_test={_show(n_test)}")
    low, high = binomial_limits(k_a, n_a, d_a)
    return ConfidenceInterval(low=_like(low, errors, n_test, delta),
                              high=_like(high, errors, n_test, delta))


def test_error_bar(n_test, delta=0.05, method: str = "hoeffding", errors=None):
    """Error bar of a test-error estimate from ``n_test`` held-out points.

    ``method="hoeffding"``: the distribution-free two-sided half-width
    ``sqrt(ln(2/δ) / (2 L))`` (a float, or an array for array input).
    ``method="exact"``: the Clopper–Pearson interval from ``errors`` mistakes out of
    ``n_test`` as a `ConfidenceInterval` (low, high); tighter when the error is small.

    Both hold for one hypothesis fixed before the test set is seen.

    References
    ----------
    .. [1] W. Hoeffding, "Probability inequalities for sums of bounded random
       variables", Journal of the American Statistical Association 58(301), 1963.
    .. [2] C. J. Clopper and E. S. Pearson, "The use of confidence or fiducial limits
       illustrated in the case of the binomial", Biometrika 26(4), 1934.

    Examples
    --------
    >>> round(test_error_bar(1000, 0.05), 5)
    0.04295
    >>> test_error_bar(1000, 0.05, method="exact", errors=20)
    ConfidenceInterval(low=0.0122583, high=0.03072)
    """
    _kind(method, TEST_METHODS, "method")
    if method == "hoeffding":
        return hoeffding_half_width(n_test, delta)
    if errors is None:
        raise InputError("the exact interval needs the error count: pass errors=K "
                         "(mistakes on the test set)")
    _count(n_test, "n_test", minimum=1)
    _count(errors, "errors")
    return clopper_pearson(errors, n_test, delta)


def _exact_half_width(n: float, p: float, delta: float) -> float:
    """Largest distance from p to the ends of the exact interval at the expected count p·n."""
    ci = clopper_pearson(p * n, n, delta)
    return max(p - ci.low, ci.high - p)


def test_sample_size(eps, delta=0.05, method: str = "hoeffding", p=None) -> int:
    """Test points needed for an error bar of half-width ``eps`` at confidence ``1 - delta``.

    ``method="hoeffding"``: ``L = ceil(ln(2/δ) / (2 ε²))``, valid for any error rate.
    ``method="exact"``: the smallest ``L`` at which the Clopper–Pearson interval around
    the expected error count ``p·L`` reaches no further than ``eps`` from ``p`` on either
    side (search on ``L``: doubling, then bisection); ``p=None`` uses 0.5, where the
    interval is widest. Much smaller than Hoeffding when ``p`` is small.

    References
    ----------
    .. [1] W. Hoeffding, JASA 58(301), 1963 (as in `test_error_bar`).
    .. [2] C. J. Clopper and E. S. Pearson, Biometrika 26(4), 1934 (as in `test_error_bar`).

    Examples
    --------
    >>> test_sample_size(0.05, 0.05)
    738
    >>> test_sample_size(0.01, 0.05, method="exact", p=0.02) < test_sample_size(0.01, 0.05)
    True
    """
    _kind(method, TEST_METHODS, "method")
    e = _one(_unit_open(eps, "eps"), "eps")
    dl = _one(_unit_open(delta, "delta"), "delta")
    if method == "hoeffding":
        return _answer((math.log(2.0) - math.log(dl)) / (2.0 * e) / e, "test-set size")
    p_val = 0.5 if p is None else _one(_array(p, "expected error"), "expected error")
    if not 0.0 <= p_val <= 1.0:
        raise InputError(f"expected error must lie between 0 and 1, got {p!r}")

    def ok(n: int) -> bool:
        return _exact_half_width(float(n), p_val, dl) <= e

    lo, hi = 0, 1  # invariant: ok(hi) once found, not ok(lo) (L = 0 never suffices)
    while not ok(hi):
        lo, hi = hi, hi * 2
        if hi > 2 ** 60:
            raise InputError(f"no test-set size reaches eps={e} at delta={dl}")
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi


def relative_error_test_size(p, rel_error=0.2, delta=0.05) -> int:
    """Test points for a relative error bar: ``|measured - true| <= rel_error · true``.

    Normal approximation to the binomial: ``L = z² (1 - p) / (β² p)`` with
    ``z = Φ^{-1}(1 - δ/2)`` and ``β = rel_error``. For small ``p`` at 95% confidence and
    ``β = 0.2`` this is the rule ``L ≈ 100 / p`` (about 100 errors in the test set).

    References
    ----------
    .. [1] I. Guyon, J. Makhoul, R. Schwartz and V. Vapnik, "What size test set gives
       good error rate estimates?", IEEE Transactions on Pattern Analysis and Machine
       Intelligence 20(1), 1998 (the formula's exact form from memory).

    Examples
    --------
    >>> relative_error_test_size(0.01)
    9508
    """
    p_val = _one(_unit_open(p, "expected error"), "expected error")
    b = _one(_positive(rel_error, "relative error"), "relative error")
    dl = _one(_unit_open(delta, "delta"), "delta")
    from scipy import special

    z = float(special.ndtri(1.0 - dl / 2.0))
    return _answer(z * z * (1.0 - p_val) / b / b / p_val, "test-set size")


# The contract names start with "test_"; tell pytest they are not tests when imported.
test_error_bar.__test__ = False
test_sample_size.__test__ = False
