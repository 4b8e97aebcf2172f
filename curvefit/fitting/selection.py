"""Choosing a family: the family list, forecast validation, lack of fit, AICc, the ranking.

The family is chosen by forecast validation: rolling origins over the largest sizes, each
family fitted to the sizes before the origin and scored by its mean absolute forecast
error. Families that miss the measured points by many standard errors are marked "poor
fit" and passed over; families that extrapolate where an error cannot go are not chosen;
among near-ties the simple power laws come first, then the lower AICc.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from curvefit.core.errors import InputError
from curvefit.core.formatting import format_number
from curvefit.fitting.data import FitData, noise_scale
from curvefit.fitting.families import FAMILIES, LEGACY_NAMES, current_name
from curvefit.fitting.least_squares import FamilyFit, fit_family, predict_natural, prediction_variance

# Lack of fit: a family whose reduced chi-square against the per-size standard errors
# exceeds both this floor and LACK_OF_FIT_RATIO × the best family's does not describe the
# measured points and is not chosen while another family does (common practice: a
# reduced chi-square far above 1 rejects the model; the ratio allows for standard errors
# that are themselves rough with 2–5 repeats).
LACK_OF_FIT_FLOOR = 4.0
LACK_OF_FIT_RATIO = 4.0
# With fewer points than this before the first held-out size, forecast validation cannot
# compare 3- and 4-parameter families, and the 3-parameter power law is the strong default
# (Viering & Loog 2023).
MIN_VALIDATION_POINTS = 4
DEFAULT_PREFERENCE = ("power-law-floor", "power-law", "joint-train-test")
# Relative margin of forecast error within which families count as tied (tuned on the
# bundled-dataset extrapolation benchmark, scripts/bench_extrapolation.py).
NEAR_TIE = 0.5
# Families with a smaller share of the averaged forecast are left out of it.
MIN_WEIGHT = 0.02


def family_list(families, has_train: bool) -> list[str]:
    """The family names to fit: ``"auto"``, a comma-separated string or a list; the
    ``last-value`` baseline is always added. Unknown or renamed names are an InputError."""
    if families is None or (isinstance(families, str) and families.strip().lower() == "auto"):
        names = [n for n, f in FAMILIES.items() if has_train or not f.joint]
    else:
        if isinstance(families, str):
            names = [s.strip() for s in families.split(",") if s.strip()]
        else:
            names = [str(s).strip() for s in families]
        if not names:
            raise InputError("empty family list; give names like power-law-floor,exponential-floor or 'auto'")
        renamed = [n for n in names if n in LEGACY_NAMES]
        if renamed:
            raise InputError("; ".join(f"family {n!r} is now called {LEGACY_NAMES[n]!r}"
                                       for n in renamed)
                             + f"; use --families {','.join(current_name(n) for n in names)}")
        unknown = [n for n in names if n not in FAMILIES]
        if unknown:
            raise InputError(f"unknown curve famil{'y' if len(unknown) == 1 else 'ies'} "
                             f"{', '.join(unknown)}; known: {', '.join(FAMILIES)}")
        for n in names:
            if FAMILIES[n].joint and not has_train:
                raise InputError(f"family {n} fits train and test error together, but the "
                                 "curve has no train_error; leave it out")
    if "last-value" not in names:
        names.append("last-value")
    return list(dict.fromkeys(names))


def fit_families(names, data: FitData) -> dict[str, FamilyFit]:
    """Full fits of the named families; a family that breaks is reported, never fatal."""
    fits: dict[str, FamilyFit] = {}
    for name in names:
        fam = FAMILIES[name]
        try:
            fits[name] = fit_family(fam, data.sizes, data.y, data.w, data)
        except Exception as exc:  # noqa: BLE001 - one broken family leaves the others
            fits[name] = FamilyFit(fam, None, "failed", f"{type(exc).__name__}: {exc}")
    return fits


def score_families(fits: dict[str, FamilyFit], data: FitData, n_holdout: int,
                   drift_from: int):
    """AICc, forecast validation on the ``n_holdout`` largest sizes, plausibility and
    lack of fit of every family, recorded on the fits. Returns what
    :func:`mark_lack_of_fit` returns."""
    m, on = data.m, data.on
    for ff in fits.values():
        if ff.theta is not None:
            pred = predict_natural(ff.family, ff.theta, data.sizes, on, data.sign)
            rss = float(np.sum(data.w * (pred - data.y) ** 2))
            ff.aicc = aicc(rss, m, ff.family.n_params + 1) if np.isfinite(rss) else math.nan
        if n_holdout and ff.status != "failed":
            forecast(ff, data, on, range(m - n_holdout, m), drift_from=drift_from)
    for ff in fits.values():
        if not plausible(ff, data, on):
            ff.eligible = False
            ff.message = ((ff.message + "; " if ff.message else "")
                          + "not chosen: extrapolates below zero or above the measured range")
    return mark_lack_of_fit(fits, data, on)


def aicc(rss: float, m: int, k: int) -> float:
    """Small-sample corrected AIC of a least-squares fit with k parameters (incl. σ²).

    References
    ----------
    .. [1] C. M. Hurvich and C.-L. Tsai, "Regression and time series model selection
           in small samples", Biometrika 76(2), 1989.
    """
    if m - k - 1 <= 0:
        return math.inf
    return m * math.log(max(rss / m, 1e-300)) + 2 * k + 2 * k * (k + 1) / (m - k - 1)


def holdout_count(m: int) -> int:
    """Largest sizes held out for forecast validation: a quarter, at least one, and at
    least three while ``MIN_VALIDATION_POINTS`` sizes stay before the first of them.

    With 7 or 8 sizes a quarter is 2 origins, the last scored on a single size: too few
    to rank 11 families on, so 3 are held out (common practice: more validation origins
    give a steadier forecast score; measured on scripts/bench_extrapolation.py, where the
    choices did not change with 5 repeats and the error fell slightly with 3).
    """
    if m < 3:
        return 0
    return max(1, math.ceil(m / 4), min(3, m - MIN_VALIDATION_POINTS))


def forecast(ff: FamilyFit, data: FitData, on: str, origins, drift_from: int = 0) -> None:
    """Rolling-origin forecast validation of one family.

    For each origin c, the family is fitted to the c smallest sizes and forecasts the
    rest; the forecast error is the mean absolute error, averaged over origins. The first
    origin starts from the linearised guesses only and each later origin from the fit of
    the one before it, so no origin starts from a fit that has seen the sizes it
    forecasts. The squared errors in excess of the held-out means' own noise and of the
    origin fit's estimation variance (the bootstrap covers that part in the bands), per
    unit of squared log-distance from the origin, give ``drift``: the model error that
    later widens intervals beyond the measured sizes. It is one pooled moment estimate,
    Σ(e² − noise² − estimation variance) / Σ distance², truncated at 0 once: for a family
    that describes the curve the excesses scatter around 0, and flooring each at 0 before
    averaging (as before) kept only their positive half, which the division by short
    distances then magnified (3–4× the actual error of a true power law beyond 2×).
    Only origins ``c >= drift_from`` feed ``drift``: an origin fitted on a few sizes
    forecasts worse than the full fit will, so using it would overstate the full fit's
    model error. Each origin's signed errors are kept in ``ff.origins`` for the weights of
    the averaged forecast.

    References
    ----------
    .. [1] R. DerSimonian and N. Laird, "Meta-analysis in clinical trials", Controlled
           Clinical Trials 7(3), 1986 (a variance component estimated by moments from
           the pooled excess over the known sampling variances, truncated at 0 once).
    """
    errs, excess, spans = [], [], []
    warm: list = []
    ff.origins = []
    for c in origins:
        idx = np.arange(c)
        try:
            sub = fit_family(ff.family, data.sizes[idx], data.y[idx], data.w[idx], data, idx,
                              starts_extra=warm, warm_only=bool(warm))
        except Exception:  # one origin that cannot be fitted leaves the others
            continue
        if sub.theta is None:
            continue
        warm = [sub.theta]
        fc = predict_natural(ff.family, sub.theta, data.sizes[c:], on, data.sign)
        signed = fc - data.y[c:]
        if not np.all(np.isfinite(signed)):
            continue
        e = np.abs(signed)
        est = np.nan_to_num(prediction_variance(ff.family, sub.theta, data, idx, data.sizes[c:]))
        ff.origins.append((c, signed, est))
        errs.append(float(np.mean(e)))
        dist = np.log(data.sizes[c:] / data.sizes[c - 1])
        noise = np.nan_to_num(data.sem[c:], nan=0.0)
        if c >= drift_from:
            excess.extend(e ** 2 - noise ** 2 - est)
            spans.extend(dist ** 2)
    if errs:
        ff.forecast_error = float(np.mean(errs))
        ff.drift = math.sqrt(max(float(np.sum(excess)) / float(np.sum(spans)), 0.0)) if spans else 0.0


def mark_lack_of_fit(fits: dict, data: FitData, on: str):
    """Mark families that miss the measured points by many standard errors as "poor fit".

    Each fitted family gets its reduced chi-square χ²/(m − p) with the per-size standard
    errors of the means. A converged family whose value exceeds both
    ``LACK_OF_FIT_FLOOR`` and ``LACK_OF_FIT_RATIO`` × the smallest value among the
    fitted families gets status "poor fit", so the choice passes it over while another
    family describes the points. Returns (best value, limit), or None without repeats
    (no noise scale to judge against).

    References
    ----------
    .. [1] P. R. Bevington and D. K. Robinson, "Data Reduction and Error Analysis for
           the Physical Sciences", 3rd ed., McGraw-Hill, 2003, ch. 11 (reduced
           chi-square as a test of a fitted model against the measurement errors).
    """
    scale = noise_scale(data.sem)
    if scale is None:
        return None
    for ff in fits.values():
        # the joint family's test (or train) curve uses 3 of its 5 parameters
        p = 3 if ff.family.joint and on != "gap" else ff.family.n_params
        if ff.theta is None or ff.family.baseline or data.m - p <= 0:
            continue
        pred = predict_natural(ff.family, ff.theta, data.sizes, on, data.sign)
        z = (pred - data.y) / scale
        if np.all(np.isfinite(z)):
            ff.lack_of_fit = float(np.sum(z ** 2) / (data.m - p))
    values = [ff.lack_of_fit for ff in fits.values() if math.isfinite(ff.lack_of_fit)]
    if not values:
        return None
    best = min(values)
    limit = max(LACK_OF_FIT_FLOOR, LACK_OF_FIT_RATIO * best)
    for ff in fits.values():
        if ff.status == "converged" and math.isfinite(ff.lack_of_fit) and ff.lack_of_fit > limit:
            ff.status = "poor fit"
            ff.message = ((ff.message + "; " if ff.message else "")
                          + f"misses the measured points (reduced chi-square "
                            f"{ff.lack_of_fit:.3g}, limit {limit:.3g})")
    return best, limit


def plausible(ff: FamilyFit, data: FitData, on: str) -> bool:
    """False when the extrapolated curve goes where the quantity cannot: below 0 for an
    error measured >= 0, or above the worst measured value for a test error or gap."""
    if ff.theta is None or ff.family.baseline:
        return True
    far = data.n_max * np.array([1.0, 2.0, 10.0, 100.0, 1e4])
    pred = predict_natural(ff.family, ff.theta, far, on, data.sign)
    if not np.all(np.isfinite(pred)):
        return False
    nonneg = bool(np.nanmin(data.y) >= 0)
    scale = max(1.0, float(np.nanmax(np.abs(data.y))))
    if nonneg and on != "train" and np.any(pred < -1e-9 * scale):
        return False
    # a fitted error that climbs past the worst measured value is not a learning curve
    if on != "train" and np.any(pred[1:] > float(np.nanmax(data.y)) + 1e-9 * scale):
        return False
    return True


def _preference(name: str) -> int:
    return DEFAULT_PREFERENCE.index(name) if name in DEFAULT_PREFERENCE[:2] else 2


def choose(fits: dict, data: FitData, cut: int):
    """``(best, order, rule)``: the chosen family, the ranking by the rule that chose it,
    and that rule in one plain sentence.

    Among the families that can be chosen (converged, plausible beyond the data, not the
    last value), the ranking puts first the near-ties of the best forecast error (within
    ``NEAR_TIE`` of it, or a quarter of the held-out means' noise), ordered power-law-floor,
    power-law, then by AICc; then the other families by forecast error. With fewer than
    ``MIN_VALIDATION_POINTS`` sizes before the held-out ones, the converged default
    families come first in ``DEFAULT_PREFERENCE`` order, then the rest by forecast error.
    Families that cannot be chosen are ranked after all of these by :func:`ranking_table`.
    """
    real = {k: v for k, v in fits.items()
            if not v.family.baseline and v.theta is not None and v.eligible}
    pool = {k: v for k, v in real.items() if v.status == "converged" and math.isfinite(v.forecast_error)}
    if not pool:
        pool = {k: v for k, v in real.items() if math.isfinite(v.forecast_error)}
    if cut < MIN_VALIDATION_POINTS:
        preferred = [k for k in DEFAULT_PREFERENCE if k in real and real[k].status == "converged"]
        if preferred:
            rest = sorted((k for k in real if k not in preferred),
                          key=lambda k: (_finite_or_inf(real[k].forecast_error),
                                         _finite_or_inf(real[k].aicc)))
            rule = (f"too few sizes before the held-out ones to rank by forecast, so "
                    f"{', '.join(preferred)} come first, then the others by forecast error")
            return preferred[0], preferred + rest, rule
    if pool:
        best_fe = min(v.forecast_error for v in pool.values())
        held = data.sem[cut:]
        held = held[np.isfinite(held)]
        # forecast errors from a few held-out sizes are noisy: within NEAR_TIE of the best
        # (or of the held-out means' noise) families are tied; among ties the simple power
        # laws come first (a strong default, Viering & Loog 2023), then AICc decides
        tol = max(NEAR_TIE * best_fe, 0.25 * float(np.median(held)) if len(held) else 0.0)
        near = [k for k, v in pool.items() if v.forecast_error <= best_fe + tol]
        near.sort(key=lambda k: (_preference(k), _finite_or_inf(pool[k].aicc), pool[k].forecast_error))
        for k in near:
            pool[k].tied = True
        rest = sorted((k for k in pool if k not in near), key=lambda k: pool[k].forecast_error)
        order = near + rest
        rule = (f"families whose forecast error is within {format_number(tol, 3)} of the best "
                f"({format_number(best_fe, 4)}) are near-ties and come first, power-law-floor, "
                "then power-law, then the lower AICc; the others follow by forecast error")
    else:
        cands = {k: v for k, v in real.items() if v.status == "converged"} or real
        order = sorted(cands, key=lambda k: _finite_or_inf(cands[k].aicc))
        rule = "no family could be scored on held-out sizes, so they are ranked by AICc"
    if not order:
        base = [k for k, v in fits.items() if v.family.baseline]
        return base[0], base[:1], "no curve family could be fitted; the last value is used"
    return order[0], order, rule


def family_weights(fits: dict, best: str) -> dict[str, float]:
    """Shares of the averaged forecast: each family in proportion to the inverse of its
    mean squared rolling-origin forecast error, recorded on the fits (``weight``).

    Families that fit and extrapolate plausibly and describe the measured points (not
    "poor fit") take part; the last value does not (it would put a floor under every
    long-range forecast), unless the curve is flat and it was chosen. Shares below
    ``MIN_WEIGHT`` are dropped. Without forecast validation (fewer than 3 sizes) the
    chosen family has the whole weight. On the bundled corpus (scripts/bench_forecast.py)
    the average forecasts the full pool with a mean absolute error 7–15% below that of
    the chosen family alone.

    References
    ----------
    .. [1] J. M. Bates and C. W. J. Granger, "The combination of forecasts", Operational
           Research Quarterly 20(4), 1969 (weights inversely proportional to the
           forecast error variance).
    .. [2] J. H. Stock and M. W. Watson, "Combination forecasts of output growth in a
           seven-country data set", Journal of Forecasting 23(6), 2004.
    """
    for ff in fits.values():
        ff.weight = 0.0
    scores = {}
    if not fits[best].family.baseline:
        usable = {k: ff for k, ff in fits.items() if ff.theta is not None and ff.eligible
                  and ff.origins and ff.status != "failed" and not ff.family.baseline}
        good = {k: ff for k, ff in usable.items() if ff.status != "poor fit"} or usable
        for k, ff in good.items():
            mse = float(np.mean([np.mean(e ** 2) for _, e, _ in ff.origins]))
            if math.isfinite(mse):
                scores[k] = max(mse, 1e-300)
    if not scores or best not in fits:
        weights = {best: 1.0}
    else:
        inv = {k: 1.0 / v for k, v in scores.items()}
        total = sum(inv.values())
        weights = {k: v / total for k, v in inv.items() if v / total >= MIN_WEIGHT}
        total = sum(weights.values())
        weights = {k: v / total for k, v in weights.items()}
    for k, v in weights.items():
        fits[k].weight = float(v)
    return weights


def _finite_or_inf(x: float) -> float:
    return x if (x is not None and math.isfinite(x)) else math.inf


def ranking_table(fits: dict, best: str, order: list) -> pd.DataFrame:
    """One row per family in ranking order: ``order`` (the families that can be chosen,
    as :func:`choose` ranked them), then those that cannot (poor fit, poorly determined,
    implausible beyond the data, the last value) by forecast error, failed fits last.
    ``tied`` marks the near-ties of the best forecast error, ``eligible`` False a family
    whose extrapolation goes where the quantity cannot."""
    ranked = list(order) + sorted(
        (k for k in fits if k not in order),
        key=lambda k: (fits[k].status == "failed", _finite_or_inf(fits[k].forecast_error)))
    rows = []
    for k in ranked:
        ff = fits[k]
        rows.append({
            "family": k, "formula": ff.family.formula, "n_params": ff.family.n_params,
            "params": ({p: float(v) for p, v in zip(ff.family.params, ff.theta)}
                       if ff.theta is not None else {}),
            "forecast_error": float(ff.forecast_error), "aicc": float(ff.aicc),
            "status": ff.status, "chosen": k == best, "tied": bool(ff.tied),
            "eligible": bool(ff.eligible), "message": ff.message,
            "lack_of_fit": float(ff.lack_of_fit),
        })
    return pd.DataFrame(rows, columns=["family", "n_params", "params", "forecast_error", "aicc",
                                       "status", "chosen", "tied", "eligible", "message",
                                       "lack_of_fit", "formula"])
