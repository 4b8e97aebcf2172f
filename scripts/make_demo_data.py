#!/usr/bin/env python3
"""Generate the synthetic demo table: fruit graded at a fictional packhouse.

The scenario is invented. A cooperative packhouse ("Greyhollow Packhouse") receives
apples from a few hundred member orchards over one season; each fruit passes a grading
line that measures it, and an inspector decides whether it is rejected for the premium
grade. The target ``rejected`` (1 = rejected) depends on the measurements through a
nonlinear rule: each variety has its own firmness window (too soft or too hard both
fail), sugar must keep up with starch (ripeness), blemishes and small size count
against, and every orchard has its own unexplained tendency (a group effect, partly
tied to its altitude). About 7% of the inspectors' decisions are flipped at random
(label noise). The blemish camera and the starch test sometimes fail (missing values).

Run from the repository root (writes datasets_demo/packhouse.csv and the gzipped copy
shipped inside the package, curvefit/workflows/packhouse.csv.gz):

    python scripts/make_demo_data.py

The seed is fixed, so the file is the same on every run with the same numpy. The
package ships the file rather than generating it at run time because numpy's random
streams may change between versions; the gzip header carries no time stamp, so the
copy is byte-identical on every run too.
"""

from __future__ import annotations

import argparse
import gzip
import io
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20261202
N_ROWS = 20_000
N_ORCHARDS = 300
LABEL_NOISE = 0.07

# variety: (share of fruit, firmness optimum in kg, firmness mean in kg)
VARIETIES = {
    "Ambercrest": (0.30, 7.2, 7.4),
    "Brindle Pippin": (0.22, 8.6, 8.2),
    "Coldharbour": (0.18, 6.1, 6.6),
    "Dunmore Russet": (0.16, 9.3, 8.8),
    "Embervale": (0.14, 7.8, 7.6),
}


def _sigmoid(z):
    return 1.0 / (1.0 + np.exp(-z))


