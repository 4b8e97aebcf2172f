"""The fitting engine, checked on curves measured on scikit-learn's bundled datasets.

Curves come from ``sklearn.model_selection.learning_curve`` (a reference library) and are
turned into a ``Curve`` with ``Curve.from_table``.
"""

import json
import math
import warnings
from functools import lru_cache
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import curve_fit

from curvefit.core.curve import Curve
from curvefit.core.errors import FitWarning, InputError
from curvefit.core.estimate import Estimate
from curvefit.core.jsonio import jsonable
from curvefit.fitting.engine import CurveFit, SampleEstimate, fit_curve
from curvefit.fitting.families import get_family


# ------------------------------------------------------------------ measured curves
def _sklearn_curve(dataset: str, model: str, fractions, repeats: int, seed: int = 0):
    from sklearn import datasets
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import ShuffleSplit, learning_curve
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier
    from threadpoolctl import threadpool_limits

    X, y = getattr(datasets, f"load_{dataset}")(return_X_y=True)
    est = {"nb": GaussianNB(), "knn": KNeighborsClassifier(),
           "tree": DecisionTreeClassifier(random_state=0),
           "hgb": HistGradientBoostingClassifier(max_iter=20, random_state=0),
           "lr": make_pipeline(StandardScaler(), LogisticRegression(max_iter=500))}[model]
    with threadpool_limits(1):  # the test machine is shared; one BLAS thread is fastest
        sizes, tr, te = learning_curve(est, X, y, train_sizes=np.asarray(fractions),
                                       cv=ShuffleSplit(repeats, test_size=0.3, random_state=seed),
                                       n_jobs=1)
    rows = [{"size": int(s), "repeat": r, "train_error": 1 - tr[i, r], "test_error": 1 - te[i, r]}
            for i, s in enumerate(sizes) for r in range(repeats)]
    return pd.DataFrame(rows)


@lru_cache(maxsize=None)
def measured_curve(key: str):
    """A small measured curve: ``.curve`` (Curve), ``.table`` and per-size ``.summary_frame``."""
    dataset, model = {"digits_nb": ("digits", "nb"), "bc_tree": ("breast_cancer", "tree"),
                      "digits_knn": ("digits", "knn")}[key]
    table = _sklearn_curve(dataset, model, np.geomspace(0.05, 1.0, 8), repeats=4)
    curve = Curve.from_table(table, meta={"source": f"sklearn {dataset} {model}"})
    summary = table.groupby("size", as_index=False).agg(test_mean=("test_error", "mean"),
                                                        train_mean=("train_error", "mean"))
    return SimpleNamespace(curve=curve, table=table, summary_frame=summary)


@pytest.fixture(scope="module")
def nb():
    return measured_curve("digits_nb")


@pytest.fixture(scope="module")
def nb_fit(nb):
    return fit_curve(nb.curve, bootstrap=60, random_state=1)


def _theta(fit, family):
    """A family's fitted parameters, in the order of its ``params``."""
    params = fit.table.set_index("family").loc[family, "params"]
    return np.array([params[p] for p in get_family(family).params])


def _floored_standard_errors(fit):
    """The per-size standard errors, each raised to at least 0.2 × the median one and the
    median where a size has no repeats, as the fit's documented noise scale."""
    sem = fit.standard_errors
    med = np.median(sem[np.isfinite(sem)])
    return np.maximum(np.where(np.isfinite(sem), sem, med), 0.2 * med)


# ------------------------------------------------------------------ outside checks
@pytest.mark.parametrize("family", ["power-law-floor", "exponential-floor", "vapor-pressure", "power-law"])
def test_weighted_least_squares_agrees_with_scipy_curve_fit(nb, family):
    # reference: scipy.optimize.curve_fit on the same weighted problem (sigma = 1/√w)
    fit = fit_curve(nb.curve, families=family, bootstrap=0)
    sizes, y, w = fit.sizes, fit.means, fit.weights
    fam = get_family(family)
    theta = _theta(fit, family)
    lo, hi = fam.bounds()
    ref, _ = curve_fit(lambda n, *t: fam.func(n, np.array(t)), sizes, y,
                       p0=theta * 1.05 + 1e-4 * (theta == 0), sigma=1 / np.sqrt(w),
                       bounds=(lo, hi), method="trf", jac=lambda n, *t: fam.jac(n, np.array(t)),
                       ftol=1e-14, xtol=1e-14, gtol=1e-14, max_nfev=5000)
    pred_ours = fam.func(sizes, theta)
    pred_ref = fam.func(sizes, ref)
    rss = lambda p: float(np.sum(w * (p - y) ** 2))  # noqa: E731
    assert rss(pred_ours) <= rss(pred_ref) * (1 + 1e-6) + 1e-15
    np.testing.assert_allclose(pred_ours, pred_ref, rtol=1e-4)


