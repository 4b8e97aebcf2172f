"""Curve families: formulas, analytic Jacobians, batched evaluation, first guesses, registry."""

import math

import numpy as np
import pytest
from scipy.optimize import approx_fprime

from curvefit.fitting import families as F
from curvefit.fitting.engine import fit_curve

N = np.array([20.0, 50.0, 130.0, 400.0, 1500.0, 6000.0])

# parameter vectors inside each family's bounds, shaped like decreasing error curves
THETAS = {
    "last-value": [0.12],
    "power-law": [1.3, 0.45],
    "power-law-floor": [2.0, 0.6, 0.05],
    "shifted-power-law": [0.02, 0.3, 0.7, 0.04],
    "exponential-floor": [0.3, 0.004, 0.06],
    "log-decline": [0.02, 0.3],
    "inverse-log": [0.5, 0.02],
    "vapor-pressure": [-0.5, 8.0, -0.3],
    "morgan-mercer-flodin": [0.5, 30.0, 0.05, 0.8],
    "weibull": [0.2, -0.4, 0.05, 0.5],
    "joint-train-test": [0.05, 1.5, 0.5, 0.8, 0.6],
}


def test_catalogue_has_the_published_families():
    # Viering & Loog 2023 (IEEE TPAMI 45(6)) list these; joint-train-test is Cortes et al. 1994
    for name in ["last-value", "power-law", "power-law-floor", "shifted-power-law",
                 "exponential-floor", "log-decline", "inverse-log", "vapor-pressure",
                 "morgan-mercer-flodin", "weibull", "joint-train-test"]:
        fam = F.get_family(name)
        assert fam.n_params == len(fam.lower) == len(fam.upper) == len(THETAS[name])
    with pytest.raises(KeyError):
        F.get_family("nope")


@pytest.mark.parametrize("name", list(THETAS))
def test_analytic_jacobian_matches_finite_differences(name):
    # reference: scipy.optimize.approx_fprime (forward differences), per size
    fam = F.get_family(name)
    theta = np.array(THETAS[name], dtype=float)
    pairs = [(fam.func, fam.jac)] + ([(fam.train_func, fam.train_jac)] if fam.joint else [])
    for func, jac in pairs:
        J = jac(N, theta)
        assert J.shape == (len(N), fam.n_params)
        for i, n in enumerate(N):
            step = 1e-7 * np.maximum(np.abs(theta), 1e-3)
            num = approx_fprime(theta, lambda t: float(func(np.array([n]), t)[0]), step)
            np.testing.assert_allclose(J[i], num, rtol=2e-4, atol=1e-7 * max(1.0, np.abs(J[i]).max()))


@pytest.mark.parametrize("name", list(THETAS))
def test_batched_evaluation_equals_one_at_a_time(name):
    fam = F.get_family(name)
    base = np.array(THETAS[name], dtype=float)
    batch = np.array([base * (1 + 0.01 * k) for k in range(4)])
    t = batch.T[:, :, None]
    f = fam.func(N, t)
    J = np.broadcast_to(fam.jac(N, t), (4, len(N), fam.n_params))
    for k in range(4):
        np.testing.assert_allclose(f[k], fam.func(N, batch[k]), rtol=1e-12)
        np.testing.assert_allclose(J[k], fam.jac(N, batch[k]), rtol=1e-12, atol=1e-300)


