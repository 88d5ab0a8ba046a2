"""Synthetic report inputs (test scaffolding): small tables and AnimalResult objects.

The fitted models here are stand-ins that follow the fitted-model protocol
(``name``, ``params``, ``logpdf``, ``support``) on top of scipy.stats
densities; they exercise the report's drawing, not any estimator.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pandas as pd
from scipy import stats
from shapely.geometry import MultiPolygon, Point, Polygon

from roamstat.results import AnimalResult


class StandIn:
    """A protocol-following model backed by a frozen scipy.stats distribution."""

    def __init__(self, name, frozen, support=(0.0, np.inf)):
        self.name, self.frozen, self.support = name, frozen, support
        self.params = {}

    def logpdf(self, x):
        x = np.asarray(x, float)
        inside = (x >= self.support[0]) & (x <= self.support[1])
        return np.where(inside, self.frozen.logpdf(x), -np.inf)


class TailStandIn:
    """Power law above xmin, p(x) = (a-1)/xmin (x/xmin)^-a (Clauset et al. 2009, eq. 2.2)."""

    name = "power_law"

    def __init__(self, alpha, xmin):
        self.alpha, self.xmin, self.support = alpha, xmin, (xmin, np.inf)
        self.params = {"exponent": alpha, "xmin": xmin}

    def logpdf(self, x):
        x = np.asarray(x, float)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.log(self.alpha - 1) - np.log(self.xmin) - self.alpha * np.log(x / self.xmin)
        return np.where(x >= self.xmin, out, -np.inf)


def crw(rng, n, step_scale=100.0, kappa=2.0):
    """Correlated random walk positions (metres), first fix at the origin."""
    steps = rng.gamma(2.0, step_scale / 2.0, n)
    headings = np.cumsum(rng.vonmises(0.0, kappa, n))
    x = np.concatenate([[0.0], np.cumsum(steps * np.sin(headings))])
    y = np.concatenate([[0.0], np.cumsum(steps * np.cos(headings))])
    return x, y, steps, np.diff(headings)


def make_animal(animal_id: str, rng, n=120, heavy=False, complete=True):
    x, y, steps, turns = crw(rng, n)
    if heavy:
        steps = (1 - rng.random(n)) ** (-1 / 1.2) * 20.0
    fitted = SimpleNamespace(
        step_values=steps, turn_values=turns,
        best_step=StandIn("gamma", stats.gamma(2.0, scale=50.0)),
        best_turn=StandIn("von_mises", stats.vonmises(2.0), (-np.pi, np.pi)),
        tail=TailStandIn(2.2, float(np.quantile(steps, 0.7))) if heavy else None,
        tail_supported=heavy, note="stand-in fits <b>note</b>",
    )
    nsd = x**2 + y**2
    sims = np.stack([np.concatenate([[0], np.cumsum(rng.normal(0, 100, n))]) ** 2 * 2 for _ in range(40)])
    curve = {"step": np.arange(n + 1), "observed_m2": nsd, "lo_m2": np.quantile(sims, 0.025, axis=0),
             "hi_m2": np.quantile(sims, 0.975, axis=0), "mean_m2": sims.mean(axis=0)}
    days = np.arange(n + 1) / 6.0
    residency_curve = {"t_days": days, "nsd_km2": nsd / 1e6,
                       "fitted": {"resident": np.full(n + 1, nsd.mean() / 1e6) * (1 - np.exp(-days)),
                                  "nomad": days * nsd[-1] / 1e6 / days[-1]},
                       "pattern": "resident"}
    ring = Polygon(Point(x.mean(), y.mean()).buffer(400.0).exterior.coords,
                   [Point(x.mean(), y.mean()).buffer(100.0).exterior.coords])
    extras = {
        "contours": [{"method": "kde", "level": 95, "geometry": ring},
                     {"method": "kde", "level": 50, "geometry": MultiPolygon([Point(x[5], y[5]).buffer(80.0),
                                                                              Point(x[50], y[50]).buffer(60.0)])},
                     {"method": "mcp", "level": 100, "geometry": Polygon(np.column_stack([x, y])).convex_hull}],
        "track_xy": pd.DataFrame({"x_m": x, "y_m": y}),
        "area_curve": pd.DataFrame({"n_fixes": [20, 40, 80, 120] * 2, "area_km2": [0.2, 0.35, 0.42, 0.44, 0.3, 0.5, 0.6, 0.61],
                                    "method": ["kde"] * 4 + ["mcp"] * 4, "level": [95] * 4 + [100] * 4}),
    }
    if not complete:
        fitted, curve, residency_curve, extras = None, None, {}, {}
    result = AnimalResult(
        animal_id=animal_id,
        fits=pd.DataFrame({"animal_id": [animal_id], "variable": ["step"], "model": ["gamma"],
                           "params": ['{"shape": 2.0, "scale": 50.0}'], "aic": [1234.5], "best": [True]}),
        null_tests=pd.DataFrame(), residency={"animal_id": animal_id, "pattern": "resident"},
        ranges=pd.DataFrame(), fitted=fitted,
        null_curves={"crw": curve, "shuffle": curve} if curve else {},
        residency_curve=residency_curve, range_extras=extras,
    )
    fixes = pd.DataFrame({"animal_id": animal_id, "x_m": x, "y_m": y})
    rejected = pd.DataFrame({"animal_id": animal_id, "x_m": x[:3] + 500.0, "y_m": y[:3] - 300.0,
                             "reason_code": "spike", "reason": "out-and-back spike"})
    return result, fixes, rejected


def make_inputs(ids, seed=7, heavy_ids=(), incomplete_ids=()):
    rng = np.random.default_rng(seed)
    animals, fixes, rejected = [], [], []
    for animal_id in ids:
        result, f, r = make_animal(animal_id, rng, heavy=animal_id in heavy_ids, complete=animal_id not in incomplete_ids)
        animals.append(result)
        fixes.append(f)
        rejected.append(r)
    fixes, rejected = pd.concat(fixes, ignore_index=True), pd.concat(rejected, ignore_index=True)
    rejected.loc[0, "reason_code"], rejected.loc[0, "reason"] = "bad_time", "time <i>unparsable</i>"
    n = len(ids)
    tables = {
        "summary": pd.DataFrame({"animal_id": list(ids), "n_fixes": [121] * n, "n_rejected": [3] * n,
                                 "n_steps": [120] * n, "first_time": pd.Timestamp("2024-05-01", tz="UTC"),
                                 "path_m": [12000.5] * n}),
        "rejected": rejected,
        "fits": pd.concat([a.fits for a in animals], ignore_index=True),
        "null_tests": pd.DataFrame({"animal_id": [i for i in ids for _ in (0, 1)],
                                    "null_model": ["crw", "shuffle"] * n,
                                    "q_value": np.linspace(0.001, 0.5, 2 * n),
                                    "verdict": ["closer", "consistent"] * n}),
        "residency": pd.DataFrame({"animal_id": list(ids), "pattern": ["resident"] * n,
                                   "range_study_candidate": [True] * n}),
        "ranges": pd.DataFrame({"animal_id": [i for i in ids for _ in (0, 1)], "method": ["kde", "mcp"] * n,
                                "level": [95, 100] * n, "area_km2": [0.44, 0.61] * n}),
        "fixes": fixes,
        "rejected_xy": rejected,
    }
    run_info = {"version": "0.1.0", "command_line": "run collars.csv --out out", "seed": seed,
                "n_read": len(fixes) + len(rejected), "n_kept": len(fixes), "n_rejected": len(rejected),
                "projections": {i: "+proj=aeqd +lat_0=52.5 +lon_0=-3.25" for i in ids}, "masked": False,
                "inputs": ["collars.csv"]}
    return tables, animals, run_info