def test_index_weights_follow_figueroa(nb):
    # Figueroa et al. 2012 (BMC Med. Inform. Decis. Mak. 12:8): weights grow with the
    # point's index (proportional to index: from memory)
    fit = fit_curve(nb.curve, families="power-law-floor", weights="index", bootstrap=0)
    w = fit.weights
    np.testing.assert_allclose(w / w[0], np.arange(1, len(w) + 1))


def test_joint_family_puts_the_shared_asymptote_between_train_and_test():
    # Cortes et al. 1994 (NIPS 6): train error rises and test error falls to one
    # asymptote a, so a lies between the two curves at the largest size
    bc = measured_curve("bc_tree")
    fit = fit_curve(bc.curve, families="joint-train-test", bootstrap=30)
    row = fit.table.set_index("family").loc["joint-train-test"]
    a = row["params"]["a"]
    last = bc.summary_frame.iloc[-1]
    assert last["train_mean"] - 1e-9 <= a <= last["test_mean"] + 0.02
    # naive Bayes has a rising train error: the train component stays below the asymptote
    nb = measured_curve("digits_nb")
    train_fit = fit_curve(nb.curve, families="joint-train-test", on="train", bootstrap=0)
    assert train_fit.best == "joint-train-test"
    a_nb = train_fit.table.set_index("family").loc["joint-train-test", "params"]["a"]
    assert train_fit.error_at(10 * train_fit.largest_size).estimate <= a_nb + 1e-9


# ------------------------------------------------------------------ the result object
def test_curvefit_contract(nb_fit):
    fit = nb_fit
    assert isinstance(fit, CurveFit)
    assert fit.on == "test"
    assert list(fit.table.columns[:7]) == ["family", "n_params", "params", "forecast_error",
                                           "aicc", "status", "chosen"]
    assert fit.table["chosen"].sum() == 1
    assert fit.table.iloc[0]["family"] == fit.best
    assert set(fit.table["status"]) <= {"converged", "poorly determined", "poor fit", "failed"}
    assert {"last-value", "power-law-floor", "joint-train-test"} <= set(fit.table["family"])
    assert fit.runner_up is None or fit.runner_up in set(fit.table["family"])
    assert fit.best != "last-value"
    assert "CurveFit(" in repr(fit) and fit.best in repr(fit)
    json.dumps(jsonable(fit.to_dict()), allow_nan=False)


def test_predict_gives_a_table_and_error_at_one_estimate(nb_fit):
    e = nb_fit.error_at(2000)
    assert isinstance(e, Estimate) and e.level == 0.9
    assert e.low <= e.estimate <= e.high
    df = nb_fit.predict([500, 1000, 2000], interval=0.8)
    assert list(df.columns) == ["size", "estimate", "low", "high"]
    assert df["estimate"].iloc[2] == pytest.approx(e.estimate)
    one = nb_fit.predict(2000)  # one size is a one-row table, the same type as for several
    assert isinstance(one, pd.DataFrame) and len(one) == 1
    assert tuple(one.iloc[0][["estimate", "low", "high"]]) == (e.estimate, e.low, e.high)
    wide = nb_fit.error_at(2000, interval=0.95)
    assert wide.high - wide.low >= e.high - e.low - 1e-12
    with pytest.warns(FitWarning):
        nb_fit.predict(100 * nb_fit.largest_size)
    with pytest.warns(FitWarning):
        nb_fit.error_at(100 * nb_fit.largest_size)
    for bad in (lambda: nb_fit.predict(-5), lambda: nb_fit.error_at(-5),
                lambda: nb_fit.error_at([100, 200]), lambda: nb_fit.predict(100, interval=1.5),
                lambda: nb_fit.error_at(100, interval=1.5)):
        with pytest.raises(InputError):
            bad()


