"""Calibration of the model-based home ranges on exact OU tracks at several numbers of time scales.

Each animal: an exact Ornstein-Uhlenbeck track (tests/ranges_sim.py, own generator), sigma 1 km,
hourly fixes for 30 days, tau = 30 days / scales.  The ``ou`` model is fitted (roamstat.motion),
corrected for small-sample bias (ranges.model.debiased_fit) and turned into ``gaussian`` and
``kde_autocorr`` 95 % ranges (ranges.estimate.model_ranges).  Prints, per setting: the share of
animals whose best model (brownian vs ou, AICc with the range-crossing rule) is range-resident, and
for all animals (the ou fit used whatever the selection) the median 95 % area ratio to the truth,
the interval coverage with its binomial 95 % band, and the CPU seconds per animal.

Usage: python benchmarks/range_calibration.py [--animals 200] [--scales 10,15,20,30] [--out file.csv]
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from ranges_sim import ou_positions  # noqa: E402
from roamstat.motion import LocationError, best_fit, fit_motion_models  # noqa: E402
from roamstat.ranges.estimate import model_ranges  # noqa: E402
from roamstat.ranges.model import debiased_fit, from_motion_fit  # noqa: E402

DAY = 86400.0
DAYS = 30
AREA95_KM2 = 2 * math.pi * math.log(20)  # sigma 1 km (common practice, no source)


def animal(scales: float, seed: int) -> dict:
    """One simulated animal's fit and ranges as a flat record."""
    rng = np.random.default_rng(seed)
    t = np.arange(0, DAYS * DAY + 1, 3600.0)
    error = LocationError(np.full(t.size, 1.0), "dop_uere")
    xy = ou_positions(t, 1000.0, DAYS * DAY / scales, rng)
    fits = {f.name: f for f in fit_motion_models(t, xy[:, 0], xy[:, 1], error, models=("brownian", "ou"))}
    best = best_fit(list(fits.values()))
    fixed = debiased_fit(fits["ou"], t, error, rng)
    model = from_motion_fit(fixed)
    out = model_ranges(t, xy[:, 0], xy[:, 1], model, model.centre_xy)
    row = {"scales": scales, "seed": seed, "resident": best.range_resident,
           "tau_hat_d": fits["ou"].params["tau_position_s"] / DAY, "tau_c_d": fixed.params["tau_position_s"] / DAY,
           "n_effective": out["n_effective"]}
    for method in ("gaussian", "kde_autocorr"):
        area, low, high = out[(method, 95)][1:4]
        row.update({f"{method}_ratio": area / AREA95_KM2, f"{method}_low": low / AREA95_KM2,
                    f"{method}_high": high / AREA95_KM2})
    return row


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", type=int, default=200)
    parser.add_argument("--scales", default="10,15,20,30")
    parser.add_argument("--out", default="")
    args = parser.parse_args()
    rows = []
    print("scales resident method median_ratio coverage band95 s/animal")
    for scales in (float(s) for s in args.scales.split(",")):
        start = time.process_time()
        part = pd.DataFrame([animal(scales, 1000 * int(scales) + i) for i in range(args.animals)])
        seconds = (time.process_time() - start) / args.animals
        rows.append(part)
        band = stats.binom.ppf([0.025, 0.975], args.animals, 0.95) / args.animals
        for method in ("gaussian", "kde_autocorr"):
            covered = (part[f"{method}_low"] <= 1) & (part[f"{method}_high"] >= 1)
            print(f"{scales:g} {part['resident'].mean():.2f} {method} {part[f'{method}_ratio'].median():.3f} "
                  f"{covered.mean():.3f} {band[0]:.3f}-{band[1]:.3f} {seconds:.2f}", flush=True)
    if args.out:
        pd.concat(rows).to_csv(args.out, index=False)


if __name__ == "__main__":
    main()
