"""The per-size means, standard errors and weights a curve fit works on.

A measured ``Curve`` holds one row per (size, repeat) cell; the fit works on one mean
per size of the fitted quantity (test error, train error, or the gap test − train),
with its standard error across repeats and a least-squares weight.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.core.stats import sem

ON_CHOICES = ("test", "train", "gap")
WEIGHT_CHOICES = ("sem", "index", "none")
# A standard error below this fraction of the median one is raised to it, so a size whose
# repeats happen to agree cannot dominate the fit (common practice).
SEM_FLOOR_FRACTION = 0.2


@dataclass
class FitData:
    """The fitted quantity per measured size (internal to the fitting part)."""

    sizes: np.ndarray          # (m,) distinct sizes, ascending
    y: np.ndarray              # (m,) per-size mean of the fitted quantity (natural scale)
    sem: np.ndarray            # (m,) its standard error across repeats (NaN for one repeat)
    w: np.ndarray              # (m,) least-squares weights, mean 1
    test: np.ndarray           # (m,) per-size mean test error
    train: np.ndarray          # (m,) per-size mean train error (NaN where absent)
    w_test: np.ndarray
    w_train: np.ndarray
    cells: list                # per size: (k, 2) array of (test, train) over repeats
    sign: float                # +1, or −1 when fitting the (growing) train error
    on: str
    weights: str

    @property
    def m(self) -> int:
        return len(self.sizes)

    @property
    def n_max(self) -> float:
        return float(self.sizes.max()) if self.m else math.nan

    @property
    def repeats(self) -> np.ndarray:
        """Repeats measured at each size."""
        return np.array([len(c) for c in self.cells], dtype=int)


def prepare_data(curve: Curve, on: str, weights: str) -> FitData:
    """Per-size means, standard errors and weights of the quantity ``on``."""
    ok = curve.ok_points()
    t = ok["test_error"].to_numpy(dtype=float)
    r = ok["train_error"].to_numpy(dtype=float)
    s = ok["size"].to_numpy(dtype=float)
    keep = np.isfinite(t) & np.isfinite(s)
    if on in ("train", "gap"):
        keep &= np.isfinite(r)
    t, r, s = t[keep], r[keep], s[keep]
    if not len(s):
        what = "finite test error" if on == "test" else "finite test and train error"
        raise InputError(f"the curve has no finished cells with a {what}; nothing to fit")
    sizes = np.unique(s)
    cells = [np.column_stack([t[s == v], r[s == v]]) for v in sizes]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        test = np.array([np.mean(c[:, 0]) for c in cells])
        train = np.array([np.nanmean(c[:, 1]) if np.isfinite(c[:, 1]).any() else math.nan
                          for c in cells])
        sem_test = np.array([sem(c[:, 0]) for c in cells])
        sem_train = np.array([sem(c[:, 1]) for c in cells])
        sem_gap = np.array([sem(c[:, 0] - c[:, 1]) for c in cells])
    y, y_sem = {"test": (test, sem_test), "train": (train, sem_train),
                "gap": (test - train, sem_gap)}[on]
    return FitData(sizes=sizes, y=y, sem=y_sem, w=least_squares_weights(sizes, y_sem, weights),
                   test=test, train=train,
                   w_test=least_squares_weights(sizes, sem_test, weights),
                   w_train=least_squares_weights(sizes, sem_train, weights),
                   cells=cells, sign=-1.0 if on == "train" else 1.0, on=on, weights=weights)


def least_squares_weights(sizes: np.ndarray, sems: np.ndarray, kind: str) -> np.ndarray:
    """Least-squares weights normalised to mean 1.

    ``"sem"``: inverse variance of the per-size mean, each standard error raised to at
    least ``SEM_FLOOR_FRACTION`` × the median one (sizes without repeats get the median);
    ``"index"``: proportional to the size's rank, larger sizes weighted more, as in
    Figueroa et al. 2012; ``"none"``: equal.

    Examples
    --------
    >>> least_squares_weights(np.array([10.0, 20.0, 40.0]), np.full(3, np.nan), "index").tolist()
    [0.5, 1.0, 1.5]
    """
    m = len(sizes)
    if kind == "none" or m == 0:
        w = np.ones(m)
    elif kind == "index":
        w = np.arange(1, m + 1, dtype=float)
    else:
        s = noise_scale(sems)
        w = np.ones(m) if s is None else 1.0 / s ** 2
    return w / w.mean() if m else w


def noise_scale(sems: np.ndarray) -> np.ndarray | None:
    """Per-size standard errors for weights and residuals, floored at
    ``SEM_FLOOR_FRACTION`` × the median one (sizes without repeats get the median);
    None when no size has repeats.

    Examples
    --------
    >>> noise_scale(np.array([0.01, np.nan, 0.001])).tolist()
    [0.01, 0.0055, 0.0011]
    """
    good = np.isfinite(sems) & (sems > 0)
    if not good.any():
        return None
    med = float(np.median(sems[good]))
    return np.maximum(np.where(np.isfinite(sems), sems, med), SEM_FLOOR_FRACTION * med)