def test_parameters_asymptote_exponent(nb_fit):
    p = nb_fit.parameters()
    assert list(p.columns) == ["param", "estimate", "low", "high", "note"]
    assert list(p["param"]) == list(get_family(nb_fit.best).params)
    a = nb_fit.asymptote()
    if a is not None:
        assert a.low <= a.high
    for name in ["power-law-floor", "power-law", "exponential-floor", "log-decline"]:
        f = fit_curve(measured_curve("digits_nb").curve, families=name, bootstrap=10)
        if f.best != name:
            continue
        assert (f.exponent() is not None) == (name in ("power-law-floor", "power-law"))
        assert (f.asymptote() is None) == (name == "log-decline")


def test_predict_family_draws_any_fitted_family(nb_fit):
    for name in nb_fit.table.loc[nb_fit.table["status"] != "failed", "family"]:
        assert np.isfinite(nb_fit.predict_family(name, [100.0, 1e4])).all()
    with pytest.raises(InputError):
        nb_fit.predict_family("nope", 10)


def test_same_seed_same_numbers(nb):
    a = fit_curve(nb.curve, families="power-law-floor,exponential-floor", bootstrap=40, random_state=7)
    b = fit_curve(nb.curve, families="power-law-floor,exponential-floor", bootstrap=40, random_state=7)
    c = fit_curve(nb.curve, families="power-law-floor,exponential-floor", bootstrap=40, random_state=8)
    assert a.error_at(5000) == b.error_at(5000)
    assert a.error_at(5000).estimate == c.error_at(5000).estimate
    assert a.parameters().equals(b.parameters())
    # the prediction band may sit on the measurement-noise floor; the parameters do not
    assert not np.allclose(a.parameters()["low"], c.parameters()["low"])


def test_weights_choices_change_the_fit(nb):
    fits = {w: fit_curve(nb.curve, families="power-law-floor", weights=w, bootstrap=0) for w in
            ["sem", "index", "none"]}
    vals = {w: tuple(np.round(_theta(f, "power-law-floor"), 8)) for w, f in fits.items()}
    assert len(set(vals.values())) == 3


def test_n_holdout_sets_the_forecast_validation(nb):
    # 8 sizes: a quarter is 2, raised to 3 while 4 sizes stay before them (documented rule)
    assert fit_curve(nb.curve, families="power-law-floor", bootstrap=0).n_holdout == 3
    fit = fit_curve(nb.curve, families="power-law-floor", bootstrap=0, n_holdout=2)
    assert fit.n_holdout == 2
    with pytest.warns(DeprecationWarning):
        old = fit_curve(nb.curve, families="power-law-floor", bootstrap=0, holdout=2)
    assert old.table.equals(fit.table)
    with pytest.raises(InputError):
        fit_curve(nb.curve, n_holdout=-1)


def test_gap_and_train_fits(nb):
    gap = fit_curve(nb.curve, on="gap", bootstrap=20)
    assert gap.on == "gap"
    summary = nb.summary_frame
    observed = (summary["test_mean"] - summary["train_mean"]).to_numpy()
    assert np.max(np.abs(gap.predict(summary["size"].to_numpy())["estimate"] - observed)) < 0.05
    train = fit_curve(nb.curve, on="train", bootstrap=20)
    pred = train.predict(summary["size"].to_numpy())["estimate"].to_numpy()
    assert np.max(np.abs(pred - summary["train_mean"].to_numpy())) < 0.05


# ------------------------------------------------------------------ answers
def test_samples_for_inverts_predict(nb):
    # power-law tends to 0; a target below every measured mean is answered from the fitted curve
    nb_fit = fit_curve(nb.curve, families="power-law", bootstrap=60, random_state=1)
    target = 0.6 * min(nb_fit.error_at(nb_fit.largest_size).estimate,
                       float(nb_fit.curve.summary()["test_mean"].min()))
    s = nb_fit.samples_for(test_error=target)
    assert isinstance(s, SampleEstimate) and s.kind == "test_error" and s.reachable
    assert nb_fit.error_at(s.n).estimate == pytest.approx(target, abs=2e-4)
    assert s.low <= s.n <= s.high
    assert s.message.startswith("To reach ") and "labelled samples" in s.message
    json.dumps(jsonable(s.to_dict()))


