"""Checks of curvefit.bounds against published values, reference libraries and enumeration."""

import itertools
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, stats

from curvefit import bounds
from curvefit.core.errors import InputError

# ---------------------------------------------------------------- VC sample size


def test_worked_example_d3_root_and_first_fixed_point_step():
    # Textbook worked example of the VC sample-complexity bound, from memory:
    # d_vc = 3, eps = delta = 0.1 needs about 30,000 samples (exact root 29,299.4);
    # the fixed-point iteration started at N = 1,000 gives about 21,000 at the first step.
    r = bounds.vc_sample_size(3, 0.1, 0.1, trace=True)
    assert r.root == pytest.approx(29299.4, abs=0.05)
    assert r.n_samples == 29300
    assert r.iterates[0] == 1000
    assert r.iterates[1] == pytest.approx(21000, rel=0.02)
    # the iteration converges to the same root the bracketing solver found
    assert r.iterates[-1] == pytest.approx(r.root, abs=0.05)
    # without trace the answer is the same object type, without the iterates
    plain = bounds.vc_sample_size(3, 0.1, 0.1)
    assert isinstance(plain, bounds.VCSampleSize) and plain.iterates == ()
    assert plain.n_samples == int(plain) == r.n_samples and plain.root == r.root


@pytest.mark.parametrize("d, eps, delta, root", [
    (4, 0.1, 0.1, 38997.2),    # docs/references.md#vc-sample-size-check-values, polynomial growth bound
    (5, 0.1, 0.1, 48915.1),    # docs/references.md#vc-sample-size-check-values
    (10, 0.05, 0.05, 452956.9),  # docs/references.md#vc-sample-size-check-values
])
def test_reference_check_values(d, eps, delta, root):
    r = bounds.vc_sample_size(d, eps, delta, trace=True)
    assert r.root == pytest.approx(root, abs=0.05)
    assert r.n_samples == math.ceil(root)


def test_sample_size_is_the_smallest_integer_satisfying_the_inequality():
    # Computed: N >= (8/eps^2) ln(4((2N)^d + 1)/delta) at the answer and not one below it.
    for d, eps, delta in [(1, 0.2, 0.05), (3, 0.1, 0.1), (7, 0.15, 0.01), (0, 0.1, 0.1)]:
        for growth in ("polynomial", "sauer"):
            n = bounds.vc_sample_size(d, eps, delta, growth=growth).n_samples

            def rhs(m):
                log_m = bounds.log_growth_bound(2 * m, d, kind=growth)
                return 8 / eps ** 2 * (math.log(4 / delta) + log_m)

            assert n >= rhs(n)
            assert n - 1 < rhs(n - 1)
            # the same answer read off the error bar: first N whose bar is <= eps
            assert bounds.vc_error_bar(n, d, delta, growth=growth) <= eps
            assert bounds.vc_error_bar(n - 1, d, delta, growth=growth) > eps


def test_root_agrees_with_an_independent_solver():
    # Reference library: scipy.optimize.fsolve on the same equation from a far start.
    for d, eps, delta in [(2, 0.1, 0.05), (6, 0.05, 0.1)]:
        def f(m):
            return m - 8 / eps ** 2 * math.log(4 * ((2 * m) ** d + 1) / delta)
        other = optimize.fsolve(lambda x: [f(x[0])], [1e7], xtol=1e-12)[0]
        assert bounds.vc_sample_size(d, eps, delta, trace=True).root == pytest.approx(other, rel=1e-9)


def test_sauer_growth_gives_smaller_sizes_than_polynomial():
    # Sauer's sum <= N^d + 1 (Sauer 1972), so its sample size is never larger.
    for d in (1, 3, 10):
        assert (bounds.vc_sample_size(d, 0.1, 0.1, growth="sauer").n_samples
                <= bounds.vc_sample_size(d, 0.1, 0.1).n_samples)


def test_worst_case_is_orders_of_magnitude_above_the_rule_of_thumb():
    # Rule of thumb, common practice: about 10 x d_vc samples are often enough;
    # worst-case bounds are one to two orders of magnitude more conservative
    # (docs/references.md#rule-of-thumb).
    assert bounds.rule_of_thumb_samples(3) == 30
    assert bounds.rule_of_thumb_samples(4, factor=20) == 80
    ratio = bounds.vc_sample_size(3, 0.1, 0.1).n_samples / bounds.rule_of_thumb_samples(3)
    assert ratio > 10


