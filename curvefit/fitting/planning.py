"""What buying more labels is worth: expected test error after each purchase, with intervals.

Pure numerics on a fitted curve (``CurveFit``); imports neither the command line nor I/O.
"""

from __future__ import annotations

import math
import warnings
from typing import Iterable

import numpy as np
import pandas as pd

from curvefit.core.errors import FitWarning, InputError


def plan_purchase(fit, *, current_n, extra: Iterable[float], cost_per_label=None,
                  interval: float = 0.9) -> pd.DataFrame:
    """Expected test error after buying each amount of extra labelled samples.

    Parameters
    ----------
    fit : CurveFit
        A fit of the test error (``on="test"``).
    current_n : int
        Labelled samples you have now.
    extra : iterable of int
        Amounts of extra labels to price (each > 0).
    cost_per_label : float, optional
        Price of one label; the ``cost`` column is NaN without it.
    interval : float
        Level of the bootstrap percentile interval on the expected error.

    Returns
    -------
    pandas.DataFrame
        One row per amount, ascending: ``extra, total_n, test_error, low, high, cost,
        drop_per_1000``. ``drop_per_1000`` is the marginal fall of the expected test
        error per 1,000 extra labels from the previous row (the first row: from
        ``current_n``), so a purchase stops paying when it gets small.

    Notes
    -----
    The figures extrapolate the chosen curve family; beyond 10× the largest measured
    size they are flagged with a ``FitWarning``. Estimates are statistical, not
    guarantees.

    References
    ----------
    .. [1] R. L. Figueroa, Q. Zeng-Treitler, S. Kandula and L. H. Ngo, "Predicting
           sample size required for classification performance", BMC Medical
           Informatics and Decision Making 12:8, 2012 (the learning curve as a
           planning tool for annotation effort).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> from curvefit.core.curve import Curve
    >>> from curvefit.fitting.engine import fit_curve
    >>> n = np.repeat([100, 200, 400, 800, 1600], 3)
    >>> e = 0.1 + 3 * n ** -0.5 + np.tile([-0.003, 0.0, 0.003], 5)
    >>> fit = fit_curve(Curve.from_table(pd.DataFrame({"size": n, "test_error": e})),
    ...                 families="power-law-floor", bootstrap=50)
    >>> plan = plan_purchase(fit, current_n=1600, extra=[1000, 5000], cost_per_label=0.5)
    >>> plan["cost"].tolist()
    [500.0, 2500.0]
    >>> bool(plan["test_error"].is_monotonic_decreasing)
    True
    """
    if getattr(fit, "on", None) != "test":
        raise InputError("plan_purchase needs a fit of the test error (fit_curve(..., on='test'))")
    try:
        current_n = float(current_n)
    except (TypeError, ValueError):
        raise InputError(f"current_n must be a number of labelled samples, got {current_n!r}") from None
    if not math.isfinite(current_n) or current_n <= 0:
        raise InputError("current_n must be a positive number of labelled samples")
    try:
        amounts = sorted({float(x) for x in np.atleast_1d(np.asarray(list(extra), dtype=float))})
    except (TypeError, ValueError):
        raise InputError("extra must be a list of label counts, e.g. [1000, 5000]") from None
    if not amounts:
        raise InputError("extra is empty; give at least one amount of labels to buy")
    if any(not math.isfinite(x) or x <= 0 for x in amounts):
        raise InputError("every extra amount must be a positive number of labels")
    if cost_per_label is not None:
        try:
            cost_per_label = float(cost_per_label)
        except (TypeError, ValueError):
            raise InputError(f"cost per label must be a number, got {cost_per_label!r}") from None
        if not math.isfinite(cost_per_label) or cost_per_label < 0:
            raise InputError("cost per label must be a finite number >= 0")

    extra_arr = np.array(amounts)
    totals = current_n + extra_arr
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FitWarning)
        pred = fit.predict(np.concatenate([[current_n], totals]), interval=interval)
    for w in caught:  # pass the extrapolation caution on to the caller once
        warnings.warn(str(w.message), FitWarning, stacklevel=2)
        break
    est = pred["estimate"].to_numpy()
    now, after = est[0], est[1:]
    prev_err = np.concatenate([[now], after[:-1]])
    prev_extra = np.concatenate([[0.0], extra_arr[:-1]])
    drop = (prev_err - after) / (extra_arr - prev_extra) * 1000.0
    cost = extra_arr * cost_per_label if cost_per_label is not None else np.full(len(extra_arr), math.nan)
    return pd.DataFrame({
        "extra": extra_arr.astype(np.int64) if np.all(extra_arr == np.round(extra_arr)) else extra_arr,
        "total_n": totals.astype(np.int64) if np.all(totals == np.round(totals)) else totals,
        "test_error": after,
        "low": pred["low"].to_numpy()[1:],
        "high": pred["high"].to_numpy()[1:],
        "cost": cost,
        "drop_per_1000": drop,
    })


def labels_for_budget(budget, cost_per_label) -> int:
    """Whole labels a budget buys at a price per label.

    Examples
    --------
    >>> labels_for_budget(1000, 0.3)
    3333
    """
    try:
        budget, cost_per_label = float(budget), float(cost_per_label)
    except (TypeError, ValueError):
        raise InputError("budget and cost per label must be numbers") from None
    if not math.isfinite(budget) or budget < 0:
        raise InputError("budget must be a finite number >= 0")
    if not math.isfinite(cost_per_label) or cost_per_label <= 0:
        raise InputError("cost per label must be > 0 to turn a budget into labels")
    # a small tolerance so 1000 / 0.1 is 10,000 labels, not 9,999
    return int(math.floor(budget / cost_per_label + 1e-9))