def make_packhouse(n_rows: int = N_ROWS, seed: int = SEED, with_truth: bool = False) -> pd.DataFrame:
    """The demo table; ``with_truth`` adds ``p_rejected``, the noisy label's true probability."""
    rng = np.random.default_rng(seed)

    # orchards: uneven delivery volumes, an altitude, and a hidden quality tendency
    volume = rng.lognormal(0.0, 0.8, N_ORCHARDS)
    altitude = rng.uniform(40, 900, N_ORCHARDS).round(0)
    alt_z = (altitude - 470.0) / 250.0
    orchard_effect = 0.5 * (alt_z ** 2 - 1.0) + rng.normal(0.0, 0.7, N_ORCHARDS)
    orchard = rng.choice(N_ORCHARDS, size=n_rows, p=volume / volume.sum())
    # each orchard grows mostly one or two varieties
    names = list(VARIETIES)
    shares = np.array([VARIETIES[v][0] for v in names])
    main_variety = rng.choice(len(names), size=N_ORCHARDS, p=shares)
    second_variety = rng.choice(len(names), size=N_ORCHARDS, p=shares)
    variety_idx = np.where(rng.random(n_rows) < 0.7, main_variety[orchard], second_variety[orchard])
    variety = np.array(names, dtype=object)[variety_idx]
    firm_opt = np.array([VARIETIES[v][1] for v in names])[variety_idx]
    firm_mean = np.array([VARIETIES[v][2] for v in names])[variety_idx]

    # deliveries over a 150-day season; later fruit has spent longer in cold storage
    day = np.sort(rng.integers(0, 150, n_rows))
    storage_days = np.clip(rng.poisson(2 + day / 12.0), 0, None)
    weight_g = np.clip(rng.normal(182, 34, n_rows) + 6 * (orchard_effect[orchard] < 0), 70, 360)
    diameter_mm = np.round(13.2 * np.cbrt(weight_g) + rng.normal(0, 1.8, n_rows), 1)
    firmness_kg = np.clip(rng.normal(firm_mean - storage_days * 0.05, 1.1, n_rows), 2.5, 13.0)
    starch_index = np.clip(rng.normal(3.0 + day / 40.0, 1.0, n_rows), 1.0, 8.0)
    sugar_brix = np.clip(rng.normal(12.6, 1.7, n_rows) + 0.35 * (starch_index - 4.5), 7.0, 19.0)
    blemish_pct = np.clip(rng.gamma(1.3, 1.4, n_rows), 0, 30)
    color_score = np.clip(rng.normal(62, 14, n_rows), 0, 100)

    # inspector's rule (logit): U-shaped in firmness, a ripeness interaction, a
    # blemish threshold, small fruit, pale colour, and the orchard's own tendency
    firm_dev = (firmness_kg - firm_opt) / 1.0
    ripeness_gap = sugar_brix - (11.0 + 0.55 * (starch_index - 4.0))
    logit = (-2.9
             + 1.3 * firm_dev ** 2
             + 2.4 * _sigmoid(-3.0 * ripeness_gap)
             + 3.0 * _sigmoid(2.0 * (blemish_pct - 4.0))
             + 1.6 * _sigmoid(-(weight_g - 130.0) / 8.0)
             + 0.9 * _sigmoid(-(color_score - 40.0) / 5.0) * (variety == "Ambercrest")
             + 0.7 * orchard_effect[orchard])
    clean = rng.random(n_rows) < _sigmoid(3.0 * logit)
    flip = rng.random(n_rows) < LABEL_NOISE
    rejected = np.where(flip, ~clean, clean).astype(int)

    # measurement gaps: the blemish camera misses ~4% of fruit, the starch test ~3%
    blemish_obs = np.round(blemish_pct, 2)
    blemish_obs[rng.random(n_rows) < 0.04] = np.nan
    starch_obs = np.round(starch_index, 1)
    starch_obs[rng.random(n_rows) < 0.03] = np.nan

    table = pd.DataFrame({
        "orchard": [f"OR{k:03d}" for k in orchard],
        "day": day,
        "variety": variety,
        "altitude_m": altitude[orchard].astype(int),
        "storage_days": storage_days,
        "weight_g": np.round(weight_g, 1),
        "diameter_mm": diameter_mm,
        "firmness_kg": np.round(firmness_kg, 2),
        "sugar_brix": np.round(sugar_brix, 1),
        "starch_index": starch_obs,
        "blemish_pct": blemish_obs,
        "color_score": np.round(color_score, 0).astype(int),
        "rejected": rejected,
    })
    if with_truth:
        p_clean = _sigmoid(3.0 * logit)
        table["p_rejected"] = p_clean * (1 - LABEL_NOISE) + (1 - p_clean) * LABEL_NOISE
    return table


ROOT = Path(__file__).resolve().parents[1]
PACKAGED = ROOT / "curvefit" / "workflows" / "packhouse.csv.gz"


def gzip_bytes(data: bytes) -> bytes:
    """Gzip with no file name and a zero time stamp, so equal input gives equal bytes."""
    buf = io.BytesIO()
    with gzip.GzipFile(filename="", mode="wb", fileobj=buf, compresslevel=9, mtime=0) as gz:
        gz.write(data)
    return buf.getvalue()


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=str(ROOT / "datasets_demo" / "packhouse.csv"))
    parser.add_argument("--packaged", default=str(PACKAGED),
                        help="gzipped copy shipped with the package ('' to skip)")
    parser.add_argument("--rows", type=int, default=N_ROWS)
    args = parser.parse_args(argv)
    df = make_packhouse(args.rows)
    out = Path(args.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    df.to_csv(out, index=False)
    print(f"wrote {out} ({len(df)} rows, {out.stat().st_size / 1e6:.2f} MB, "
          f"{df['rejected'].mean():.1%} rejected, {df['orchard'].nunique()} orchards)")
    if args.packaged:
        packaged = Path(args.packaged)
        packaged.write_bytes(gzip_bytes(out.read_bytes()))
        print(f"wrote {packaged} ({packaged.stat().st_size / 1e6:.2f} MB)")


if __name__ == "__main__":
    main()
