"""Generate the invented demo deployment in ``collars.csv`` (fixed seed, numpy only).

Everything here is made up: the reserve, the animals and their movements.  The
scenario is a fictional upland reserve, "Caldmoss Uplands", put in the hills
of southern Scotland only so that coordinates fall on land.  Six collars on a
2-hour schedule, each animal following a different movement process, with
missed fixes, GPS error scaled by DOP, 2-D fixes, a few spikes and a collar
outage.  See README.md beside this file.

Run ``python sample_tracks/make_sample.py`` to rewrite ``collars.csv``; the
output is byte-identical on every run.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20250401
CENTRE_LAT, CENTRE_LON = 55.38, -3.62  # the invented reserve's headquarters
START = np.datetime64("2025-04-01T00:00:00", "s")
SCHEDULE_S = 7200
UERE_M = 4.0  # user equivalent range error: horizontal error sd per axis = UERE x DOP

# WGS84 radii of curvature at the centre, for a local metres -> degrees conversion.
_A, _E2 = 6378137.0, 6.69437999014e-3
_S2 = np.sin(np.deg2rad(CENTRE_LAT)) ** 2
M_RADIUS = _A * (1 - _E2) / (1 - _E2 * _S2) ** 1.5
N_RADIUS = _A / np.sqrt(1 - _E2 * _S2)


def to_lat_lon(x, y):
    lat = CENTRE_LAT + np.rad2deg(y / M_RADIUS)
    lon = CENTRE_LON + np.rad2deg(x / (N_RADIUS * np.cos(np.deg2rad(CENTRE_LAT))))
    return lat, lon


def ou_track(rng, centres, tau_h, sigma_m):
    """Ornstein-Uhlenbeck positions around a (possibly moving) centre, one per 2-h slot."""
    a = np.exp(-SCHEDULE_S / 3600 / tau_h)
    noise = rng.normal(0, sigma_m * np.sqrt(1 - a * a), centres.shape)
    pos = np.empty_like(centres)
    pos[0] = centres[0] + rng.normal(0, sigma_m, 2)
    for k in range(1, len(centres)):
        pos[k] = centres[k] + a * (pos[k - 1] - centres[k - 1]) + noise[k]
    return pos


def walk(start, steps, headings):
    moves = np.column_stack([steps * np.sin(headings), steps * np.cos(headings)])
    return start + np.vstack([np.zeros(2), np.cumsum(moves, axis=0)])


def wrapped_cauchy(rng, rho, n):
    # Inverse-CDF sampler (Fisher 1993, Statistical Analysis of Circular Data, 3.3.4).
    return 2 * np.arctan((1 - rho) / (1 + rho) * np.tan(np.pi * (rng.uniform(size=n) - 0.5)))


def truncated_power_law(rng, mu, xmin, xmax, n):
    # Inverse CDF of p(x) ~ x^-mu on [xmin, xmax].
    lo, hi = xmin ** (1 - mu), xmax ** (1 - mu)
    return (lo - rng.uniform(size=n) * (lo - hi)) ** (1 / (1 - mu))


def piecewise_centres(n, knots):
    """Centre of attraction per slot, linear between (slot, x, y) knots."""
    slots = np.arange(n)
    ks, kx, ky = (np.array(v, dtype=float) for v in zip(*knots))
    return np.column_stack([np.interp(slots, ks, kx), np.interp(slots, ks, ky)])


def resident(rng):
    n = 1300
    return ou_track(rng, np.tile([-2500.0, 1200.0], (n, 1)), tau_h=12, sigma_m=700)


def migrant(rng):
    # Winter range low in the south, summer range 22 km north-east, three-day moves.
    n = 1450
    low, high = (1500.0, -6000.0), (14000.0, 12000.0)
    knots = [(0, *low), (420, *low), (456, *high), (1050, *high), (1086, *low), (n - 1, *low)]
    return ou_track(rng, piecewise_centres(n, knots), tau_h=6, sigma_m=600)


def disperser(rng):
    # Natal range, then a one-way departure to the north-north-west and a new range.
    n_home, n_move, n_settle = 700, 200, 500
    home = ou_track(rng, np.tile([3000.0, 2500.0], (n_home, 1)), tau_h=12, sigma_m=500)
    bias = np.deg2rad(330.0)
    headings = bias + wrapped_cauchy(rng, 0.8, n_move)
    moving = walk(home[-1], rng.gamma(2.0, 250 / 2.0, n_move), headings)[1:]
    settle = ou_track(rng, np.tile(moving[-1], (n_settle, 1)), tau_h=12, sigma_m=600)
    return np.vstack([home, moving, settle])


def forager(rng):
    # Heavy-tailed steps (truncated power law, exponent 2, 40 m to 6 km), uniform headings.
    n = 1100
    steps = truncated_power_law(rng, 2.0, 40.0, 6000.0, n - 1)
    return walk(np.array([-6000.0, -3000.0]), steps, rng.uniform(-np.pi, np.pi, n - 1))


def correlated_walker(rng):
    # Correlated random walk: gamma steps (mean 350 m), wrapped-Cauchy turns (rho 0.5).
    n = 900
    turns = np.r_[rng.uniform(-np.pi, np.pi), wrapped_cauchy(rng, 0.5, n - 2)]
    return walk(np.array([6000.0, -2000.0]), rng.gamma(1.8, 350 / 1.8, n - 1), np.cumsum(turns))


def short_collar(rng):
    n = 300
    return ou_track(rng, np.tile([-1000.0, 5000.0], (n, 1)), tau_h=12, sigma_m=400)


#: id -> (movement, missed-fix probability, median DOP, share of 2-D fixes, spikes, outage slots)
ANIMALS = {
    "CU-R07": (resident, 0.06, 1.4, 0.05, 3, (600, 642)),
    "CU-M12": (migrant, 0.07, 1.5, 0.06, 2, None),
    "CU-D03": (disperser, 0.08, 1.5, 0.06, 2, None),
    "CU-F21": (forager, 0.07, 1.6, 0.07, 3, None),
    "CU-W15": (correlated_walker, 0.06, 1.4, 0.05, 2, None),
    "CU-Q30": (short_collar, 0.35, 3.5, 0.30, 1, None),
}


def collar_rows(rng, animal, spec):
    movement, p_miss, dop_median, p_2d, n_spikes, outage = spec
    true_xy = movement(rng)
    n = len(true_xy)
    is_2d = rng.uniform(size=n) < p_2d
    dop = np.clip(dop_median * np.exp(rng.normal(0, 0.45, n)) * np.where(is_2d, 1.8, 1.0), 0.6, 30.0)
    sats = np.where(is_2d, 3, np.clip(np.round(12.5 - 1.6 * dop + rng.normal(0, 1, n)), 4, 12)).astype(int)
    error = rng.normal(0, 1, (n, 2)) * (UERE_M * dop * np.where(is_2d, 2.0, 1.0))[:, None]
    observed = true_xy + error
    spikes = rng.choice(np.arange(5, n - 5), size=n_spikes, replace=False)
    bearing = rng.uniform(-np.pi, np.pi, n_spikes)
    offset = rng.uniform(2000, 8000, n_spikes)
    observed[spikes] += np.column_stack([offset * np.sin(bearing), offset * np.cos(bearing)])
    keep = rng.uniform(size=n) >= p_miss
    keep[spikes] = True
    if outage is not None:
        keep[outage[0] : outage[1]] = False
    keep[0] = True
    delay_s = rng.integers(10, 110, n)  # time to acquire the fix after the scheduled slot
    temp_c = 8 + 6 * np.sin(np.arange(n) * 2 * np.pi / 12 - 2) + rng.normal(0, 1.5, n)
    lat, lon = to_lat_lon(observed[:, 0], observed[:, 1])
    times = START + (np.arange(n) * SCHEDULE_S + delay_s).astype("timedelta64[s]")
    for k in np.flatnonzero(keep):
        yield [
            animal,
            str(times[k]) + "Z",
            f"{lat[k]:.6f}",
            f"{lon[k]:.6f}",
            f"{dop[k]:.1f}",
            str(sats[k]),
            "2D" if is_2d[k] else "3D",
            f"{temp_c[k]:.1f}",
        ]


def main(path: Path | None = None) -> Path:
    path = path or Path(__file__).resolve().parent / "collars.csv"
    rng = np.random.default_rng(SEED)
    with open(path, "w", newline="", encoding="utf-8") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(["animal_id", "timestamp", "latitude", "longitude", "dop", "satellites", "fix_type", "collar_temp_c"])
        for animal, spec in ANIMALS.items():
            out.writerows(collar_rows(rng, animal, spec))
    return path


if __name__ == "__main__":
    print(f"wrote {main()}")