def test_pac_realizable_size():
    # Blumer, Ehrenfeucht, Haussler, Warmuth 1989 (JACM 36(4)), formula from memory:
    # m = max((4/eps) log2(2/delta), (8d/eps) log2(13/eps)); computed by hand for d = 3:
    # (8*3/0.1) * log2(130) = 1685.37 -> 1686; for d = 0 the first term (4/0.1) log2(20) = 172.9.
    assert bounds.pac_sample_size(3, 0.1, 0.1) == 1686
    assert bounds.pac_sample_size(0, 0.1, 0.1) == 173
    # realizable case needs far fewer samples than the agnostic VC bound
    assert bounds.pac_sample_size(3, 0.1, 0.1) < bounds.vc_sample_size(3, 0.1, 0.1).n_samples


# ---------------------------------------------------------------- VC error bar


def test_error_bar_worked_values():
    # Textbook worked example of the VC bound, from memory: d_vc = 1, delta = 0.1:
    # about 0.848 at N = 100 and about 0.301 at N = 1,000.
    assert bounds.vc_error_bar(100, 1, 0.1) == pytest.approx(0.848, abs=5e-4)
    assert bounds.vc_error_bar(1000, 1, 0.1) == pytest.approx(0.301, abs=5e-4)
    arr = bounds.vc_error_bar(np.array([100, 1000]), 1, 0.1)
    assert isinstance(arr, np.ndarray) and arr.shape == (2,)
    np.testing.assert_allclose(arr, [bounds.vc_error_bar(100, 1, 0.1),
                                     bounds.vc_error_bar(1000, 1, 0.1)])


# ---------------------------------------------------------------- growth functions


def _positive_ray_dichotomies(x):
    """Brute force: labelings of points x realised by h(t) = [t > a] over all thresholds a."""
    xs = np.sort(x)
    cuts = np.concatenate([[xs[0] - 1], (xs[:-1] + xs[1:]) / 2, [xs[-1] + 1]])
    return {tuple(x > a) for a in cuts}


def _interval_dichotomies(x):
    """Brute force: labelings realised by h(t) = [a < t < b] over all intervals."""
    xs = np.sort(x)
    cuts = np.concatenate([[xs[0] - 1], (xs[:-1] + xs[1:]) / 2, [xs[-1] + 1]])
    return {tuple((x > a) & (x < b)) for a in cuts for b in cuts}


@pytest.mark.parametrize("n", range(1, 9))
def test_sauer_equals_enumeration_for_thresholds_and_intervals(n):
    # Textbook facts, from memory: positive rays on a line have growth function N + 1
    # (VC dimension 1), intervals N(N+1)/2 + 1 (VC dimension 2); Sauer's bound is tight there.
    x = np.random.default_rng(n).normal(size=n)
    rays, intervals = len(_positive_ray_dichotomies(x)), len(_interval_dichotomies(x))
    assert rays == n + 1
    assert intervals == n * (n + 1) // 2 + 1
    assert bounds.growth_bound(n, 1, kind="sauer") == rays
    assert bounds.growth_bound(n, 2, kind="sauer") == intervals


def _separable(points, labels) -> bool:
    """Is there w with y_i <w, x_i> >= 1 for all i? (a feasibility LP, no bias term)."""
    y = np.where(labels, 1.0, -1.0)
    a_ub = -(y[:, None] * points)
    res = optimize.linprog(np.zeros(points.shape[1]), A_ub=a_ub, b_ub=-np.ones(len(y)),
                           bounds=[(None, None)] * points.shape[1], method="highs")
    return res.status == 0


@pytest.mark.parametrize("n, d", [(3, 1), (4, 2), (5, 2), (6, 2), (5, 3), (6, 3), (3, 4)])
def test_cover_count_matches_lp_enumeration(n, d):
    # Cover 1965 (IEEE Trans. Electronic Computers EC-14(3)): homogeneously separable
    # dichotomies of N points in general position in R^d number 2 sum_{k<d} C(N-1, k).
    # Gaussian points are in general position with probability one.
    pts = np.random.default_rng(100 * n + d).normal(size=(n, d))
    count = sum(_separable(pts, np.array(lab)) for lab in itertools.product([0, 1], repeat=n))
    assert bounds.cover_dichotomies(n, d) == count


def test_cover_with_bias_and_small_sets():
    # Cover 1965: N <= d points are shattered (2^N); lines with a bias in the plane (d + 1 = 3
    # homogeneous coordinates) realise 14 of the 16 labelings of 4 points in general position.
    assert bounds.cover_dichotomies(3, 3) == 8
    assert bounds.cover_dichotomies(4, 3) == 14