def test_target_below_the_asymptote_is_not_reachable(nb):
    fit = fit_curve(nb.curve, families="power-law-floor", bootstrap=60)
    asym = fit.asymptote()
    assert asym is not None and asym.estimate > 0.01, asym  # naive Bayes levels off well above 1%
    s = fit.samples_for(test_error=0.5 * asym.estimate)
    assert not s.reachable and math.isinf(s.n)
    assert "not reachable by more data with this model" in s.message
    assert s.asymptote == asym
    # the floor's interval joins the averaged forecast's band far beyond the data, which
    # here reaches below the target: the verdict says it is uncertain
    assert asym.low <= 0.5 * asym.estimate and "so this is uncertain" in s.message
    # a falling curve's floor lies below its error at the largest size
    assert asym.high <= fit.error_at(fit.largest_size).high + 1e-12


def test_already_reached_target(nb_fit):
    s = nb_fit.samples_for(test_error=0.9)
    assert s.reachable and s.n <= nb_fit.largest_size
    assert s.message.startswith("The measured curve already reaches")


def test_gap_target_fits_the_gap_internally(nb_fit):
    s = nb_fit.samples_for(gap=0.05)
    assert s.kind == "gap"
    # the gap fit is made once and kept: asking again gives the same answer
    assert nb_fit.samples_for(gap=0.05).message == s.message
    direct = fit_curve(nb_fit.curve, on="gap", bootstrap=60, random_state=1)
    assert direct.samples_for(gap=0.05).n == s.n
    with pytest.raises(InputError):
        nb_fit.samples_for()
    with pytest.raises(InputError):
        nb_fit.samples_for(test_error=0.1, gap=0.1)
    no_train = Curve.from_table(nb_fit.curve.points[["size", "repeat", "test_error"]])
    with pytest.raises(InputError):
        fit_curve(no_train, bootstrap=5).samples_for(gap=0.05)


# ------------------------------------------------------------------ honest warnings
def test_warning_few_sizes(nb):
    few = nb.table[nb.table["size"].isin(sorted(nb.table["size"].unique())[:3])]
    fit = fit_curve(Curve.from_table(few), bootstrap=10)
    assert any("only 3 distinct sizes" in w for w in fit.warnings)


def test_warning_curve_that_does_not_decrease(nb):
    # the train error of a measured curve grows with size: as a "test error" it must be flagged
    t = nb.table.assign(test_error=nb.table["train_error"])[["size", "repeat", "test_error"]]
    fit = fit_curve(Curve.from_table(t), bootstrap=10)
    assert any("does not decrease" in w for w in fit.warnings)


def test_warning_wide_interval_and_long_extrapolation():
    # 3 sizes of the tree curve: an interval wider than the estimate at 10×
    bc = measured_curve("bc_tree").table
    few = bc[bc["size"].isin(sorted(bc["size"].unique())[:4])]
    fit = fit_curve(Curve.from_table(few), families="power-law-floor", bootstrap=60)
    s = fit.samples_for(test_error=0.01)
    assert (not s.reachable) or s.warnings or any("wider" in w for w in fit.warnings)


def test_bad_arguments_raise_input_error(nb):
    for kwargs in [{"on": "middle"}, {"weights": "heavy"}, {"bootstrap": -1},
                   {"families": "power-law-floor,nope"}, {"families": ""}]:
        with pytest.raises(InputError):
            fit_curve(nb.curve, **kwargs)
    with pytest.raises(InputError):
        fit_curve(Curve.from_table(nb.table[["size", "test_error"]]), on="gap")
    with pytest.raises(InputError):
        fit_curve("not a curve")


# ------------------------------------------------------------------ odd input never raises
cell = st.one_of(st.floats(min_value=0.0, max_value=1.0), st.just(float("nan")))


