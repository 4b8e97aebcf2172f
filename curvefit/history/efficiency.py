"""Data-efficiency of a run against its baseline, read from the two measured curves.

No curve is fitted here: the figures compare the per-size means of the measured test
error, so they do not change when another family would be chosen.

``efficiency_ratio``
    For each baseline size ``n``, the labels the current model needs to reach the
    baseline's mean error at ``n`` (the current means interpolated linearly in ``ln n``),
    divided by ``n``; the figure is the geometric mean of these ratios over the sizes.
    ``2.0`` reads "needs twice the labels". Answers outside the current curve's
    measured range are clipped to its ends, which pulls the ratio towards 1 (a
    conservative screen).
``error_area``
    The mean of the per-size differences ``current − baseline`` of the mean test error,
    averaged over ``ln n`` (the area between the curves in ``ln n`` divided by the width
    of the common range). It uses every common size's test sets, not only the largest.

Each has an interval from a parametric bootstrap of the mean curves. A repeat keeps its
test set over all sizes (nested subsamples), so its errors move together across sizes;
the mean curve is therefore drawn as a whole, from a multivariate Student-t with the
repeats' covariance and ``R − 1`` degrees of freedom (``R`` repeats), so few repeats
widen the interval as they should. No size's standard error is taken below the binomial
noise of its pooled test rows (0-1 error). A curve without repeat numbers is drawn size
by size. When both runs split the same data the same way (same seed, data and split, as
two nightly runs of one job file), the comparison is *paired*: repeat ``r`` of both runs
gets the same draw, so what their shared test rows did to both cancels.
The per-size table also carries a one-sided Welch test per size with Holm's
correction over the sizes (information: the gate reads the two figures above).

A run regressed on one of these figures when its interval lies wholly on the worse
side of "no change" (1 for the ratio, 0 for the area) **and** the estimate is worse by
more than the tolerance. Like every figure here, this is a statistical screen, not a
guarantee.

This module is pure: it reads curves and returns figures; it performs no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from curvefit.core.defaults import INTERVAL, SEED
from curvefit.core.errors import InputError
from curvefit.core.validate import check_count, check_level
from curvefit.measuring.data import is_legacy_fingerprint, same_fingerprint

# Replicates of the parametric bootstrap (cheap: a few sizes per replicate).
EFFICIENCY_BOOTSTRAP = 2000
# The null value of each comparative figure ("no change").
NULL_VALUE = {"efficiency_ratio": 1.0, "error_area": 0.0}
# Degrees of freedom of a standard error that is known rather than estimated (≈ normal).
KNOWN_DOF = 1e6


@dataclass(frozen=True)
class SizeRow:
    """One baseline size: means, standard errors, the labels the current model needs,
    and the per-size test (Holm-adjusted one-sided p value)."""

    size: int
    baseline_mean: float
    baseline_sem: float
    current_mean: float
    current_sem: float
    labels_needed: float
    ratio: float
    p_holm: float

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class Efficiency:
    """The two comparative figures with their intervals, and the per-size table."""

    ratio: float
    ratio_low: float
    ratio_high: float
    area: float
    area_low: float
    area_high: float
    level: float
    sizes: list[SizeRow] = field(default_factory=list)
    clipped: int = 0
    paired: bool = False
    # baseline sizes whose error the current curve never reached within its sizes
    never_reached: int = 0
    # baseline sizes whose error the current curve beat already at its smallest size
    beaten_at_start: int = 0

    @property
    def lower_bound(self) -> bool:
        """True when the current run never reached any of the baseline's errors: the
        ratio is then only a lower bound (every answer was clipped at the largest size)."""
        return bool(self.sizes) and self.never_reached == len(self.sizes)

    @property
    def upper_bound(self) -> bool:
        """True when the current run beat every baseline error at its smallest size: the
        ratio is then only an upper bound."""
        return bool(self.sizes) and self.beaten_at_start == len(self.sizes)

    @property
    def holm_worse(self) -> list[int]:
        """Sizes where the current run is worse at the family-wise level (Holm)."""
        alpha = (1 - self.level) / 2
        return [r.size for r in self.sizes if r.p_holm < alpha]

    def to_dict(self) -> dict:
        d = {k: v for k, v in self.__dict__.items() if k != "sizes"}
        d["sizes"] = [r.to_dict() for r in self.sizes]
        d["holm_worse"] = self.holm_worse
        return d


@dataclass(frozen=True)
class _Means:
    sizes: np.ndarray
    mean: np.ndarray
    sem: np.ndarray
    dof: np.ndarray
    # repeats × sizes deviations from the per-size means (0 where a cell is missing),
    # the repeat numbers of its rows, and per size the standard error missing from the
    # repeats' spread to reach the binomial floor (known noise: drawn normal, independent)
    deviations: np.ndarray | None = None
    repeats: np.ndarray | None = None
    floor_excess: np.ndarray | None = None


def size_means(curve) -> _Means:
    """Per-size mean test error, its standard error (floored at the pooled binomial
    noise of the test rows for 0-1 error) and degrees of freedom, from a `Curve`.

    Examples
    --------
    >>> import pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> c = Curve.from_table(pd.DataFrame({"size": [10, 10, 20, 20],
    ...                                    "test_error": [0.3, 0.5, 0.2, 0.2]}))
    >>> m = size_means(c)
    >>> m.mean.tolist(), round(float(m.sem[0]), 3)
    ([0.4, 0.2], 0.1)
    """
    ok = curve.ok_points()
    ok = ok[np.isfinite(ok["test_error"].astype(float))]
    sizes, means, sems, dofs = [], [], [], []
    binary = str(getattr(curve, "metric", "error")) in ("error", "zero_one", "0-1")
    for n, g in ok.groupby("size"):
        e = g["test_error"].to_numpy(float)
        r = len(e)
        m = float(e.mean())
        s = float(e.std(ddof=1) / math.sqrt(r)) if r > 1 else math.nan
        rows = float(g["n_test"].sum()) if "n_test" in g and g["n_test"].notna().all() else math.nan
        dof = float(max(r - 1, 1))
        if binary and math.isfinite(rows) and rows > 0 and 0 <= m <= 1:
            floor = math.sqrt(max(m * (1 - m), 1.0 / rows) / rows)
            if not math.isfinite(s) or floor >= s:
                # the binomial noise is known, not estimated from the repeats: normal draws
                s, dof = floor, KNOWN_DOF
        sizes.append(float(n))
        means.append(m)
        sems.append(s)
        dofs.append(dof)
    m = _Means(np.array(sizes), np.array(means), np.array(sems), np.array(dofs, float))
    return _Means(m.sizes, m.mean, m.sem, m.dof, *_deviations(ok, m))


def _deviations(ok, m: _Means) -> tuple:
    """Each repeat's curve minus the mean curve: the repeats keep their test set across
    sizes (nested subsamples), so their errors move together over sizes, and the draws
    must keep that."""
    if "repeat" not in ok or len(m.sizes) == 0:
        return None, None, None
    table = ok.pivot_table(index="repeat", columns="size", values="test_error", aggfunc="mean")
    table = table.reindex(columns=m.sizes)
    r = len(table)
    if r < 2:
        return None, None, None
    dev = np.nan_to_num(table.to_numpy(float) - m.mean[None, :], nan=0.0)
    spread = np.sqrt((dev ** 2).sum(axis=0) / (r - 1) / r)
    excess = np.sqrt(np.maximum(np.nan_to_num(m.sem) ** 2 - spread ** 2, 0.0))
    return dev, table.index.to_numpy(), excess


def same_splits(current, baseline) -> bool:
    """True when both runs split the same data the same way (same seed, data and split):
    repeat ``r`` of one then saw the test rows of repeat ``r`` of the other, and the
    comparison can be paired by repeat, which cancels the test-set noise.

    Examples
    --------
    >>> from types import SimpleNamespace as NS
    >>> a = NS(meta={"seed": 0, "data": {"fingerprint": "x"}, "split": "random"})
    >>> same_splits(a, a), same_splits(a, NS(meta={**a.meta, "seed": 1}))
    (True, False)
    """
    keys, datas = [], []
    for c in (current, baseline):
        meta = getattr(c, "meta", {}) or {}
        data = meta.get("data") if isinstance(meta.get("data"), dict) else {}
        datas.append(data)
        keys.append((meta.get("seed"), str(meta.get("split")), meta.get("test_size"),
                     meta.get("repeats")))
    fps = [d.get("fingerprint") for d in datas]
    legacy = datas[1 if is_legacy_fingerprint(fps[0]) else 0].get("legacy_fingerprint")
    return (keys[0] == keys[1] and keys[0][0] is not None
            and same_fingerprint(fps[0], fps[1], legacy=legacy))


def decreasing_fit(values: np.ndarray) -> np.ndarray:
    """The non-increasing sequence closest to ``values`` in least squares (pool adjacent
    violators). Unlike a running minimum, one low value does not pull down all later ones.

    Examples
    --------
    >>> decreasing_fit(np.array([0.3, 0.2, 0.25, 0.1])).round(3).tolist()
    [0.3, 0.225, 0.225, 0.1]
    """
    blocks: list[list[float]] = []  # [sum, count]
    for v in np.asarray(values, float):
        blocks.append([v, 1.0])
        while len(blocks) > 1 and blocks[-2][0] / blocks[-2][1] < blocks[-1][0] / blocks[-1][1]:
            total, count = blocks.pop()
            blocks[-1][0] += total
            blocks[-1][1] += count
    return np.concatenate([np.full(int(c), t / c) for t, c in blocks])


def labels_to_reach(sizes: np.ndarray, means: np.ndarray, error: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Labels at which a measured curve first reaches each ``error``, interpolating in ``ln n``.

    The curve is made non-increasing first (the closest non-increasing sequence in least
    squares: pooled adjacent violators), so the answer is defined; answers beyond the
    measured range are clipped to its ends (second array: True where clipped).

    Examples
    --------
    >>> import numpy as np
    >>> n, _ = labels_to_reach(np.array([100., 400.]), np.array([0.3, 0.2]), np.array([0.25]))
    >>> round(float(n[0]))
    200
    """
    env = decreasing_fit(means)
    logn = np.log(sizes)
    err = np.atleast_1d(np.asarray(error, float))
    out = np.empty_like(err)
    clipped = np.zeros(err.shape, bool)
    for i, e in enumerate(err):
        if e >= env[0]:
            out[i], clipped[i] = logn[0], e > env[0]
            continue
        if e < env[-1]:
            out[i], clipped[i] = logn[-1], True
            continue
        j = int(np.argmax(env <= e))  # first size at or below e; j >= 1
        e0, e1 = env[j - 1], env[j]
        t = 1.0 if e0 == e1 else (e0 - e) / (e0 - e1)
        out[i] = logn[j - 1] + t * (logn[j] - logn[j - 1])
    return np.exp(out), clipped