def test_formulas_match_the_written_forms():
    # the formulas as written in Viering & Loog 2023 / Domhan et al. 2015 (from memory)
    n = 250.0
    a, b, c = THETAS["power-law-floor"]
    assert F.get_family("power-law-floor")(n, THETAS["power-law-floor"]) == pytest.approx(c + a * n ** -b)
    a, b, al, c = THETAS["shifted-power-law"]
    assert F.get_family("shifted-power-law")(n, THETAS["shifted-power-law"]) \
        == pytest.approx(c + (a * n + b) ** -al)
    a, b, c = THETAS["exponential-floor"]
    assert F.get_family("exponential-floor")(n, THETAS["exponential-floor"]) \
        == pytest.approx(c + a * math.exp(-b * n))
    a, b, c = THETAS["vapor-pressure"]
    assert F.get_family("vapor-pressure")(n, THETAS["vapor-pressure"]) \
        == pytest.approx(math.exp(a + b / n + c * math.log(n)))
    a, b, c, d = THETAS["morgan-mercer-flodin"]
    assert F.get_family("morgan-mercer-flodin")(n, THETAS["morgan-mercer-flodin"]) \
        == pytest.approx((a * b + c * n ** d) / (b + n ** d))
    a, b, c, d = THETAS["weibull"]
    assert F.get_family("weibull")(n, THETAS["weibull"]) == pytest.approx(c - b * math.exp(-a * n ** d))
    a, c = THETAS["inverse-log"]
    assert F.get_family("inverse-log")(n, THETAS["inverse-log"]) == pytest.approx(c + a / math.log(n))
    # Cortes et al. 1994: test = a + b/n^α, train = a − c/n^β share the asymptote a
    fam = F.get_family("joint-train-test")
    a, b, al, cc, be = THETAS["joint-train-test"]
    assert fam.func(np.array([n]), THETAS["joint-train-test"])[0] == pytest.approx(a + b * n ** -al)
    assert fam.train_func(np.array([n]), THETAS["joint-train-test"])[0] == pytest.approx(a - cc * n ** -be)
    big = np.array([1e12])
    assert fam.func(big, THETAS["joint-train-test"])[0] == pytest.approx(a, abs=1e-4)
    assert fam.train_func(big, THETAS["joint-train-test"])[0] == pytest.approx(a, abs=1e-4)


@pytest.mark.parametrize("name", [k for k in THETAS if k != "joint-train-test"])
def test_guesses_are_finite_on_a_measured_curve(name):
    from test_fitting import measured_curve

    s = measured_curve("digits_nb").summary_frame
    fam = F.get_family(name)
    n, y = s["size"].to_numpy(float), s["test_mean"].to_numpy(float)
    guesses = fam.guesses(n, y, np.ones_like(y))
    assert guesses
    lo, hi = fam.bounds()
    for g in guesses:
        g = np.clip(np.asarray(g, float), lo, hi)
        assert np.all(np.isfinite(fam(n, g)))


def test_adding_a_family_needs_no_change_elsewhere():
    # a shifted hyperbola, registered in a few lines, is fitted and ranked like the rest
    fam = F.Family(
        name="hyp2", formula="c + a/n", params=("a", "c"),
        func=lambda n, t: t[1] + t[0] / n,
        jac=lambda n, t: F.stack_columns([1.0 / n, np.ones_like(n)]),
        lower=(0.0, 0.0), upper=(np.inf, np.inf),
        guesses=lambda n, y, w: [np.array([float(np.ptp(y)) * float(n.min()), float(y.min())])],
        levels=("c",), asymptote=lambda t: float(t[1]))
    F.register(fam)
    try:
        from test_fitting import measured_curve

        fit = fit_curve(measured_curve("digits_nb").curve, families="hyp2,power-law-floor", bootstrap=20)
        assert "hyp2" in set(fit.table["family"])
        row = fit.table.set_index("family").loc["hyp2"]
        assert row["status"] in ("converged", "poorly determined")
        assert set(row["params"]) == {"a", "c"}
        assert np.isfinite(fit.predict_family("hyp2", [100, 1000])).all()
    finally:
        F.FAMILIES.pop("hyp2", None)


def test_register_rejects_mismatched_bounds():
    with pytest.raises(ValueError):
        F.register(F.Family(name="bad", formula="x", params=("a", "b"), func=lambda n, t: n,
                            jac=None, lower=(0,), upper=(1, 1), guesses=lambda n, y, w: []))
    assert "bad" not in F.FAMILIES