@st.composite
def odd_curves(draw):
    kind = draw(st.sampled_from(["noisy", "flat", "increasing", "tiny", "huge", "one_size"]))
    n_sizes = 1 if kind == "one_size" else draw(st.integers(2, 7))
    repeats = draw(st.integers(1, 3))
    sizes = sorted(draw(st.lists(st.integers(2, 5000), min_size=n_sizes, max_size=n_sizes,
                                 unique=True)))
    rows = []
    for i, s in enumerate(sizes):
        for r in range(repeats):
            if kind == "flat":
                v = 0.2
            elif kind == "increasing":
                v = 0.05 + 0.1 * i + draw(st.floats(0, 0.01))
            else:
                v = draw(cell)
            if kind == "tiny" and math.isfinite(v):
                v *= 1e-9
            if kind == "huge" and math.isfinite(v):
                v *= 1e6
            rows.append({"size": s, "repeat": r, "test_error": v,
                         "train_error": v * 0.5 if math.isfinite(v) else v})
    df = pd.DataFrame(rows)
    if not np.isfinite(df["test_error"]).any():
        df.loc[0, "test_error"] = 0.3
    return df


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(odd_curves(), st.sampled_from(["test", "gap"]))
def test_odd_finite_curves_give_a_result(table, on):
    curve = Curve.from_table(table)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            fit = fit_curve(curve, on=on, bootstrap=5, random_state=0)
        except InputError as exc:  # only when nothing finite is left for this quantity
            assert "nothing to fit" in str(exc) or "needs train_error" in str(exc)
            return
        assert fit.best in set(fit.table["family"])
        assert set(fit.table["status"]) <= {"converged", "poorly determined", "poor fit", "failed"}
        e = fit.error_at(2 * fit.largest_size)
        assert isinstance(e, Estimate)
        if on == "test":
            s = fit.samples_for(test_error=float(np.nanmin(table["test_error"])) * 0.9)
            assert isinstance(s, SampleEstimate) and s.message


# ------------------------------------------------------------------ measured extrapolation
def test_extrapolation_from_a_quarter_of_the_pool():
    # measured check on scikit-learn's bundled digits and breast cancer data (naive Bayes,
    # k-NN, decision tree): fit the sizes <= 25% of the pool, predict the measured error at
    # the full pool. Seen when written: 2 of 3 intervals cover; chosen MAE 0.038 vs last-value 0.042.
    covered, err_fit, err_last = [], [], []
    for key in ["digits_nb", "digits_knn", "bc_tree"]:
        c = measured_curve(key).curve
        ok = c.ok_points()
        pool = ok["size"].max()
        measured = ok.loc[ok["size"] == pool, "test_error"].mean()
        sub = Curve(c.points[c.points["size"] <= 0.25 * pool])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitWarning)
            e = fit_curve(sub, bootstrap=100, random_state=0).error_at(pool)
        covered.append(e.low <= measured <= e.high)
        err_fit.append(abs(e.estimate - measured))
        err_last.append(abs(sub.ok_points().groupby("size")["test_error"].mean().iloc[-1] - measured))
    assert sum(covered) >= 2, covered
    assert np.mean(err_fit) < np.mean(err_last), (err_fit, err_last)


# ------------------------------------------------------------------ quality pass
@lru_cache(maxsize=None)
def plateau_curve():
    """Histogram boosting on breast cancer with default leaves: it predicts the majority
    class (error ≈ 0.37, the minority share of the bundled data) until about 50 samples,
    then falls; a real curve with a regime change inside the measured range."""
    table = _sklearn_curve("breast_cancer", "hgb", np.geomspace(0.03, 1.0, 8), repeats=3)
    return Curve.from_table(table)


@pytest.fixture(scope="module")
def plateau_fit():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        return fit_curve(plateau_curve(), bootstrap=60)


def test_lack_of_fit_keeps_families_that_miss_the_points_out(plateau_fit, nb_fit):
    from curvefit.fitting.selection import LACK_OF_FIT_FLOOR, LACK_OF_FIT_RATIO

    for fit in (plateau_fit, nb_fit):
        t = fit.table
        lof = t["lack_of_fit"].astype(float)
        best = lof[np.isfinite(lof)].min()
        poor = t[t["status"] == "poor fit"]
        # common practice: reduced chi-square far above 1 (and above the best family's) rejects
        assert (poor["lack_of_fit"] > max(LACK_OF_FIT_FLOOR, LACK_OF_FIT_RATIO * best)).all()
        assert all("misses the measured points" in m for m in poor["message"])
        row = t[t["chosen"]].iloc[0]
        fine = t[(t["status"] == "converged") & (t["family"] != "last-value")]
        if len(fine):
            assert row["status"] != "poor fit", t
    # the sharp drop at ~50 samples is missed by the smooth 2- and 3-parameter laws
    status = plateau_fit.table.set_index("family").loc[["power-law", "power-law-floor"], "status"]
    assert (status == "poor fit").all()