def _figures(base_sizes, base_means, cur_sizes, cur_means, common, lw):
    """The ratio (geometric mean) and the area for one set of means (rows = replicates)."""
    ratios, areas = [], []
    for bm, cm in zip(np.atleast_2d(base_means), np.atleast_2d(cur_means)):
        need, _ = labels_to_reach(cur_sizes, cm, bm)
        ratios.append(float(np.exp(np.mean(np.log(need / base_sizes)))))
        bi = np.searchsorted(base_sizes, common)
        ci = np.searchsorted(cur_sizes, common)
        d = cm[ci] - bm[bi]
        areas.append(float(np.sum(lw * d)) if len(common) > 1 else float(d.mean()))
    return np.array(ratios), np.array(areas)


def _trapezoid_weights(common: np.ndarray) -> np.ndarray:
    """Weights of the trapezoid rule in ``ln n``, normalised to sum to one."""
    if len(common) < 2:
        return np.ones(len(common))
    x = np.log(common)
    w = np.zeros(len(x))
    w[:-1] += np.diff(x) / 2
    w[1:] += np.diff(x) / 2
    return w / w.sum()


def _holm(p: np.ndarray) -> np.ndarray:
    """Holm's step-down adjusted p values."""
    order = np.argsort(p)
    m = len(p)
    adj = np.empty(m)
    running = 0.0
    for k, i in enumerate(order):
        running = max(running, min(1.0, (m - k) * p[i]))
        adj[i] = running
    return adj


