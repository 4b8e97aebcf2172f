"""Label purchases: expected error after buying more, its cost and marginal value."""

import math

import numpy as np
import pytest
from test_fitting import measured_curve

from curvefit.core.errors import InputError
from curvefit.fitting.engine import fit_curve
from curvefit.fitting.planning import labels_for_budget, plan_purchase


@pytest.fixture(scope="module")
def knn_fit():
    # k-NN on scikit-learn's bundled digits: a curve still falling at the largest size
    return fit_curve(measured_curve("digits_knn").curve, bootstrap=60, random_state=0)


def test_plan_columns_and_values(knn_fit):
    now = knn_fit.largest_size
    plan = plan_purchase(knn_fit, current_n=now, extra=[5000, 1000, 2000], cost_per_label=0.25)
    assert list(plan.columns) == ["extra", "total_n", "test_error", "low", "high", "cost",
                                  "drop_per_1000"]
    assert plan["extra"].tolist() == [1000, 2000, 5000]  # sorted
    assert plan["total_n"].tolist() == [now + 1000, now + 2000, now + 5000]
    assert plan["cost"].tolist() == [250.0, 500.0, 1250.0]
    pred = knn_fit.predict(plan["total_n"].to_numpy(dtype=float))
    np.testing.assert_allclose(plan["test_error"], pred["estimate"])
    np.testing.assert_allclose(plan["low"], pred["low"])
    assert (plan["low"] <= plan["test_error"]).all() and (plan["test_error"] <= plan["high"]).all()


def test_drop_per_1000_is_the_marginal_slope(knn_fit):
    now = knn_fit.largest_size
    plan = plan_purchase(knn_fit, current_n=now, extra=[1000, 3000])
    e0 = knn_fit.error_at(now).estimate
    e1, e2 = plan["test_error"]
    assert plan["drop_per_1000"].iloc[0] == pytest.approx((e0 - e1) / 1000 * 1000)
    assert plan["drop_per_1000"].iloc[1] == pytest.approx((e1 - e2) / 2000 * 1000)
    # a falling curve with diminishing returns: later labels are worth less
    assert plan["drop_per_1000"].iloc[0] >= plan["drop_per_1000"].iloc[1] >= 0
    assert plan["cost"].isna().all()


def test_budget_to_labels():
    assert labels_for_budget(1000, 0.1) == 10000
    assert labels_for_budget(999.99, 1) == 999
    assert labels_for_budget(0, 2) == 0
    for bad in [(-1, 1), (10, 0), (math.inf, 1), ("x", 1)]:
        with pytest.raises(InputError):
            labels_for_budget(*bad)


def test_bad_plans(knn_fit):
    for kwargs in [dict(current_n=0, extra=[10]), dict(current_n=100, extra=[]),
                   dict(current_n=100, extra=[-5]), dict(current_n=100, extra=[10], cost_per_label=-1),
                   dict(current_n="many", extra=[10])]:
        with pytest.raises(InputError):
            plan_purchase(knn_fit, **kwargs)
    gap_fit = fit_curve(measured_curve("digits_knn").curve, on="gap", bootstrap=0)
    with pytest.raises(InputError):
        plan_purchase(gap_fit, current_n=100, extra=[10])


def test_money_reads_with_sensible_precision():
    # common practice: whole units from 100, cents from 1, two significant figures below
    from curvefit.core.formatting import format_money

    assert format_money(0.001) == "0.0010"  # a price per label of a tenth of a cent
    assert format_money(0.8275) == "0.83" and format_money(12.5) == "12.50"
    assert format_money(2500.4) == "2,500"
    assert format_money(3e-9) == "less than 0.0001"  # tiny amounts say so, never "0.00"
    assert format_money(0) == "0"


def test_no_number_prints_in_e_notation():
    import re

    from curvefit.core.formatting import (
        format_capacity,
        format_count,
        format_error,
        format_money,
        format_number,
    )

    e_notation = re.compile(r"\d[eE][+-]?\d")
    for power in range(-30, 31):
        for mantissa in (1.0, 2.5, 9.999):
            v = mantissa * 10.0 ** power
            for text in (format_number(v), format_number(-v, 3), format_error(v), format_error(v, "mse"),
                         format_count(v), format_capacity(v), format_money(v)):
                assert not e_notation.search(text), (v, text)