def test_lack_of_fit_is_reduced_chi_square(nb_fit):
    scale = _floored_standard_errors(nb_fit)
    row = nb_fit.table[nb_fit.table["family"] == "power-law-floor"].iloc[0]
    pred = nb_fit.predict_family("power-law-floor", nb_fit.sizes)
    chi2 = float(np.sum(((pred - nb_fit.means) / scale) ** 2))
    # reduced chi-square χ²/(m − p) (Bevington & Robinson 2003, ch. 11)
    assert row["lack_of_fit"] == pytest.approx(chi2 / (len(nb_fit.sizes) - 3), rel=1e-9)


def test_answers_within_the_measured_range_come_from_the_measured_means(plateau_fit):
    summary = plateau_fit.curve.summary()
    sizes, means = summary["size"].to_numpy(float), summary["test_mean"].to_numpy()
    for target in (0.30, 0.10, 0.07):
        s = plateau_fit.samples_for(test_error=target)
        assert s.reachable and s.n >= sizes[0]
        last_above = sizes[np.nonzero(means > target)[0][-1]]
        stays = sizes[np.nonzero(means > target)[0][-1] + 1]
        assert last_above < s.n <= stays             # after the last measured size above it
        assert np.all(means[sizes >= s.n] <= target)  # and every larger measured size agrees
        assert s.message.startswith("The measured curve already reaches")
        assert s.low <= s.n <= s.high
    # never below the smallest measured size, whatever the fitted curve says at n = 1
    s = plateau_fit.samples_for(test_error=0.5)
    assert s.n == sizes[0] and "smallest measured size" in s.message


def test_fitted_answers_start_beyond_the_largest_size(plateau_fit):
    summary = plateau_fit.curve.summary()
    target = 0.999 * float(summary["test_mean"].min())
    s = plateau_fit.samples_for(test_error=target)
    assert not s.reachable or s.n > plateau_fit.largest_size


def test_parametric_bootstrap_matches_student_t_for_one_mean(nb):
    from scipy import stats

    # last-value is the last mean; its bootstrap interval should be Student's t interval of
    # that mean (scipy.stats.t), not the narrower resampled-repeats one
    fit = fit_curve(nb.curve, families="last-value", bootstrap=3000, random_state=3)
    k, sem = fit.repeats[-1], fit.standard_errors
    lo, hi = stats.t.interval(0.9, k - 1, loc=fit.means[-1], scale=max(sem[-1], 0.2 * np.median(sem)))
    est = fit.parameters().iloc[0]           # the bootstrap interval of the last mean
    assert est.low == pytest.approx(lo, rel=0.05) and est.high == pytest.approx(hi, rel=0.05)
    # the prediction band there adds what a fresh data set would bring, so it is wider
    band = fit.error_at(fit.largest_size)
    assert band.low < lo and band.high > hi


def test_asymptote_wording_is_clean_and_honest(nb):
    from curvefit.core.formatting import format_error

    assert format_error(2.6e-13) == "0%" and format_error(-1e-12) == "0%"
    assert format_error(0.0123) == "1.2%"
    fit = fit_curve(nb.curve, families="inverse-log", bootstrap=40)
    assert fit.approach == "logarithmic"
    text = fit.describe_asymptote()
    assert "only logarithmically" in text and "ln n → ∞" in text and "levels off" not in text
    s = fit.samples_for(test_error=0.5 * fit.asymptote().estimate)
    assert not s.reachable and "only logarithmically" in s.message
    plain = fit_curve(nb.curve, families="power-law", bootstrap=0)
    assert plain.approach == "power" and plain.describe_asymptote() == "tends to 0% (fixed by the family)"
    a = fit_curve(nb.curve, families="power-law-floor", bootstrap=40).asymptote()
    assert a.estimate == 0.0 or abs(a.estimate) > 1e-9