def compare_curves(current, baseline, *, interval: float = INTERVAL,
                   bootstrap: int = EFFICIENCY_BOOTSTRAP, random_state: int = SEED,
                   paired: bool | None = None) -> Efficiency:
    """The efficiency figures of ``current`` against ``baseline`` (two `Curve` objects).

    Parameters
    ----------
    current, baseline : Curve
        Measured curves (test error per size and repeat; ``n_test`` when known).
    interval : float
        Level of the intervals.
    bootstrap : int
        Parametric bootstrap replicates.
    random_state : int
        Seed: same seed, same numbers.
    paired : bool, optional
        Pair the runs repeat by repeat (default: when `same_splits` says they split the
        same data the same way, as two nightly runs with the job's fixed seed do).

    Returns
    -------
    Efficiency

    Raises
    ------
    InputError
        A curve has fewer than two measured sizes or a size with neither repeats nor a
        test-set size (no interval), or the two share no size.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> n = np.repeat([100, 200, 400, 800], 4)
    >>> jitter = np.tile([-0.004, -0.001, 0.001, 0.004], 4)
    >>> base = Curve.from_table(pd.DataFrame({"size": n, "test_error": 0.1 + 2 / np.sqrt(n) + jitter}))
    >>> worse = Curve.from_table(pd.DataFrame({"size": n, "test_error": 0.1 + 2 / np.sqrt(n / 2) + jitter}))
    >>> eff = compare_curves(worse, base)
    >>> round(eff.ratio, 2), eff.ratio_low > 1   # 2 at three sizes, clipped to 1 at the last
    (1.68, True)
    """
    level = check_level(interval)
    bootstrap = check_count(bootstrap, "bootstrap", minimum=10)
    b, c = size_means(baseline), size_means(current)
    for name, m in (("current", c), ("baseline", b)):
        if len(m.sizes) < 2:
            raise InputError(f"the {name} run has fewer than two measured sizes; the "
                             "efficiency figures need a curve")
        if not np.isfinite(m.sem).all():
            raise InputError(f"the {name} run has a size with one repeat and no test-set size; "
                             "the efficiency figures need repeats (or n_test) for an interval")
    common = np.intersect1d(b.sizes, c.sizes)
    if len(common) == 0:
        raise InputError("the run and its baseline share no measured size; measure the same "
                         "sizes to compare the curves")
    lw = _trapezoid_weights(common)
    ratio, area = _figures(b.sizes, b.mean, c.sizes, c.mean, common, lw)
    need, clipped = labels_to_reach(c.sizes, c.mean, b.mean)
    env = decreasing_fit(c.mean)
    never = int(np.sum(clipped & (b.mean < env[-1])))
    beaten = int(np.sum(clipped & (b.mean > env[0])))
    rng = np.random.default_rng(random_state)

    pair = _paired_repeats(current, baseline, b, c) if paired is None or paired else None
    if paired and pair is None:
        raise InputError("the two runs cannot be paired by repeat (different seed, data or "
                         "split); compare them unpaired")
    if pair is not None:
        # one draw per repeat, shared by both runs: what the same split did to both cancels
        bi, ci = pair
        g = rng.standard_normal((bootstrap, len(bi)))
        t = _t_scale(rng, len(bi), bootstrap)
        draws = [m.mean + (g @ m.deviations[rows]) / math.sqrt((len(bi) - 1) * len(bi)) * t
                 for m, rows in ((b, bi), (c, ci))]
    else:
        draws = [_draw(m, rng, bootstrap) for m in (b, c)]
    rb, ra = _figures(b.sizes, draws[0], c.sizes, draws[1], common, lw)
    q = [(1 - level) / 2, (1 + level) / 2]
    r_lo, r_hi = np.quantile(rb, q)
    a_lo, a_hi = np.quantile(ra, q)
    rows = _size_rows(b, c, need)
    return Efficiency(float(ratio[0]), float(r_lo), float(r_hi), float(area[0]), float(a_lo),
                      float(a_hi), level, rows, int(clipped.sum()), pair is not None, never,
                      beaten)


