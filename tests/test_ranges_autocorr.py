"""Autocorrelation-aware ranges against simulated animals of known range (own OU generator in ranges_sim)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.stats import chi2

from ranges_sim import fixes_from_xy, ou_positions, ou_sigma_given_tau
from roamstat.config import Config
from roamstat.ranges import RangeModel, ranges_animal
from roamstat.ranges.autocorr import (area_interval, autocorrelated_bandwidth, centre_variance_factor, lag_pairs,
                                      n_effective)
from roamstat.ranges.estimate import NOT_RESIDENT, model_ranges

DAY = 86400.0
AREA95 = 2 * math.pi * math.log(20)  # 95 % area of N(0, I) (common practice, no source): times sigma²


def _ou_acf(tau_s):
    return lambda lag: np.exp(-np.abs(lag) / tau_s)


def _ouf_acf(tau_p, tau_v):
    # OU position with OU velocity (Fleming et al. 2014, Am. Nat. 183:E154): position autocorrelation.
    return lambda lag: (tau_p * np.exp(-np.abs(lag) / tau_p) - tau_v * np.exp(-np.abs(lag) / tau_v)) / (tau_p - tau_v)


def _independent(lag):
    return (np.asarray(lag) == 0).astype(float)


def test_lag_table_matches_the_brute_force_pair_sums_on_irregular_times():
    # Reference: the explicit double sum over all pairs of irregular (exponential-gap) fix times.
    rng = np.random.default_rng(1)
    t = np.cumsum(rng.exponential(3 * 3600.0, 400))
    acf = _ou_acf(2 * DAY)
    rho = acf(t[:, None] - t[None, :])
    lags, weights = lag_pairs(t)
    assert weights.sum() == t.size ** 2
    assert n_effective(t, acf) == pytest.approx(t.size ** 2 / np.sum(rho ** 2), rel=0.01)
    assert centre_variance_factor(t, acf) == pytest.approx(np.sum(rho) / t.size ** 2, rel=0.01)


def test_effective_sample_size_is_n_for_independent_fixes_and_duration_over_tau_for_ou():
    # Fleming et al. (2019, Methods Ecol. Evol. 10:1679): N_area ~ duration / tau_position for OU.
    t = np.arange(0, 60 * DAY + 1, 3600.0)
    assert n_effective(t, _independent) == pytest.approx(t.size)
    assert n_effective(t, _ou_acf(2 * DAY)) == pytest.approx(60 / 2, rel=0.03)
    # With velocity: duration / integral of rho² over all lags (the definition; integral by scipy quad).
    tau_p, tau_v = 2 * DAY, 0.5 * DAY
    acf = _ouf_acf(tau_p, tau_v)
    integral = 2 * quad(lambda s: float(acf(np.array(s))) ** 2, 0, 60 * tau_p)[0]
    assert n_effective(t, acf) == pytest.approx(60 * DAY / integral, rel=0.03)
    assert n_effective(t, acf) < n_effective(t, _ou_acf(tau_p))  # velocity memory costs information


def test_bandwidth_for_independent_fixes_tends_to_silvermans_rule():
    # Silverman (1986, eq. 4.14): h = sigma n^(-1/6) for a bivariate normal reference (asymptotic MISE).
    for n, tol in ((1000, 0.05), (100000, 0.015)):
        t = np.arange(n) * 3600.0
        assert autocorrelated_bandwidth(t, _independent) == pytest.approx(n ** (-1 / 6), rel=tol)
    # Autocorrelated fixes carry less information: a wider kernel (Fleming et al. 2015, Ecology 96:1182).
    t = np.arange(0, 30 * DAY + 1, 3600.0)
    assert autocorrelated_bandwidth(t, _ou_acf(DAY)) > 1.5 * t.size ** (-1 / 6)


def test_area_interval_is_the_chi_square_interval():
    # Exact pivot for independent normal fixes: area * nu / A ~ chi-square(nu), nu = 2 n (scipy.stats.chi2).
    low, high = area_interval(10.0, 50.0)
    assert low == pytest.approx(10 * 100 / chi2.ppf(0.975, 100)) and high == pytest.approx(10 * 100 / chi2.ppf(0.025, 100))
    assert all(math.isnan(v) for v in area_interval(10.0, math.nan))


def test_independent_normal_fixes_give_the_true_area_within_five_percent():
    # Issue 14 check: independent bivariate normal fixes, 95 % area 2 pi sigma² ln 20 (common practice, no source).
    rng = np.random.default_rng(7)
    n, ratios = 500, {"kde_autocorr": [], "gaussian": []}
    t = np.arange(n) * 3600.0
    for _ in range(15):
        xy = rng.normal(0, 1000.0, (n, 2))
        sigma = math.sqrt(np.mean((xy - xy.mean(0)) ** 2))  # maximum-likelihood SD per axis
        out = model_ranges(t, xy[:, 0], xy[:, 1], RangeModel("ou", True, sigma, _independent, (0.0, 0.0)), (0.0, 0.0))
        for method in ratios:
            ratios[method].append(out[(method, 95)][1] / AREA95)  # sigma 1 km: AREA95 km²
        assert out["n_effective"] == pytest.approx(n)
    for method, values in ratios.items():
        assert 0.95 <= np.median(values) <= 1.05, method


@pytest.mark.slow
def test_ou_ranges_of_ten_to_thirty_time_scales_recover_the_area_with_honest_intervals():
    # Issue 14 check, after Fleming et al. (2015) and Noonan et al. (2019, Ecol. Monogr. 89:e01344): exact OU
    # tracks, sigma 1 km, hourly fixes for 30 days, tau 1, 2, 3 days (30, 15, 10 time scales). Until the fitted
    # motion models are wired in, tau is the true one and sigma its maximum-likelihood estimate given tau
    # (Prais-Winsten, in ranges_sim).
    rng = np.random.default_rng(14)
    t = np.arange(0, 30 * DAY + 1, 3600.0)
    ratio, covered = {"kde_autocorr": [], "gaussian": []}, {"kde_autocorr": [], "gaussian": []}
    for tau_days in (1, 2, 3):
        acf = _ou_acf(tau_days * DAY)
        n_effs = []
        for _ in range(12):
            xy = ou_positions(t, 1000.0, tau_days * DAY, rng)
            sigma, centre = ou_sigma_given_tau(xy, 3600.0, tau_days * DAY)
            out = model_ranges(t, xy[:, 0], xy[:, 1], RangeModel("ou", True, sigma, acf, tuple(centre)), tuple(centre))
            n_effs.append(out["n_effective"])
            for method in ratio:
                area, low, high = out[(method, 95)][1:4]
                ratio[method].append(area / AREA95)
                covered[method].append(low <= AREA95 <= high)
        # Duration / tau (Fleming et al. 2019) with the finite-track term: T² / (T tau - tau²/2 (1 - e^(-2T/tau))),
        # the double integral of rho² over the track (derived here; continuous limit of the definition).
        big_t, tau = 30.0, float(tau_days)
        assert np.mean(n_effs) == pytest.approx(big_t ** 2 / (big_t * tau - tau ** 2 / 2 * (1 - math.exp(-2 * big_t / tau))),
                                                rel=0.02)
    for method in ratio:
        assert 0.9 <= np.median(ratio[method]) <= 1.1, (method, np.median(ratio[method]))
        assert np.mean(covered[method]) >= 0.85, method


def test_a_track_that_is_not_range_resident_gets_no_home_range_but_a_note():
    rng = np.random.default_rng(3)
    steps = rng.normal(0, 300.0, (400, 2)).cumsum(axis=0)
    fixes = fixes_from_xy(steps[:, 0], steps[:, 1], np.arange(400) / 4.0)
    rows, features, extras = ranges_animal(fixes, Config(), model=RangeModel("brownian", False))
    model_rows = [r for r in rows if r["method"] in ("kde_autocorr", "gaussian")]
    assert len(model_rows) == 4 and all(math.isnan(r["area_km2"]) and NOT_RESIDENT in r["note"] for r in model_rows)
    assert {f["properties"]["method"] for f in features} == {"mcp", "kde"}
    assert NOT_RESIDENT in extras.note


def test_ranges_animal_writes_intervals_and_outlines_for_a_resident_model():
    rng = np.random.default_rng(5)
    t = np.arange(0, 20 * DAY + 1, 3600.0)
    xy = ou_positions(t, 1500.0, DAY, rng)
    fixes = fixes_from_xy(xy[:, 0], xy[:, 1], t / DAY)
    sigma, centre = ou_sigma_given_tau(xy, 3600.0, DAY)
    rows, features, _ = ranges_animal(fixes, Config(), model=RangeModel("ou", True, sigma, _ou_acf(DAY), tuple(centre)))
    by = {(r["method"], r["level"]): r for r in rows}
    for key in (("kde_autocorr", 95), ("gaussian", 95), ("kde_autocorr", 50), ("gaussian", 50)):
        r = by[key]
        assert r["area_low_km2"] < r["area_km2"] < r["area_high_km2"]
        assert r["n_effective"] == pytest.approx(20, rel=0.05)
    assert by[("gaussian", 95)]["area_km2"] == pytest.approx(AREA95 * sigma ** 2 / 1e6, rel=1e-9)
    assert {(f["properties"]["method"], f["properties"]["level"]) for f in features} >= {("gaussian", 95),
                                                                                       ("kde_autocorr", 50)}
    assert math.isnan(by[("mcp", 100)]["n_effective"])


@pytest.mark.slow
def test_fitted_and_debiased_ou_models_recover_the_area_with_honest_intervals():
    # Issue 14 check with the fitted motion model (roamstat.motion, exact Kalman likelihood) and the bootstrap
    # bias correction: exact OU tracks (own generator), sigma 1 km, hourly for 30 days, tau 1 and 2 days (30 and
    # 15 time scales). Published context: Fleming et al. (2019, Methods Ecol. Evol. 10:1679) show the same
    # maximum-likelihood area bias at small effective sample sizes. Ten time scales: the next test.
    from roamstat.motion import LocationError, best_fit, fit_motion_models
    from roamstat.ranges.model import debiased_fit, from_motion_fit

    rng = np.random.default_rng(41)
    t = np.arange(0, 30 * DAY + 1, 3600.0)
    error = LocationError(np.full(t.size, 1.0), "dop_uere")
    ratio, covered = [], []
    for tau_days in (1, 2):
        for _ in range(8):
            xy = ou_positions(t, 1000.0, tau_days * DAY, rng)
            best = best_fit(fit_motion_models(t, xy[:, 0], xy[:, 1], error, models=("brownian", "ou")))
            assert best.range_resident
            model = from_motion_fit(debiased_fit(best, t, error, rng, n_reps=10))
            area, low, high = model_ranges(t, xy[:, 0], xy[:, 1], model, model.centre_xy)[("gaussian", 95)][1:4]
            ratio.append(area / AREA95)
            covered.append(low <= AREA95 <= high)
    assert 0.9 <= np.median(ratio) <= 1.1, np.median(ratio)
    assert np.mean(covered) >= 0.85


@pytest.mark.slow
def test_fitted_and_debiased_ou_models_at_ten_time_scales_have_calibrated_areas_and_intervals():
    # Issue 14 check at the short end, 10 time scales (about 10.5 effective fixes): exact OU tracks (own
    # generator), sigma 1 km, tau 3 days, hourly for 30 days, the ou model fitted (roamstat.motion) and its time
    # scale corrected by simulation (ranges.model.debiased_fit), whose interval is widened by the
    # indirect-inference variance (Gourieroux, Monfort & Renault 1993). Published context: Fleming et al.
    # (2019, Methods Ecol. Evol. 10:1679). The range-crossing rule of best_fit is left out: it is a separate
    # choice (docs/ranges.md gives its effect).
    # Monte Carlo error with 96 animals (benchmarks/range_calibration.py, 200 animals: medians 1.04 for both
    # methods, coverage 0.955 for both, log-ratio SD 0.42): median SE ~ 1.25 * 0.42 / sqrt(96) = 0.054, coverage
    # SE ~ 0.022. Bands: median 0.9-1.1 (the issue's), coverage 0.85-0.99 (an interval that always covers fails),
    # and the interval's typical spread (median of log width / 3.92) within 0.7-1.4 of the spread of the log
    # area ratios (IQR / 1.349, relative SE ~ 0.12): too narrow or too wide both fail. Robust summaries, as a
    # few tracks get near-unbounded intervals by design (ranges.autocorr.MIN_DOF).
    from roamstat.motion import LocationError, fit_motion_models
    from roamstat.ranges.model import debiased_fit, from_motion_fit

    rng = np.random.default_rng(1410)
    t = np.arange(0, 30 * DAY + 1, 3600.0)
    error = LocationError(np.full(t.size, 1.0), "dop_uere")
    log_ratio, covered, spread = {"kde_autocorr": [], "gaussian": []}, {"kde_autocorr": [], "gaussian": []}, []
    for _ in range(96):
        xy = ou_positions(t, 1000.0, 3 * DAY, rng)
        fit = fit_motion_models(t, xy[:, 0], xy[:, 1], error, models=("ou",))[0]
        model = from_motion_fit(debiased_fit(fit, t, error, rng, n_reps=8))
        out = model_ranges(t, xy[:, 0], xy[:, 1], model, model.centre_xy)
        for method in log_ratio:
            area, low, high = out[(method, 95)][1:4]
            log_ratio[method].append(math.log(area / AREA95))
            covered[method].append(low <= AREA95 <= high)
        low, high = out[("gaussian", 95)][2:4]
        spread.append(math.log(high / low) / (2 * 1.959964))  # the interval's implied SD of the log area
    for method in log_ratio:
        assert 0.9 <= math.exp(np.median(log_ratio[method])) <= 1.1, (method, math.exp(np.median(log_ratio[method])))
        assert 0.85 <= np.mean(covered[method]) <= 0.99, (method, np.mean(covered[method]))
    quartiles = np.percentile(log_ratio["gaussian"], [75, 25])
    assert 0.7 <= np.median(spread) / ((quartiles[0] - quartiles[1]) / 1.349) <= 1.4


def test_kernel_shape_factor_is_one_for_many_independent_fixes_and_below_one_for_few_effective_ones():
    # Reference facts: the kernel estimate of many independent normal fixes tends to the normal law itself
    # (Silverman 1986), so its isopleths have the normal areas; for a fixed variance the normal law has the
    # largest high-density regions (maximum entropy; common practice, no source), so a lumpy estimate from
    # about ten effective fixes has a 95 % isopleth smaller than the normal one of its spread.
    from types import SimpleNamespace

    from roamstat.ranges.model import kde_shape_factors

    rng = np.random.default_rng(8)
    t = np.arange(3000) * 3600.0
    fit = SimpleNamespace(position_acf=_independent, params={"sigma_m": 1000.0})
    shape = kde_shape_factors(fit, t, rng.normal(0.0, 1000.0, (8, t.size, 2)))
    assert shape[95] == pytest.approx(1.0, abs=0.02) and shape[50] == pytest.approx(1.0, abs=0.02)
    t = np.arange(0, 30 * DAY + 1, 3600.0)
    fit = SimpleNamespace(position_acf=_ou_acf(3 * DAY), params={"sigma_m": 1000.0})
    tracks = np.stack([ou_positions(t, 1000.0, 3 * DAY, rng) for _ in range(20)])
    assert 0.85 <= kde_shape_factors(fit, t, tracks)[95] <= 0.99
