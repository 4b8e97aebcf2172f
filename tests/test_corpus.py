"""The stored learning-curve corpus (corpus/) and the forecast benchmark that reads it.

Fast checks only: the corpus is built by scripts/build_corpus.py (not in CI) and the
full benchmark is scripts/bench_forecast.py; here a tiny version runs on two curves.
"""

from __future__ import annotations

import importlib.util
import json
import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "corpus"


def _script(name: str):
    spec = importlib.util.spec_from_file_location(f"_corpus_{name}", ROOT / "scripts" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def bench():
    return _script("bench_forecast")


@pytest.fixture(scope="module")
def builder():
    return _script("build_corpus")


@pytest.fixture(scope="module")
def corpus(bench):
    return bench.load_corpus(CORPUS)


def test_corpus_loads_with_the_expected_columns(corpus, builder):
    points, index = corpus
    assert index["format"] == builder.FORMAT
    assert list(index["columns"]) == builder.COLUMNS
    for path in sorted((CORPUS / "curves").glob("*.csv.gz")):
        assert list(pd.read_csv(path, nrows=1).columns) == builder.COLUMNS, path.name
    assert set(points["task"]) <= {"classification", "regression"}
    assert set(points["source"]) <= {"sklearn", "statsmodels", "generated"}
    assert set(points["status"]) <= {"ok", "failed"}
    assert (points["size"] > 0).all() and (points["size"] <= points["pool"]).all()


def test_the_corpus_is_small():
    total = sum(p.stat().st_size for p in (CORPUS / "curves").glob("*.csv.gz"))
    assert total < 5 * 2 ** 20


def test_index_and_files_agree(corpus):
    points, index = corpus
    stored = {f"{d}/{m}" for d, m in points[["dataset", "model"]].drop_duplicates().itertuples(index=False)}
    assert stored == set(index["pairs"])
    for key, entry in index["pairs"].items():
        rows = points[(points["dataset"] == entry["dataset"]) & (points["model"] == entry["model"])]
        assert sorted(rows["size"].unique().tolist()) == entry["sizes"], key
        assert entry["dataset"] in index["tables"]
        assert index["tables"][entry["dataset"]]["source"] == entry["source"]


def test_every_curve_has_five_sizes_and_five_repeats(corpus):
    points, _ = corpus
    for (dataset, model), rows in points.groupby(["dataset", "model"]):
        ok = rows[rows["status"] == "ok"]
        assert ok["size"].nunique() >= 5, (dataset, model)
        repeats = rows.groupby("size")["repeat"].nunique()
        assert repeats.min() >= 5, (dataset, model)
        assert rows["size"].max() == rows["pool"].iloc[0], (dataset, model)
        # nearly every cell finished
        assert (rows["status"] == "ok").mean() >= 0.9, (dataset, model)


def test_sources_and_models_are_varied(corpus):
    points, _ = corpus
    assert {"sklearn", "statsmodels", "generated"} <= set(points["source"])
    assert points["model"].nunique() >= 6


def test_generated_tasks_carry_the_true_error(corpus, builder):
    points, index = corpus
    gen = points[points["source"] == "generated"]
    assert not gen.empty
    assert set(gen["dataset"]) <= set(builder.GENERATORS)
    assert gen["true_error"].notna().all()
    assert (gen["true_error_sem"] >= 0).all()
    real = points[points["source"] != "generated"]
    assert real["true_error"].isna().all()
    for name in gen["dataset"].unique():
        assert index["tables"][name]["formula"], name
    # the true error falls with size for a well-specified model: the logistic task
    lin = gen[(gen["dataset"] == "gen_logistic_noise") & (gen["model"] == "linear")]
    if not lin.empty:
        truth = lin.groupby("size")["true_error"].mean()
        assert truth.iloc[-1] < truth.iloc[0]


def test_regression_generators_have_the_stated_noise(builder):
    # the stated noise variance is the lowest reachable MSE: y minus the noiseless part
    rng = np.random.default_rng(0)
    X, y = builder.gen_linear_regression(20000, rng)
    resid = y - X @ (1.0 / np.arange(1, 11))
    assert abs(resid.var() - 1.0) < 0.05


def test_exact_error_of_the_simulated_rule(bench):
    # the true rule errs exactly on the flipped labels; an orthogonal rule is a coin flip
    assert bench.exact_error(bench.BETA[None, :], np.array([0.0]))[0] == pytest.approx(0.1, abs=1e-9)
    ortho = np.array([[1.0, 1.5, 0.0, 0.0, 0.0]])  # beta·ortho = 0
    assert bench.exact_error(ortho, np.array([0.0]))[0] == pytest.approx(0.5, abs=1e-6)
    # against a Monte Carlo estimate on fresh draws
    rng = np.random.default_rng(1)
    w, b = np.array([[1.0, -0.5, 0.5, 0.2, 0.0]]), np.array([0.1])
    X, y = bench.generate_logistic(200_000, rng)
    mc = np.mean((X @ w[0] + b[0] > 0).astype(int) != y)
    assert bench.exact_error(w, b)[0] == pytest.approx(mc, abs=0.004)


def test_crossing_interpolates_in_log_size(bench):
    assert bench.crossing([10, 100], [0.3, 0.1], 0.2) == pytest.approx(math.sqrt(1000))
    assert bench.crossing([10, 100], [0.3, 0.25], 0.2) == math.inf
    assert bench.crossing([10, 100], [0.1, 0.05], 0.2) == 10


def test_tiny_benchmark_on_two_curves(bench, corpus):
    points, _ = corpus
    pairs = [("iris", "linear"), ("gen_logistic_noise", "linear")]
    chosen = [points[(points["dataset"] == d) & (points["model"] == m)] for d, m in pairs]
    chosen = [c for c in chosen if not c.empty]
    assert chosen
    forecasts, answers = [], []
    for rows in chosen:
        f, a = bench.evaluate_curve(rows, bootstrap=20)
        forecasts += f
        answers += a
    fc, an = pd.DataFrame(forecasts), pd.DataFrame(answers)
    assert set(fc["horizon"]) >= {"pool", "2x"}
    assert fc["covered"].isin([True, False]).all()
    assert (fc["low"] <= fc["high"]).all()
    assert np.isfinite(fc["power_law_floor"]).all()
    if "covered_truth" in fc:
        gen = fc[fc["source"] == "generated"]
        assert gen["truth"].notna().all()
    tables = bench.summarise(fc, an)
    assert "headline" in tables and "per model" in tables
    text = bench.markdown(tables["headline"])
    assert text.startswith("| cut | task |") and "ratio to power-law-floor" in text


def test_leave_one_dataset_out_never_mixes(bench, corpus):
    points, _ = corpus
    seen = []
    for name, rest, held in bench.leave_one_dataset_out(points):
        assert set(held["dataset"]) == {name}
        assert name not in set(rest["dataset"])
        seen.append(name)
    assert sorted(seen) == sorted(points["dataset"].unique())


def test_results_of_the_baseline_are_stored():
    results = CORPUS / "results"
    md = results / "baseline-corpus.md"
    assert md.is_file()
    assert "ratio to power-law-floor" in md.read_text()
    assert json.loads((CORPUS / "index.json").read_text())["pairs"]


def test_results_of_the_shipped_calibration_are_stored():
    """The README's after-figures come from these files: every data set scored with the
    correction fitted on the others (scripts/calibrate_forecasts.py --answers)."""
    results = CORPUS / "results"
    forecasts = pd.read_csv(results / "calibrated-forecasts.csv")
    assert forecasts[["dataset", "model"]].drop_duplicates().shape[0] == 128
    forecasts = forecasts[forecasts["cut"] == "1/4"]      # the README's headline cut
    at_pool = forecasts[forecasts["horizon"] == "pool"]
    mae = lambda col: float(np.mean(np.abs(at_pool[col] - at_pool["measured"])))  # noqa: E731
    assert mae("estimate") / mae("power_law_floor") == pytest.approx(0.687, abs=0.005)
    assert mae("estimate") / mae("last_value") == pytest.approx(0.496, abs=0.005)
    samples = pd.read_csv(results / "calibrated-samples.csv")
    samples = samples[(samples["reference"] == "measured") & (samples["cut"] == "1/4")]
    assert float(np.median(np.abs(samples["ln_ratio"]))) == pytest.approx(0.59, abs=0.005)
    assert 0.85 <= samples["covered"].mean() <= 1.0


def _law_curve(name: str, floor: float, noise: float, seed: int) -> pd.DataFrame:
    """A generated curve whose true error is floor + n^-0.5 at 16 sizes 100–12,800
    (5 repeats, test error = truth + Gaussian noise of sd ``noise``)."""
    rng = np.random.default_rng(seed)
    sizes = np.round(100 * 2 ** (np.arange(16) * 7 / 15)).astype(int)
    size = np.repeat(sizes, 5)
    truth = floor + size ** -0.5
    return pd.DataFrame({"dataset": name, "model": "linear", "task": "classification",
                         "source": "generated", "pool": int(sizes[-1]), "size": size,
                         "repeat": np.tile(np.arange(5), len(sizes)), "status": "ok",
                         "true_error": truth,
                         "test_error": truth + noise * rng.standard_normal(len(size))})


def test_the_resolution_of_the_scores(bench):
    """Without test noise the measured curve is the true curve: the true n read again
    from re-drawn repeats, and the true curve's own answers, are exact; with noise both
    move. The ratio's interval over data sets collapses when every data set has the
    same ratio."""
    for noise, exact in ((0.0, True), (0.004, False)):
        points = pd.concat([_law_curve(f"d{i}", 0.02 * i, noise, i) for i in range(4)])
        answers, forecasts = [], []
        for (dataset, model), rows in bench.curve_groups(points):
            ok = rows.groupby("size")["test_error"].mean()
            pool = float(rows["pool"].iloc[0])
            for cut, fitted in bench.cut_sizes(ok.index.to_numpy(float), pool):
                for k, target, n_true in bench.targets(ok, ok, float(fitted.max()), pool):
                    for reference in ("measured", "truth"):
                        answers.append(dict(dataset=dataset, model=model, cut=cut,
                                            horizon=f"{k}x", reference=reference, ln_ratio=0.1))
                forecasts.append(dict(dataset=dataset, cut=cut, horizon="pool", measured=0.1,
                                      estimate=0.11, last_value=0.12, power_law_floor=0.105))
        table = bench.resolution(points, pd.DataFrame(forecasts), pd.DataFrame(answers))
        table = table.set_index(table.columns[0])
        assert list(table.columns) == ["1/4", "1/10"]
        for cut in table.columns:
            row = table[cut]
            assert row["samples needed, all targets: curvefit"].startswith("0.1 (")
            noise = [float(row[m]) for m in (
                "the true n re-read with the repeats drawn again",
                "the same targets answered by the exact true curve",
                "the same targets answered by the whole measured curve")]
            assert all(x == 0 for x in noise) == exact and all(x > 0 for x in noise) != exact
            assert row["MAE ratio to last value (90% over data sets)"] == "0.5 (0.5–0.5)"


def test_rescore_rebuilds_the_stored_tables(bench, tmp_path):
    """--rescore summarises the stored results again under the stored report's title."""
    results = tmp_path / "results"
    results.mkdir()
    (tmp_path / "curves").mkdir()
    for name in ("index.json",):
        (tmp_path / name).write_text((CORPUS / name).read_text())
    for path in sorted((CORPUS / "curves").glob("i*.csv.gz")):
        (tmp_path / "curves" / path.name).write_bytes(path.read_bytes())
    for kind in ("forecasts", "samples"):
        table = pd.read_csv(CORPUS / "results" / f"calibrated-{kind}.csv")
        table[table["dataset"] == "iris"].to_csv(results / f"x-{kind}.csv", index=False)
    (results / "x-corpus.md").write_text("## a title kept\n\n### headline\n\nold\n")
    assert bench.main(["--corpus", str(tmp_path), "--label", "x", "--rescore"]) == 0
    text = (results / "x-corpus.md").read_text()
    assert text.startswith("## a title kept\n") and "old" not in text
    assert "### what the scores can resolve" in text
    assert "or MAE ratio | 1/4 |\n" in text       # iris is cut at 1/4 only
    with pytest.raises(SystemExit, match="no stored results for --label y"):
        bench.main(["--corpus", str(tmp_path), "--label", "y", "--rescore"])


@pytest.fixture(scope="module")
def calibrate():
    return _script("calibrate_forecasts")


def _parts(n_rows: int, power: float, slope: float, seed: int = 0, wild_share: float = 0.1,
           noise: float = 0.0) -> pd.DataFrame:
    """Scored sizes whose measured log change beyond the largest fitted size is exactly
    power·(forecast log change) + slope·ln(n/N), plus a few wild curves (regime changes)."""
    rng = np.random.default_rng(seed)
    n_fit = rng.choice([100.0, 400.0], n_rows)
    size = n_fit * rng.choice([2.0, 4.0, 10.0], n_rows)
    top = rng.uniform(0.05, 0.4, n_rows)
    estimate = top * np.exp(-rng.uniform(0.0, 0.8, n_rows))
    measured = top * np.exp(power * np.log(estimate / top) + slope * np.log(size / n_fit))
    measured += noise * rng.standard_normal(n_rows)
    wild = rng.random(n_rows) < wild_share
    measured[wild] = top[wild] * rng.uniform(1.0, 2.0, wild.sum())
    zeros = np.zeros(n_rows)
    return pd.DataFrame({"dataset": rng.choice(list("abcdef"), n_rows), "size": size,
                         "model": rng.choice(["linear", "knn"], n_rows),
                         "n_fit": n_fit, "at_largest": top, "estimate": estimate,
                         "measured": measured, "truth": np.nan, "flat": False, "constant": False,
                         "bootstrap_low": zeros + 0.01, "bootstrap_high": zeros + 0.01,
                         "families": zeros, "model_error": zeros, "data_set": zeros,
                         "level_distance": top * np.log(size / n_fit), "noise_floor": zeros})


def test_tail_correction_recovers_a_known_law_despite_regime_changes(calibrate):
    """The median regression in log space finds the power and slope it was built with
    although 10% of the curves jump up (least absolute deviations: Koenker & Bassett,
    Econometrica 46(1), 1978, regression quantiles)."""
    parts = _parts(400, power=0.75, slope=-0.03)
    power, slope = calibrate.fit_tail(parts)
    assert power == pytest.approx(0.75, abs=0.02) and slope == pytest.approx(-0.03, abs=0.01)
    cal = calibrate.Calibration(drop_power=power, tail_slope=slope, source="corpus")
    clean = parts["measured"] <= parts["at_largest"]
    assert np.allclose(calibrate.corrected(parts, cal)[clean], parts["measured"][clean], rtol=0.03)


def test_kappa_gives_the_band_its_stated_coverage(calibrate):
    """κ is the smallest factor whose band, as printed, covers 90% of the measured means."""
    parts = _parts(400, power=1.0, slope=0.0, seed=1, wild_share=0.0, noise=0.01)
    kappa = calibrate.fit_kappa(parts)
    lo, hi = calibrate.band(parts, kappa)
    covered = np.mean((parts["measured"] >= lo) & (parts["measured"] <= hi))
    assert 0.9 <= covered < 0.95
    lo, hi = calibrate.band(parts, kappa - 0.02)
    assert np.mean((parts["measured"] >= lo) & (parts["measured"] <= hi)) < 0.9


def test_a_relative_model_error_is_chosen_where_errors_grow_with_the_level(calibrate):
    """Forecast errors proportional to the level at the largest size and to ln(n/N) (as
    on the corpus: a few per cent per factor of n) against parts of one fixed width: κ
    alone must widen every band to reach the high-level curves, τ gives each its own."""
    parts = _parts(600, power=1.0, slope=0.0, seed=3, wild_share=0.0)
    rng = np.random.default_rng(4)
    parts["measured"] = parts["estimate"] + 0.03 * parts["level_distance"] * rng.standard_normal(600)
    cal = calibrate.Calibration(source="corpus")
    kappa, tau = calibrate.fit_band_scales(parts, cal)
    assert tau == pytest.approx(0.03, abs=0.01)
    lo, hi = calibrate.band(parts, kappa, cal, tau)
    assert np.mean((parts["measured"] >= lo) & (parts["measured"] <= hi)) >= 0.9
    alone = calibrate.fit_kappa(parts, cal, 0.0)
    assert calibrate.median_width(parts, kappa, cal, tau) < \
        calibrate.median_width(parts, alone, cal, 0.0) - 0.2


def test_leave_one_out_scores_each_data_set_with_the_others_correction(calibrate):
    parts = _parts(300, power=0.8, slope=-0.02, seed=2)
    scored, folds = calibrate.leave_one_out(parts)
    assert sorted(folds) == sorted(parts["dataset"].unique())
    for name, cal in folds.items():
        alone = calibrate.fit_correction(parts[parts["dataset"] != name])
        assert (cal.drop_power, cal.tail_slope, cal.model_error_scale, cal.relative_error) == \
            (alone.drop_power, alone.tail_slope, alone.model_error_scale, alone.relative_error)
    assert len(scored) == len(parts)


def test_constant_models_get_their_own_slope_and_do_not_steer_the_tail(calibrate):
    """Curves whose model predicted as a constant does at every fitted size fall, after the
    cut, by a law of their own: the least-absolute-deviation line through the origin
    (Koenker & Bassett 1978, as above) recovers it, and the tail fit of the others is
    the one it would be without them."""
    parts = _parts(400, power=0.75, slope=-0.03, wild_share=0.0)
    rng = np.random.default_rng(5)
    stuck = _parts(40, power=1.0, slope=0.0, seed=6, wild_share=0.0)
    stuck["estimate"] = stuck["at_largest"]      # the families see a flat line
    distance = np.log(stuck["size"] / stuck["n_fit"])
    stuck["measured"] = stuck["at_largest"] * np.exp(-0.6 * distance + 0.05 * rng.standard_normal(40))
    stuck["constant"] = True
    both = pd.concat([parts, stuck], ignore_index=True)
    assert calibrate.fit_tail(both) == calibrate.fit_tail(parts)
    c = calibrate.fit_constant_slope(both)
    assert c == pytest.approx(-0.6, abs=0.03)
    assert calibrate.fit_constant_slope(parts) == 0.0
    cal = calibrate.Calibration(drop_power=0.75, tail_slope=-0.03, constant_slope=c, source="corpus")
    est = calibrate.corrected(both, cal)
    assert np.allclose(est[both["constant"]], stuck["at_largest"] * np.exp(c * distance))
    lo, hi = calibrate.band(both, 0.5, cal)
    # open from 0 up to the flat forecast's upper end
    mask = both["constant"].to_numpy()
    flat = np.asarray(calibrate.corrected(both, cal, constant=False))
    assert (lo[mask] == 0).all() and (hi[mask] > flat[mask]).all() and (hi[mask] > est[mask]).all()
    assert calibrate.fit_correction(both).constant_slope == c