def test_prediction_band_is_no_narrower_than_the_measured_mean(nb_fit):
    from scipy import stats

    scale = _floored_standard_errors(nb_fit)
    band = nb_fit.predict(nb_fit.sizes)
    for j, row in enumerate(band.itertuples()):
        k = nb_fit.repeats[j]
        half = stats.t.ppf(0.95, k - 1) * scale[j]  # Student-t interval of a mean (scipy.stats)
        assert row.high - row.estimate >= half * (1 - 1e-9)
        assert row.estimate - row.low >= min(half, row.estimate) * (1 - 1e-9)


def _law_data(seed=3):
    """0.05 + 2·n^−0.5 with binomial noise on 1,000 test rows (the known law of the
    simulation in scripts/bench_forecast.py --simulate)."""
    from curvefit.fitting.data import prepare_data

    rng = np.random.default_rng(seed)
    sizes = np.repeat([50, 85, 143, 243, 412, 697, 1181, 2000], 5)
    e = rng.binomial(1000, 0.05 + 2 * sizes ** -0.5) / 1000
    table = pd.DataFrame({"size": sizes, "test_error": e, "n_test": 1000})
    return prepare_data(Curve.from_table(table), "test", "sem")


def test_forecast_validation_never_starts_from_the_full_fit():
    from curvefit.fitting.selection import fit_families, forecast

    data = _law_data()
    ff = fit_families(["power-law-floor"], data)["power-law-floor"]
    forecast(ff, data, "test", range(5, 8))
    before = ff.forecast_error
    ff.theta = np.array([9.0, 0.1, 0.5])       # a full fit far off: the origins do not see it
    forecast(ff, data, "test", range(5, 8))
    assert ff.forecast_error == before


def test_drift_is_net_of_the_estimation_noise(monkeypatch):
    import curvefit.fitting.selection as selection

    # the right family on its own law: its forecast errors are estimation noise and the
    # held-out means' noise, so the model error beyond the data is 0; counting the
    # estimation noise again (as the bootstrap band already holds it) gave 0.0037
    data = _law_data()
    ff = selection.fit_families(["power-law-floor"], data)["power-law-floor"]
    selection.forecast(ff, data, "test", range(5, 8), drift_from=6)
    assert ff.drift == 0.0
    monkeypatch.setattr(selection, "prediction_variance", lambda *a, **k: np.zeros(len(a[-1])))
    selection.forecast(ff, data, "test", range(5, 8), drift_from=6)
    assert ff.drift > 0.001


def _exact_law_fit():
    n = np.repeat([50, 100, 200, 400, 800, 1600], 3)
    table = pd.DataFrame({"size": n, "test_error": 0.05 + 2.0 * n ** -0.6
                          + np.tile([-0.002, 0.0, 0.002], 6)})
    return fit_curve(table, bootstrap=100, random_state=0)


def test_targets_below_and_inside_the_floor_interval():
    fit = _exact_law_fit()
    # the family's floor is 5%; the floor's 90% interval, joined with the averaged
    # forecast's band far beyond the data, is about 1.5%–8.4% (the corpus' relative model
    # error, τ = 0.04, widens it far out): 1% lies below all of it, and the band's lower
    # edge reaches it only far beyond the horizon, so no lower end
    asym = fit.asymptote()
    assert asym.estimate == pytest.approx(0.05, abs=0.002) and 0.01 < asym.low < 0.042
    s = fit.samples_for(test_error=0.01)
    assert not s.reachable and math.isinf(s.n) and math.isinf(s.high) and math.isinf(s.low)
    assert "not reachable by more data with this model" in s.message
    assert "levels off at about 5.0% (90% interval" in s.message
    # 4.2% lies inside the floor's interval: the corrected forecast reaches it only beyond
    # the horizon, which is said as "more than N" with a finite lower end, not as
    # unreachable
    s = fit.samples_for(test_error=0.042)
    assert math.isinf(s.n) and math.isfinite(s.low) and s.low > fit.largest_size
    assert s.beyond_horizon and "the 90% interval starts at about" in s.message