def test_growth_bounds_in_log_space_do_not_overflow():
    # Computed: ln(N^d + 1) ~ d ln N for large N; Sauer <= polynomial (Sauer 1972).
    lp = bounds.log_growth_bound(1e12, 1000)
    assert lp == pytest.approx(1000 * math.log(1e12))
    ls = bounds.log_growth_bound(1e6, 500, kind="sauer")
    assert math.isfinite(ls) and ls <= bounds.log_growth_bound(1e6, 500)
    # d >= N: Sauer's sum is 2^N
    assert bounds.log_growth_bound(40, 60, kind="sauer") == pytest.approx(40 * math.log(2))
    assert math.isinf(bounds.growth_bound(1e12, 1000))
    assert bounds.growth_bound(3, 2) == 10.0
    arr = bounds.log_growth_bound(np.array([10, 20, 30]), 2, kind="sauer")
    np.testing.assert_allclose(np.exp(arr), [56, 211, 466])  # 1 + N + N(N-1)/2, computed


@given(n=st.integers(1, 400), d=st.integers(0, 40))
@settings(max_examples=60, deadline=None)
def test_sauer_never_exceeds_polynomial(n, d):
    # Sauer 1972: sum_{i<=d} C(N, i) <= N^d + 1 for N >= 1.
    assert bounds.log_growth_bound(n, d, kind="sauer") <= bounds.log_growth_bound(n, d) + 1e-9


# ---------------------------------------------------------------- test-set error bars


def test_hoeffding_value():
    # Hoeffding 1963, computed: L = 1,000, delta = 0.05 gives sqrt(ln(40)/2000) = 0.04295.
    assert round(bounds.test_error_bar(1000, 0.05), 5) == 0.04295
    assert isinstance(bounds.test_error_bar(1000, 0.05), float)
    arr = bounds.test_error_bar(np.array([100, 1000]), 0.05)
    assert isinstance(arr, np.ndarray)
    assert arr[1] == pytest.approx(0.04295, abs=5e-6)


