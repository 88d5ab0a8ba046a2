"""The report's behavioural-state pieces: figures of one animal's selected HMM and the time-in-state text.

Every figure takes plain numbers and returns PNG bytes (drawn like
:mod:`roamstat.report.figures`); :func:`state_jobs` lists them for one
animal as ``(kind, caption, draw)`` with ``draw`` a function of no arguments,
and :func:`time_in_state` gives the deployment overview one string per
animal.  States are numbered as in ``states.csv`` (state 1 has the shortest
mean step) and always drawn in the same colour.

References
----------
Tukey, J. W. (1977). Exploratory Data Analysis. Addison-Wesley (box plots, 1.5 IQR whiskers).
Okabe, M. & Ito, K. (2008). Color Universal Design (CUD): how to make
figures and presentations that are friendly to colorblind people.
https://jfly.uni-koeln.de/color/ (the palette below, from memory).
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press (pseudo-residuals, §6.2).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from matplotlib.cbook import boxplot_stats
from matplotlib.patches import Polygon
from scipy import stats

from roamstat.report.figures import (NORMAL, Picture, _coordinate_labels, _png, _take, distance_scale, set_log,
                                     stairs)
from roamstat.states.families import step_model, turn_model

if TYPE_CHECKING:
    from roamstat.report.sections import Fragment

#: One colour per state (blue, orange, bluish green, reddish purple of the Okabe & Ito 2008 set):
#: distinguishable under the common colour-vision deficiencies.
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#CC79A7")
WIDE = (7.0, 3.4)

CAPTIONS = {
    "state_track": "Track coloured by the decoded (Viterbi) behavioural state of the step leaving each fix; "
                   "state 1 has the shortest mean step.",
    "state_densities": "Step lengths and turning angles of the steps decoded in each state (histograms, as "
                       "densities within the state) with that state's fitted density.",
    "state_residuals": "Normal Q–Q plot of the model's ordinary pseudo-residuals for steps and turns (one axes) "
                       "(Zucchini, MacDonald & Langrock 2016): points on the line mean the fitted state "
                       "model describes the observations.",
    "state_budget": "Time budget (share of decoded steps per state; ◆ the model's stationary probability) and "
                    "dwell times (runs of one decoded state; ◆ the model's mean dwell time). Runs cut by a "
                    "gap or the track's ends are counted as seen, so long dwells are underestimated.",
}


def _colour(state: int | np.integer) -> str:
    return PALETTE[(int(state) - 1) % len(PALETTE)]


def _states_present(state) -> list[int]:
    state = np.asarray(state, float)
    return sorted({int(s) for s in state[np.isfinite(state)]})


# --- data ------------------------------------------------------------------------

def state_of_fixes(track: pd.DataFrame, decoded: pd.DataFrame, dt_s: float) -> np.ndarray:
    """The decoded state of the step leaving each fix of ``track`` (NaN where no step leaves it).

    Each fix takes the state of the step that starts at its time, or less than
    one nominal interval ``dt_s`` before it (``states.csv`` ``time`` is the
    step's start), so observed fixes of a resampled track are coloured too
    and legs across gaps stay uncoloured.
    """
    if track is None or decoded is None or decoded.empty or "time" not in track.columns or not (dt_s > 0):
        return np.full(0 if track is None else len(track), np.nan)
    fix_time = pd.to_datetime(track["time"], utc=True)
    step_time = pd.to_datetime(decoded["time"], utc=True)
    step_state = pd.to_numeric(decoded["state"], errors="coerce").to_numpy(float)
    kept = step_time.notna().to_numpy() & np.isfinite(step_state)
    step_ns = step_time[kept].to_numpy("datetime64[ns]").view(np.int64)
    order = np.argsort(step_ns, kind="stable")
    step_ns, step_state = step_ns[order], step_state[kept][order]
    out = np.full(len(track), np.nan)
    if not step_ns.size:
        return out
    fix_ns = fix_time.to_numpy("datetime64[ns]").view(np.int64)
    # The last step starting at or before each fix (the latest of equal times), within the tolerance.
    last = np.searchsorted(step_ns, fix_ns, side="right") - 1
    tolerance_ns = pd.Timedelta(seconds=0.999 * float(dt_s)).value
    hit = fix_time.notna().to_numpy() & (last >= 0)
    hit[hit] = fix_ns[hit] - step_ns[last[hit]] <= tolerance_ns
    out[hit] = step_state[last[hit]]
    return out


def dwell_runs(decoded: pd.DataFrame, dt_s: float) -> pd.DataFrame:
    """Runs of consecutive steps in one decoded state: ``state``, ``dwell_s`` (steps x ``dt_s``).

    A run ends where the state changes or consecutive steps are more than
    1.5 nominal intervals apart (a gap or a segment break).
    """
    if decoded is None or decoded.empty or not (dt_s > 0):
        return pd.DataFrame({"state": [], "dwell_s": []})
    times = pd.to_datetime(decoded["time"], utc=True)
    t_s = (times - times.min()).dt.total_seconds().to_numpy(float)
    order = np.argsort(t_s, kind="stable")
    t_s = t_s[order]
    state = pd.to_numeric(decoded["state"], errors="coerce").to_numpy(float)[order]
    new_run = np.ones(state.size, dtype=bool)
    new_run[1:] = (state[1:] != state[:-1]) | (np.diff(t_s) > 1.5 * dt_s)
    run_id = np.cumsum(new_run) - 1
    lengths = np.bincount(run_id)
    return pd.DataFrame({"state": state[new_run].astype(int), "dwell_s": lengths * float(dt_s)})


def time_in_state(state_models: pd.DataFrame | None) -> dict[str, str]:
    """Per animal, the selected model's share of time in each state, e.g. ``"1: 62 % · 2: 38 %"``.

    The share is the stationary probability of the state (the long-run
    fraction of time the fitted Markov chain spends there).
    """
    if state_models is None or state_models.empty or not {"animal_id", "best", "state", "stationary_p"} <= set(
            state_models.columns):
        return {}
    best = state_models[state_models["best"].astype(str).str.lower() == "true"]
    out = {}
    for animal, rows in best.groupby(best["animal_id"].astype(str), sort=True):
        rows = rows.sort_values("state")
        out[animal] = " · ".join(f"{int(s)}: {100 * float(p):.0f} %" for s, p in zip(rows["state"], rows["stationary_p"]))
    return out


# --- figures ---------------------------------------------------------------------

def state_track(x_m, y_m, state, masked: bool = False) -> Picture:
    """Track with each leg coloured by the state of the step along it.

    Parameters
    ----------
    x_m, y_m : array-like
        Fixes in time order (metres, the map's planar frame).
    state : array-like
        Decoded state (1-based) of the step leaving each fix; NaN where none.
    masked : bool
        Label the axes as masked coordinates.
    """
    x, y, s = np.asarray(x_m, float), np.asarray(y_m, float), np.asarray(state, float)
    scale, unit = distance_scale(np.concatenate([x, y]))
    x, y = x / scale, y / scale
    fig, ax = _take("state_track", NORMAL)
    legs = np.isfinite(s[:-1]) & np.isfinite(x[:-1]) & np.isfinite(x[1:]) & np.isfinite(y[:-1]) & np.isfinite(y[1:])
    ax.plot(x, y, color="#d0d0d0", linewidth=0.5, zorder=1)  # legs without a decoded step stay grey
    for k in _states_present(s[:-1][legs]):
        # One polyline per state, legs of other states cut out by NaN: a segment collection
        # built one path per leg cost ten times more on long tracks (profiled on the sample).
        mine = np.r_[legs & (s[:-1] == k), False]
        keep = mine | np.r_[False, mine[:-1]]  # a leg's start and end fix
        ax.plot(np.where(keep, x, np.nan), np.where(keep, y, np.nan), color=_colour(k), linewidth=1.1,
                label=f"state {k}", zorder=2)
    ax.autoscale_view()
    _coordinate_labels(ax, unit, masked)
    return _png(fig, ax)


def state_densities(step_m, turn_rad, state, params) -> Picture:
    """Per-state histograms of steps and turns with each state's fitted density.

    Parameters
    ----------
    step_m, turn_rad : array-like
        Observed step length (m) and turning angle (rad) of each step; NaN where unobserved.
    state : array-like
        Decoded state (1-based) of each step.
    params : HmmParams
        The selected model (``step_family``, ``shape``, ``scale``, ``zero``, ``turn_family``, ``mu``, ``conc``).
    """
    steps, turns, s = np.asarray(step_m, float), np.asarray(turn_rad, float), np.asarray(state, float)
    fig, (ax_s, ax_t) = _take("state_densities", WIDE, ncols=2)
    positive = steps[np.isfinite(steps) & (steps > 0)]
    top = float(np.quantile(positive, 0.99)) if positive.size else 1.0
    step_bins = np.linspace(0.0, top, 31)
    grid = np.linspace(top / 300, top, 300)
    turn_bins = np.linspace(-math.pi, math.pi, 25)
    theta = np.linspace(-math.pi, math.pi, 361)
    for i in range(params.n_states):
        k, colour = i + 1, _colour(i + 1)
        mine = s == k
        own_steps = steps[mine & np.isfinite(steps) & (steps > 0) & (steps <= top)]
        own_turns = turns[mine & np.isfinite(turns)]
        # Histograms as one filled outline each (stairs), not ax.hist's patch machinery.
        for ax, own, bins in ((ax_s, own_steps, step_bins), (ax_t, own_turns, turn_bins)):
            if own.size:
                stairs(ax, np.histogram(own, bins=bins, density=True)[0], bins, colour, fill=True, alpha=0.3)
        with np.errstate(all="ignore"):
            f_step = np.exp(step_model(params.step_family, params.shape[i], params.scale[i]).logpdf(grid))
            f_turn = np.exp(turn_model(params.turn_family, params.mu[i], params.conc[i]).logpdf(theta))
        ax_s.plot(grid, f_step, color=colour, linewidth=1.6, label=f"state {k} ({own_steps.size})")
        ax_t.plot(theta, f_turn, color=colour, linewidth=1.6, label=f"state {k}")
    ax_s.set_xlabel("step length (m; up to the 99th percentile)", fontsize=8)
    ax_s.set_ylabel("density within state (per m)", fontsize=8)
    ax_t.set_xlabel("turning angle (rad; 0 = ahead, + = right)", fontsize=8)
    ax_t.set_ylabel("density within state (per rad)", fontsize=8)
    ax_t.set_xlim(-math.pi, math.pi)
    return _png(fig, ax_s)


def residual_qq(step_residual, turn_residual) -> Picture:
    """Normal Q–Q plot of the step and turn pseudo-residuals, in one axes (the same scales)."""
    fig, ax = _take("state_residuals", NORMAL)
    lim = 0.0
    for values, what, colour in ((step_residual, "steps", PALETTE[0]), (turn_residual, "turns", PALETTE[1])):
        r = np.sort(np.asarray(values, float)[np.isfinite(np.asarray(values, float))])
        if r.size:
            # Blom (1958) plotting positions (i - 3/8) / (n + 1/4), common practice for normal Q-Q plots
            q = stats.norm.ppf((np.arange(1, r.size + 1) - 0.375) / (r.size + 0.25))
            ax.plot(q, r, ".", markersize=2.5, color=colour, label=f"{what} ({r.size})")
            lim = max(lim, float(np.abs(q).max()), float(np.abs(r).max()))
    if lim > 0:
        ax.plot([-lim, lim], [-lim, lim], color="#555555", linewidth=0.8, label="1:1 line")
    ax.set_xlabel("standard normal quantile", fontsize=8)
    ax.set_ylabel("pseudo-residual", fontsize=8)
    return _png(fig, ax)


def state_budget(state, runs: pd.DataFrame, stationary_p, mean_dwell_s) -> Picture:
    """Time budget per state and the distribution of dwell times.

    Parameters
    ----------
    state : array-like
        Decoded state (1-based) of each step.
    runs : DataFrame
        :func:`dwell_runs` (``state``, ``dwell_s``).
    stationary_p, mean_dwell_s : array-like
        The model's stationary probability and mean dwell time (s) per state, states 1..K.
    """
    s = np.asarray(state, float)
    s = s[np.isfinite(s)]
    k_all = np.arange(1, len(stationary_p) + 1)
    fig, (ax_b, ax_d) = _take("state_budget", WIDE, ncols=2)
    share = np.array([np.mean(s == k) if s.size else 0.0 for k in k_all])
    ax_b.bar(k_all, share, color=[_colour(k) for k in k_all], alpha=0.8, label="decoded")
    ax_b.plot(k_all, np.asarray(stationary_p, float), "D", color="black", markersize=5, label="stationary")
    ax_b.set_xticks(k_all, [f"state {k}" for k in k_all])
    ax_b.set_ylabel("share of time", fontsize=8)
    ax_b.set_ylim(0, 1)
    hours = [runs.loc[runs["state"] == k, "dwell_s"].to_numpy(float) / 3600.0 for k in k_all]
    shown = [h if h.size else np.array([np.nan]) for h in hours]
    _boxes(ax_d, shown, k_all)
    mean_h = np.asarray(mean_dwell_s, float) / 3600.0
    ax_d.plot(k_all, np.where(np.isfinite(mean_h), mean_h, np.nan), "D", color="black", markersize=5)
    ax_d.set_xticks(k_all, [f"state {k}" for k in k_all])
    ax_d.set_ylabel("dwell time (h)", fontsize=8)
    if any(h.size and h.max() > 20 * max(np.median(h), 1e-9) for h in hours):
        set_log(ax_d, x=False)
    return _png(fig, ax_b)


def _boxes(ax, samples, states, width: float = 0.5) -> None:
    """Box plots of ``samples`` at x = their state numbers ``states``, in the states' colours.

    Whiskers reach the farthest data within 1.5 IQR of the box (Tukey 1977); data beyond are fliers.
    The statistics are matplotlib's ``boxplot_stats``, drawn as ``Axes.boxplot`` with its default styles draws
    them, but as one line for all whiskers and caps, one for the medians and one for the fliers:
    ``boxplot`` builds seven artists per box and re-reads every setting for each (a third of this
    figure's time, profiled on the sample deployment).
    """
    lines_x, lines_y, med_x, med_y, fly_x, fly_y = [], [], [], [], [], []
    for box, pos in zip(boxplot_stats(samples, whis=1.5), states):
        if not np.isfinite(box["med"]):
            continue  # a state without dwell runs: no box, as boxplot draws none
        left, right, cap = pos - width / 2, pos + width / 2, width / 4
        outline = [(left, box["q1"]), (right, box["q1"]), (right, box["q3"]), (left, box["q3"]), (left, box["q1"])]
        ax.add_patch(Polygon(outline, closed=True, facecolor=_colour(pos), edgecolor="black", linewidth=1.0, alpha=0.6))
        for end, edge in ((box["whislo"], box["q1"]), (box["whishi"], box["q3"])):
            lines_x += [pos, pos, np.nan, pos - cap, pos + cap, np.nan]
            lines_y += [edge, end, np.nan, end, end, np.nan]
        med_x += [left, right, np.nan]
        med_y += [box["med"], box["med"], np.nan]
        fly_x += [pos] * len(box["fliers"])
        fly_y += list(box["fliers"])
    ax.plot(lines_x, lines_y, color="black", linewidth=1.0)
    ax.plot(med_x, med_y, color="C1", linewidth=1.0, zorder=2.1)
    ax.plot(fly_x, fly_y, linestyle="none", marker="o", markersize=6, markerfacecolor="none",
            markeredgecolor="black", markeredgewidth=1.0)
    # boxplot's x range: half a slot beyond the outer boxes, no margin
    ax.set_xlim(min(states) - 0.5, max(states) + 0.5)


# --- one animal --------------------------------------------------------------------

def state_jobs(states, track: pd.DataFrame | None, masked: bool = False) -> list[tuple]:
    """``(kind, caption, draw)`` for one animal's state figures (none without a fitted model).

    Parameters
    ----------
    states : StatesResult or None
        ``AnimalResult.states``.
    track : DataFrame or None
        The map's fixes of this animal (``time, x_m, y_m``, masked frame when masked), in time order.
    masked : bool
        Label map axes as masked coordinates.
    """
    if states is None or states.best is None or states.decoded.empty:
        return []
    decoded, chain, params = states.decoded, states.chain, states.best.params
    state = pd.to_numeric(decoded["state"], errors="coerce").to_numpy(float)
    slot = chain.row_slot
    step_m = np.where(chain.row_step, chain.step_m[slot], np.nan)
    turn_rad = np.where(chain.row_turn, chain.turn_rad[slot], np.nan)
    best = states.rows[states.rows["best"].astype(bool)].sort_values("state")
    jobs = []
    if track is not None and len(track) > 1 and "time" in track.columns:
        fix_state = state_of_fixes(track, decoded, chain.nominal_dt_s)
        jobs.append(("state_track", CAPTIONS["state_track"],
                     lambda: state_track(track["x_m"], track["y_m"], fix_state, masked)))
    jobs.append(("state_densities", CAPTIONS["state_densities"],
                 lambda: state_densities(step_m, turn_rad, state, params)))
    jobs.append(("state_residuals", CAPTIONS["state_residuals"],
                 lambda: residual_qq(decoded["step_residual"], decoded["turn_residual"])))
    runs = dwell_runs(decoded, chain.nominal_dt_s)
    jobs.append(("state_budget", CAPTIONS["state_budget"],
                 lambda: state_budget(state, runs, best["stationary_p"], best["mean_dwell_s"])))
    return jobs


def section(tables: dict, animal) -> "Fragment":
    """Report section builder: the state-model table and the four state figures (none without a model)."""
    from roamstat.report.html import table
    from roamstat.report.sections import Fragment

    states = getattr(animal.result, "states", None)
    models = tables.get("state_models")
    html = ""
    if isinstance(models, pd.DataFrame) and len(models) and "best" in models:
        best = models[models["best"].astype(bool)]
        shown = [c for c in ("n_states", "state", "step_family", "turn_family", "stationary_p", "mean_dwell_s",
                             "bic", "n_best_starts") if c in best.columns]
        html = "<h4>Behavioural states (selected model)</h4>" + table(best[shown])
    return Fragment(html=html, figures=state_jobs(states, animal.track, animal.masked))