def test_a_curve_levelling_off_below_the_target_is_never_called_unreachable():
    # a slow power law with no floor (0.5·n^-0.17, exact up to small noise) crosses 1e-6 only
    # near n = 10^33, beyond the searched sizes: the answer is "more than N", since the
    # fitted level (about 0) lies below the target
    n = np.repeat([40, 80, 160, 300], 3)
    table = pd.DataFrame({"size": n, "test_error": 0.5 * n ** -0.17
                          + np.tile([-0.001, 0.0, 0.001], 4)})
    fit = fit_curve(table, bootstrap=100, random_state=0)
    asym = fit.asymptote()
    assert asym is not None and asym.estimate < 1e-6
    s = fit.samples_for(test_error=1e-6)
    assert s.beyond_horizon and math.isinf(s.n)
    assert "not reachable" not in s.message and "cannot say how much more" in s.message


def test_open_upper_end_says_why():
    fit = _exact_law_fit()
    s = fit.samples_for(test_error=0.055)
    assert s.reachable and math.isinf(s.high)
    assert "some bootstrap curves never reach" not in s.message
    assert ("of the bootstrap curves stay above the target" in s.message
            or "beyond the data the band carries" in s.message)
    assert "so the interval has no upper limit" in s.message


def test_fit_notes_say_how_the_forecast_was_made(nb_fit):
    notes = " ".join(nb_fit.notes)
    assert "fresh data set" in notes
    assert "correction learned on" in notes           # the packaged corpus calibration
    assert sum(nb_fit.family_weights.values()) == pytest.approx(1.0)
    doc = nb_fit.to_dict()
    assert doc["notes"] == nb_fit.notes and doc["calibration"]["source"] == "corpus"
    plain = fit_curve(nb_fit.curve, bootstrap=60, random_state=1, calibration="none")
    assert not plain.calibration.active and "correction learned" not in " ".join(plain.notes)
    fit, plain = _exact_law_fit(), fit_curve(_exact_law_fit().curve, bootstrap=100,
                                             random_state=0, calibration="none")
    sizes = fit.largest_size * np.array([0.5, 1.0, 2.0, 10.0, 100.0])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # 100× is flagged as a long extrapolation
        e, p = fit.predict(sizes), plain.predict(sizes)
    cal = fit.calibration
    # inside the data nothing moves; beyond it the test-error forecast is corrected in log
    # space: F(N)·(F(n)/F(N))^drop_power·(n/N)^tail_slope (scripts/calibrate_forecasts.py)
    assert e["estimate"][:2].tolist() == pytest.approx(p["estimate"][:2].tolist())
    top = p["estimate"].iloc[1]
    expected = top * np.exp(cal.drop_power * np.log(np.maximum(p["estimate"][2:] / top, 1e-3))
                            + cal.tail_slope * np.log(sizes[2:] / fit.largest_size))
    assert e["estimate"][2:].tolist() == pytest.approx(expected.tolist())
    # the band beyond the data, on each side: z·√(κ²·(bootstrap² + families² +
    # model_error²) + data_set² + (τ·level_distance)²), never narrower than the noise floor
    parts = fit.band_parts(sizes[2:])
    z = 1.6448536269514722                            # normal 95% quantile (scipy.stats.norm)
    common = parts["families"] ** 2 + parts["model_error"] ** 2
    rest = parts["data_set"] ** 2 + (cal.relative_error * parts["level_distance"]) ** 2
    half = z * np.sqrt(cal.model_error_scale ** 2 * (parts["bootstrap_high"] ** 2 + common) + rest)
    half = np.maximum(half, z * parts["noise_floor"]).to_numpy()
    assert e["high"][2:].to_numpy() == pytest.approx(e["estimate"][2:].to_numpy() + half)
    assert cal.relative_error > 0 and parts["level_distance"].iloc[-1] > 0


@pytest.mark.parametrize("field,value", [("constant_slope", float("nan")), ("constant_slope", "x"),
                                         ("tail_slope", float("inf")), ("relative_error", -0.1)])
def test_a_calibration_with_a_bad_number_is_refused_in_one_line(field, value):
    from curvefit.core.errors import InputError
    from curvefit.fitting.calibration import Calibration

    with pytest.raises(InputError, match=f"calibration {field} must be"):
        Calibration.from_dict({field: value, "source": "corpus"})
