"""The efficiency figures (curvefit/history/efficiency.py) and the gate built on them."""

import math

import numpy as np
import pandas as pd
import pytest

from curvefit.core.curve import Curve
from curvefit.core.errors import InputError
from curvefit.history.efficiency import compare_curves, decreasing_fit, labels_to_reach, same_splits
from curvefit.history.store import Store

SIZES = [60, 105, 183, 321, 561, 981, 1715, 3000]


def _curve(shift_n=1.0, offset=0.0, seed=0, repeats=4, split_seed=None, noise=0.004):
    """Error 0.13 + 0.6/sqrt(n / shift_n): the model needs ``shift_n`` times the labels."""
    rng = np.random.default_rng(seed)
    rows = []
    for r in range(repeats):
        common = rng.normal(0, noise)  # one test set per repeat: shared over sizes
        for n in SIZES:
            e = 0.13 + 0.6 / math.sqrt(n / shift_n) + offset + common + rng.normal(0, noise / 2)
            rows.append({"size": n, "repeat": r, "test_error": e, "n_test": 1250})
    meta = {"metric": "error"}
    if split_seed is not None:
        meta.update(seed=split_seed, data={"fingerprint": "same"}, split="random", repeats=repeats)
    return Curve.from_table(pd.DataFrame(rows), meta=meta)


def test_decreasing_fit_matches_scikit_learn_isotonic():
    # reference library: scikit-learn's IsotonicRegression(increasing=False)
    from sklearn.isotonic import IsotonicRegression

    rng = np.random.default_rng(3)
    for _ in range(20):
        y = np.sort(rng.random(9))[::-1] + rng.normal(0, 0.1, 9)
        ref = IsotonicRegression(increasing=False).fit_transform(np.arange(9), y)
        assert decreasing_fit(y) == pytest.approx(ref)


def test_labels_to_reach_interpolates_in_log_n_and_clips():
    # arithmetic by hand: halfway in error between 100 and 400 is sqrt(100 * 400) = 200
    n, clipped = labels_to_reach(np.array([100.0, 400.0, 1600.0]), np.array([0.3, 0.2, 0.15]),
                                 np.array([0.25, 0.175, 0.35, 0.1]))
    assert n[:2] == pytest.approx([200.0, 800.0])
    assert n[2:] == pytest.approx([100.0, 1600.0])  # above and below the measured range
    assert clipped.tolist() == [False, False, True, True]


def test_known_factor_and_no_change():
    # a curve of the form a + b / sqrt(n / k) needs k times the labels for the same error
    base = _curve(seed=1)
    same = compare_curves(_curve(seed=2), base, random_state=0)
    assert same.ratio_low <= 1.0 <= same.ratio_high
    assert same.area_low <= 0.0 <= same.area_high
    worse = compare_curves(_curve(shift_n=2.0, seed=2), base, random_state=0)
    interior = [r.ratio for r in worse.sizes if 60 * 2 <= r.size <= 3000 / 2]
    assert np.median(interior) == pytest.approx(2.0, rel=0.35)
    assert worse.ratio > 1.3 and worse.area > 0.005  # unpaired, 4 repeats: wide intervals
    # same seed, same numbers
    again = compare_curves(_curve(shift_n=2.0, seed=2), base, random_state=0)
    assert (again.ratio_low, again.area_high) == (worse.ratio_low, worse.area_high)
    # the same splits (one job's fixed seed): paired by repeat, the ratio's interval
    # clears 1 as well
    paired = compare_curves(_curve(shift_n=2.0, seed=1, split_seed=0),
                            _curve(seed=1, split_seed=0), random_state=0)
    assert paired.paired and paired.ratio_low > 1.0 and paired.area_low > 0.0


def test_pairing_needs_the_same_splits():
    a, b = _curve(split_seed=5, seed=1), _curve(split_seed=5, seed=2, offset=0.004)
    assert same_splits(a, b) and not same_splits(a, _curve(split_seed=6))
    assert compare_curves(b, a).paired and not compare_curves(b, _curve(seed=1)).paired
    with pytest.raises(InputError, match="cannot be paired"):
        compare_curves(b, _curve(seed=1), paired=True)


def test_too_few_sizes_or_no_common_size():
    one = Curve.from_table(pd.DataFrame({"size": [50, 50], "test_error": [0.2, 0.3]}))
    with pytest.raises(InputError, match="fewer than two measured sizes"):
        compare_curves(one, _curve())
    single = Curve.from_table(pd.DataFrame({"size": [60, 105], "test_error": [0.2, 0.3]}))
    with pytest.raises(InputError, match="one repeat and no test-set size"):
        compare_curves(single, _curve())
    other = Curve.from_table(pd.DataFrame({"size": [7, 9], "test_error": [0.2, 0.3],
                                           "n_test": [500, 500]}))
    with pytest.raises(InputError, match="share no measured size"):
        compare_curves(other, _curve())


def test_gate_fails_a_less_efficient_model_and_remembers_it(tmp_path):
    with Store(tmp_path / "h.db") as s:
        r1 = s.record(_curve(seed=1), None, series="s", headline=[], code_version=None)
        assert s.compare(r1).verdict == "first run"
        r2 = s.record(_curve(seed=2), None, series="s", headline=[], code_version=None)
        c2 = s.compare(r2)
        s.record_verdict(c2)
        assert c2.exit_code == 0 and c2.baseline_id == r1
        r3 = s.record(_curve(shift_n=2.5, seed=3), None, series="s", headline=[], code_version=None)
        c3 = s.compare(r3)
        s.record_verdict(c3)
        assert c3.exit_code == 1 and "efficiency_ratio" in c3.regressed
        assert "× the baseline's labels" in c3.message and "REGRESSED" in c3.to_markdown()
        # the next, equally bad run: neither "accepted" nor "previous" forgives it
        r4 = s.record(_curve(shift_n=2.5, seed=4), None, series="s", headline=[], code_version=None)
        assert s.compare(r4).exit_code == 1 and s.compare(r4).baseline_id == r1
        assert s.compare(r4, "previous").baseline_id == r2
        assert s.compare(r4, "previous").exit_code == 1
        # accepted by a person: it becomes the baseline
        s.accept(r3)
        assert s.compare(r4).baseline_id == r3 and s.compare(r4).exit_code == 0
        assert s.verdict(r3) == "regressed"


def test_ratio_beyond_the_measured_range_is_a_bound():
    from curvefit.history.figures import efficiency_figures, ratio_sentence

    base = _curve(seed=1)
    far = compare_curves(_curve(offset=0.2, seed=2), base)  # never gets near the baseline
    assert far.lower_bound and not far.upper_bound
    assert "needs more than" in ratio_sentence(efficiency_figures(far, 1)[0])
    near = compare_curves(_curve(offset=-0.2, seed=2), base)
    assert near.upper_bound and "needs less than" in ratio_sentence(efficiency_figures(near, 1)[0])