@pytest.mark.parametrize("n", [1, 2, 7, 30, 100, 1000])
@pytest.mark.parametrize("delta", [0.05, 0.1, 0.32])
def test_clopper_pearson_matches_scipy(n, delta):
    # Reference library: scipy.stats.binomtest(k, n).proportion_ci(method="exact").
    ks = sorted({0, 1, n // 3, n // 2, n - 1, n} & set(range(n + 1)))
    for k in ks:
        ref = stats.binomtest(k, n).proportion_ci(confidence_level=1 - delta, method="exact")
        ci = bounds.test_error_bar(n, delta, method="exact", errors=k)
        assert ci.low == pytest.approx(ref.low, abs=1e-10)
        assert ci.high == pytest.approx(ref.high, abs=1e-10)
    # vectorised over k gives the same numbers
    arr = bounds.test_error_bar(n, delta, method="exact", errors=np.array(ks))
    for i, k in enumerate(ks):
        ref = stats.binomtest(k, n).proportion_ci(confidence_level=1 - delta, method="exact")
        assert arr.low[i] == pytest.approx(ref.low, abs=1e-10)
        assert arr.high[i] == pytest.approx(ref.high, abs=1e-10)


def test_intervals_cover_at_the_stated_level_by_simulation():
    # Common practice (Monte Carlo): Clopper-Pearson and Hoeffding are conservative, so their
    # coverage of the true error is at least 1 - delta (here 0.9; 4,000 draws, sd ~ 0.005).
    rng = np.random.default_rng(0)
    n, p, delta = 60, 0.15, 0.1
    k = rng.binomial(n, p, size=4000)
    ci = bounds.test_error_bar(n, delta, method="exact", errors=k)
    assert np.mean((ci.low <= p) & (p <= ci.high)) >= 1 - delta - 0.015
    half = bounds.test_error_bar(n, delta)
    assert np.mean(np.abs(k / n - p) <= half) >= 1 - delta - 0.015


def test_curve_summary_carries_both_intervals():
    # Integration with Curve.summary(): exact interval at the mean error count, Hoeffding width.
    from curvefit.core.curve import Curve
    table = {"size": [50, 50, 100, 100], "repeat": [0, 1, 0, 1],
             "test_error": [0.2, 0.22, 0.1, 0.12], "train_error": [0.1, 0.1, 0.05, 0.06],
             "n_test": [200, 200, 200, 200], "n_test_errors": [40, 44, 20, 24]}
    s = Curve.from_table(pd.DataFrame(table)).summary(interval=0.95)
    row = s[s["size"] == 100].iloc[0]
    ref = stats.binomtest(22, 200).proportion_ci(method="exact")
    assert row["test_low"] == pytest.approx(ref.low)
    assert row["test_high"] == pytest.approx(ref.high)
    assert row["test_hoeffding"] == pytest.approx(math.sqrt(math.log(40) / 400))


# ---------------------------------------------------------------- test-set sizes


def test_hoeffding_test_size_is_smallest():
    # Hoeffding 1963, computed: L = ceil(ln(2/delta)/(2 eps^2)); ln(40)/(2*0.05^2) = 737.8.
    assert bounds.test_sample_size(0.05, 0.05) == 738
    for eps, delta in [(0.01, 0.05), (0.03, 0.2), (0.1, 0.01)]:
        n = bounds.test_sample_size(eps, delta)
        assert bounds.test_error_bar(n, delta) <= eps < bounds.test_error_bar(n - 1, delta)


def test_exact_test_size_zero_errors_closed_form():
    # Clopper-Pearson 1934 at k = 0: the upper limit is 1 - (delta/2)^(1/n), so the
    # smallest n with half-width <= eps is ceil(ln(delta/2)/ln(1 - eps)) (derived).
    for eps, delta in [(0.1, 0.05), (0.01, 0.05), (0.03, 0.1)]:
        expected = math.ceil(math.log(delta / 2) / math.log(1 - eps))
        assert bounds.test_sample_size(eps, delta, method="exact", p=0.0) == expected


def test_exact_test_size_against_scipy_interval():
    # Reference library: at the returned size (rounded to an integer count) the
    # scipy.stats exact interval reaches about eps from p; one point fewer does not fit.
    for p, eps, delta in [(0.02, 0.01, 0.05), (0.1, 0.03, 0.05), (0.5, 0.05, 0.1)]:
        n = bounds.test_sample_size(eps, delta, method="exact", p=p)
        for size, fits in [(n, True), (n - 1, False)]:
            ci = bounds.clopper_pearson(p * size, size, delta)
            assert (max(p - ci.low, ci.high - p) <= eps) is fits
        k = round(p * n)
        ref = stats.binomtest(k, n).proportion_ci(confidence_level=1 - delta, method="exact")
        assert max(k / n - ref.low, ref.high - k / n) == pytest.approx(eps, rel=0.1)
        # exact binomial never needs more than the distribution-free Hoeffding size
        assert n <= bounds.test_sample_size(eps, delta)
    assert bounds.test_sample_size(0.05, 0.05, method="exact") == \
        bounds.test_sample_size(0.05, 0.05, method="exact", p=0.5)


def test_relative_error_rule_of_guyon_et_al():
    # Guyon, Makhoul, Schwartz, Vapnik 1998 (IEEE TPAMI 20(1)), abstract: at an error rate
    # of about 1%, about 10,000 test examples give 95% confidence of a 20% relative error;
    # rule of thumb L ~ 100/p.
    n = bounds.relative_error_test_size(0.01, rel_error=0.2, delta=0.05)
    assert n == pytest.approx(10_000, rel=0.06)
    for p in (0.001, 0.005, 0.01):  # the rule is for small p, where 1 - p ~ 1
        assert bounds.relative_error_test_size(p) == pytest.approx(100 / p, rel=0.06)
    # Monte Carlo (common practice): the relative error is within 20% about 95% of the time.
    rng = np.random.default_rng(1)
    k = rng.binomial(n, 0.01, size=20000)
    assert np.mean(np.abs(k / n - 0.01) <= 0.2 * 0.01) == pytest.approx(0.95, abs=0.01)


# ---------------------------------------------------------------- monotonicity (properties)


@given(d=st.integers(0, 30), e1=st.floats(0.02, 0.5), e2=st.floats(0.02, 0.5),
       delta=st.floats(0.001, 0.5))
@settings(max_examples=40, deadline=None)
def test_vc_sample_size_monotone_in_eps(d, e1, e2, delta):
    lo, hi = sorted((e1, e2))
    assert bounds.vc_sample_size(d, hi, delta).n_samples <= bounds.vc_sample_size(d, lo, delta).n_samples


@given(d1=st.integers(0, 40), d2=st.integers(0, 40), eps=st.floats(0.02, 0.5),
       dl1=st.floats(0.001, 0.9), dl2=st.floats(0.001, 0.9))
@settings(max_examples=40, deadline=None)
def test_vc_sample_size_monotone_in_d_and_delta(d1, d2, eps, dl1, dl2):
    (da, db), (sa, sb) = sorted((d1, d2)), sorted((dl1, dl2))
    n = lambda d, delta: bounds.vc_sample_size(d, eps, delta).n_samples  # noqa: E731
    assert n(da, sa) <= n(db, sa)
    assert n(da, sb) <= n(da, sa)


@given(n1=st.floats(1, 1e7), n2=st.floats(1, 1e7), d=st.integers(0, 50),
       growth=st.sampled_from(["polynomial", "sauer"]))
@settings(max_examples=60, deadline=None)
def test_vc_error_bar_decreases_with_n(n1, n2, d, growth):
    a, b = sorted((n1, n2))
    assert bounds.vc_error_bar(b, d, 0.05, growth=growth) <= \
        bounds.vc_error_bar(a, d, 0.05, growth=growth) + 1e-12


@given(n=st.integers(1, 500), data=st.data())
@settings(max_examples=40, deadline=None)
def test_exact_interval_contains_estimate_and_grows_with_k(n, data):
    k = data.draw(st.integers(0, n))
    ci = bounds.test_error_bar(n, 0.05, method="exact", errors=k)
    assert ci.low <= k / n <= ci.high
    if k < n:
        nxt = bounds.test_error_bar(n, 0.05, method="exact", errors=k + 1)
        assert nxt.low >= ci.low and nxt.high >= ci.high
    wider = bounds.test_error_bar(n, 0.01, method="exact", errors=k)
    assert wider.low <= ci.low and wider.high >= ci.high


@given(e1=st.floats(0.005, 0.5), e2=st.floats(0.005, 0.5), p=st.floats(0, 1),
       method=st.sampled_from(["hoeffding", "exact"]))
@settings(max_examples=40, deadline=None)
def test_test_sample_size_monotone_in_eps(e1, e2, p, method):
    lo, hi = sorted((e1, e2))
    assert bounds.test_sample_size(hi, 0.05, method=method, p=p) <= \
        bounds.test_sample_size(lo, 0.05, method=method, p=p)


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize("call", [
    lambda: bounds.vc_sample_size(3, 0.0, 0.1),
    lambda: bounds.vc_sample_size(3, -0.1, 0.1),
    lambda: bounds.vc_sample_size(3, 0.1, 1.0),
    lambda: bounds.vc_sample_size(3, 0.1, 0.0),
    lambda: bounds.vc_sample_size(-1, 0.1, 0.1),
    lambda: bounds.vc_sample_size(2.5, 0.1, 0.1),
    lambda: bounds.vc_sample_size(3, 0.1, 0.1, growth="cubic"),
    lambda: bounds.vc_error_bar(0, 1, 0.1),
    lambda: bounds.vc_error_bar(100, 1, 1.5),
    lambda: bounds.growth_bound(-1, 2),
    lambda: bounds.test_error_bar(0, 0.05),
    lambda: bounds.test_error_bar(100, 0.05, method="exact"),
    lambda: bounds.test_error_bar(100, 0.05, method="exact", errors=101),
    lambda: bounds.test_error_bar(100, 0.05, method="exact", errors=2.5),
    lambda: bounds.test_error_bar(100, 0.05, method="wald"),
    lambda: bounds.test_sample_size(0, 0.05),
    lambda: bounds.test_sample_size(0.1, 0.05, method="exact", p=1.5),
    lambda: bounds.relative_error_test_size(0.0),
    lambda: bounds.pac_sample_size(3, 0.1, 2),
    lambda: bounds.cover_dichotomies(0, 2),
    lambda: bounds.rule_of_thumb_samples(-3),
    lambda: bounds.vc_sample_size([3, 4], 0.1, 0.1),
    lambda: bounds.vc_sample_size("three", 0.1, 0.1),
])
def test_bad_input_raises_input_error(call):
    with pytest.raises(InputError):
        call()


# ---------------------------------------------------------------- range and hardening
def _exact_vc_answer(d: int, eps: str, delta: str, near: int) -> int:
    """The smallest N with N >= (8/eps^2) ln(4 ((2N)^d + 1)/delta), in 60-digit decimals
    (independent of the float code), searched on whole numbers around ``near``."""
    from decimal import Decimal, localcontext

    with localcontext() as ctx:
        ctx.prec = 60
        e, dl = Decimal(eps), Decimal(delta)

        def ok(n: int) -> bool:
            two_n = 2 * Decimal(n)
            # ln((2N)^d + 1) = d ln 2N + ln(1 + (2N)^-d); the second term is below 1e-60 here
            rhs = 8 / (e * e) * ((4 / dl).ln() + d * two_n.ln())
            return Decimal(n) >= rhs

        lo, hi = near // 2, near * 2
        assert not ok(lo) and ok(hi)
        while hi - lo > 1:
            mid = (lo + hi) // 2
            lo, hi = (lo, mid) if ok(mid) else (mid, hi)
        return hi


@pytest.mark.parametrize("d, eps, delta", [(10 ** 12, "0.1", "0.05"), (3, "1e-7", "0.05"),
                                           (10 ** 15, "1e-8", "1e-10")])
def test_huge_dimensions_and_tiny_eps_finish_at_the_exact_answer(d, eps, delta):
    # The issue: a +1 walk near the root never finished for d >= 1e12 or eps <= 1e-7.
    # Checked against the inequality itself evaluated in 60-digit decimals; floats carry
    # 16 digits, so the answer may differ from the exact one in the 15th digit at most.
    n = bounds.vc_sample_size(d, float(eps), float(delta)).n_samples
    exact = _exact_vc_answer(d, eps, delta, n)
    assert abs(n - exact) <= 1e-14 * exact


@pytest.mark.parametrize("n, d", [(60_000, 25_000), (100_000, 49_000), (41_000, 20_600)])
def test_sauer_sum_with_many_terms_is_an_upper_bound_close_to_the_exact_sum(n, d):
    # Sauer's lemma, sum_{i<=d} C(n, i) (docs/references.md#growth-function), exactly in
    # Python integers; past SAUER_EXACT_TERMS terms the code bounds the small terms by a
    # geometric series (or by 2^n when 2d >= n): never below the sum, and close to it.
    total, term = 0, 1
    for i in range(d + 1):
        total += term
        term = term * (n - i) // (i + 1)
    exact = math.log(total)
    value = bounds.log_growth_bound(n, d, kind="sauer")
    assert d >= bounds.SAUER_EXACT_TERMS
    assert value >= exact - 1e-9 * exact
    assert value <= exact + (math.log(2) if 2 * d >= n else 1e-9 * exact)


def test_cover_count_equals_the_binomial_sum_and_refuses_astronomical_work():
    # Cover 1965: C(n, d) = 2 sum_{k<d} C(n-1, k) (docs/references.md#cover-count)
    for n, d in [(10, 3), (50, 7), (200, 200), (7, 30)]:
        assert bounds.cover_dichotomies(n, d) == 2 * sum(math.comb(n - 1, k) for k in range(d))
    with pytest.raises(InputError, match="too large to compute exactly"):
        bounds.cover_dichotomies(10 ** 7, 10 ** 6)


def test_hoeffding_needs_whole_test_points_and_a_bar_over_one_is_returned_as_computed():
    # The issue: test_error_bar(0.5, 0.05) gave 1.92, from half a test point.
    with pytest.raises(InputError, match="n_test"):
        bounds.test_error_bar(0.5, 0.05)
    # one test point: sqrt(ln 40 / 2) = 1.358 (docs/references.md#hoeffding-test-set), a
    # vacuous bar (an error rate lies in [0, 1]); the command line marks it so
    assert bounds.test_error_bar(1, 0.05) == pytest.approx(math.sqrt(math.log(40) / 2))


@pytest.mark.parametrize("call, words", [
    (lambda: bounds.vc_sample_size(3, 1e-300, 0.05), "beyond 1e\\+300"),
    (lambda: bounds.vc_sample_size(3, 0.1, 1e-320), "at least 1e-300"),
    (lambda: bounds.vc_error_bar([10, 20], 1, [0.1, 0.2, 0.3]), "different lengths"),
    (lambda: bounds.test_sample_size(1e-200, 0.05), "beyond 1e\\+300"),
    (lambda: bounds.pac_sample_size(3, 1e-300, 0.05), "beyond 1e\\+300"),
    (lambda: bounds.rule_of_thumb_samples(10 ** 15, 1e300), "beyond 1e\\+300"),
    (lambda: bounds.log_growth_bound(10, 2 ** 60), "2\\*\\*53"),
    (lambda: bounds.hoeffding_half_width([], 0.05), "1 to 1,000,000"),
])
def test_outside_the_representable_range_is_one_clear_input_error(call, words):
    with pytest.raises(InputError, match=words):
        call()