def _t_scale(rng, r: int, n: int) -> np.ndarray:
    """Per replicate, the factor that turns a normal draw into a Student-t on r − 1 dof."""
    return np.sqrt((r - 1) / rng.chisquare(r - 1, size=n))[:, None]


def _draw(m: _Means, rng, bootstrap: int) -> np.ndarray:
    """Mean curves of one run: a multivariate Student-t with the repeats' covariance of
    the mean curve (rank R − 1), plus independent normal noise up to the binomial floor;
    size by size without repeat numbers."""
    if m.deviations is None:
        s = np.nan_to_num(m.sem, nan=0.0)
        return m.mean + s * rng.standard_t(m.dof, size=(bootstrap, len(m.sizes)))
    r = m.deviations.shape[0]
    g = rng.standard_normal((bootstrap, r))
    known = m.floor_excess * rng.standard_normal((bootstrap, len(m.sizes)))
    return m.mean + (g @ m.deviations) / math.sqrt((r - 1) * r) * _t_scale(rng, r, bootstrap) + known


def _paired_repeats(current, baseline, b: _Means, c: _Means):
    """Row indices of the repeats both runs share, when they split alike; else None."""
    if b.deviations is None or c.deviations is None or not same_splits(current, baseline):
        return None
    common = np.intersect1d(b.repeats, c.repeats)
    if len(common) < 2 or len(common) != len(b.repeats) or len(common) != len(c.repeats):
        return None
    return np.searchsorted(b.repeats, common), np.searchsorted(c.repeats, common)


def _size_rows(b: _Means, c: _Means, need: np.ndarray) -> list[SizeRow]:
    from scipy import stats

    p = np.ones(len(b.sizes))
    for i, n in enumerate(b.sizes):
        j = np.searchsorted(c.sizes, n)
        if j < len(c.sizes) and c.sizes[j] == n:
            se = math.hypot(_z(b.sem[i]), _z(c.sem[j]))
            if se > 0:
                dof = b.dof[i] + c.dof[j]
                p[i] = float(stats.t.sf((c.mean[j] - b.mean[i]) / se, dof))
    adj = _holm(p)
    rows = []
    for i, n in enumerate(b.sizes):
        j = np.searchsorted(c.sizes, n)
        same = j < len(c.sizes) and c.sizes[j] == n
        rows.append(SizeRow(int(n), float(b.mean[i]), float(b.sem[i]),
                            float(c.mean[j]) if same else math.nan,
                            float(c.sem[j]) if same else math.nan,
                            float(need[i]), float(need[i] / n), float(adj[i])))
    return rows


def _z(v: float) -> float:
    return 0.0 if not math.isfinite(v) else float(v)
