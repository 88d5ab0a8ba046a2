"""Fit every step-length and turning-angle family to one animal and compare them.

Which observations are used
---------------------------
Steps of length <= ``cfg.min_step`` metres are left out of the step fits and
counted (``n_excluded_steps``, and the ``note`` of every step row).  The
default 0.0 drops only zero-length steps, which no continuous family can
describe.  GPS error makes the shortest steps mostly measurement noise: for a
stationary collar the apparent step is about the error itself.  A sensible
``--min-step`` is a few times the typical horizontal error of the collars,
roughly 5-20 m for modern GPS fixes (more for Argos-type locations); the
excluded count shows how much of the track that removes.  With
``min_step > 0`` the turning angles on either side of such a short step are
left out too (a heading over a few metres of jitter is noise); they are counted
in the turn rows' note.

Steps off the nominal interval
------------------------------
A step and turn model describes movement over one fix interval.  Only steps
whose ``dt_s`` lies within ``FIT_INTERVAL_TOLERANCE`` (10 %, the schedule
tolerance of ``track.py``) of the nominal interval are fitted, and a turn only
when both steps around it are: a step across k missed fixes is k intervals of
movement, and the null walks that gap as k fitted steps (``compare.py``), so
fitting it too would count the gap twice.  The nominal interval is the
schedule of the steps' own intervals (``track.schedule_of_intervals``), so with
``--resample`` it is the grid's interval.  Steps with an end farther than the
same tolerance from an observed fix (``interp_s``, grid positions interpolated
across a missed fix) are left out too: interpolated points lie on straight
lines and give exact-zero turns.  Both counts go into the notes.

Comparison sets (``comparison`` column)
---------------------------------------
- ``full``: exponential, gamma, Weibull and lognormal on all step values.
- ``tail``: power law, truncated power law, and exponential and lognormal with
  their likelihood left-truncated at xmin, all on the steps x >= xmin, where
  xmin comes from the power-law KS scan (Clauset et al. 2009, §3.3).
- ``turn``: uniform, von Mises and wrapped Cauchy on all defined turns.
``delta_aic``, ``weight`` (Akaike weight) and ``best`` (lowest AIC) are
computed within each set only, because AIC compares models of the same data.

Vuong columns (tail rows)
-------------------------
On the left-truncated exponential and lognormal rows, ``vuong_stat`` is the
normalised log-likelihood ratio of *that row's model against the power law*
(positive: the row's model fits better; negative: the power law does) and
``vuong_p`` the two-sided p-value of its sign (Clauset et al. 2009, §5).  The
power law is the xmax -> infinity limit of the truncated power law, so those two
are nested and Vuong's normal approximation does not hold; with xmax fitted at
the largest step neither does chi-square(1).  That row's ``vuong_p`` is the
parametric-bootstrap p-value of the likelihood ratio under the fitted power law
(:mod:`roamstat.models.tail_tests`); small values mean the tail is cut off.

Goodness of fit (power-law row)
-------------------------------
``gof_p`` is the semiparametric-bootstrap goodness-of-fit p-value of the power
law, xmin re-estimated in every replicate (Clauset et al. 2009, §4.1); NaN on
every other row.

When is a power-law (Lévy-like) tail "supported"?
-------------------------------------------------
``AnimalFits.tail_supported`` is True only when the better of power law and
truncated power law has the lowest AIC in the tail set, the power law is
plausible by its goodness of fit (``gof_p > 0.1``, Clauset et al. 2009, §4.1),
AND the power law beats both the left-truncated exponential and the
left-truncated lognormal by Vuong's test (negative statistic on their rows
with p < 0.1, the threshold of Clauset et al. 2009, §5).  The lognormal in
particular mimics a power law over a limited range, so a lowest AIC alone is
not evidence of a Lévy walk.  The rule is deliberately strict: in simulations
(tests/test_models_recovery.py) it made no claim for exponential or lognormal
data, but it also rarely supports a genuine power law unless the tail spans
several decades of step length, because the left-truncated lognormal can follow
a power law closely.  A False value therefore means "not shown", not "absent".
Such a verdict supports, not replaces, expert judgement of the movement data.

References
----------
Clauset, A., Shalizi, C. R. & Newman, M. E. J. (2009). Power-law
distributions in empirical data. SIAM Review 51: 661-703.
Edwards, A. M. et al. (2007). Revisiting Lévy flight search patterns of
wandering albatrosses, bumblebees and deer. Nature 449: 1044-1048.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from functools import partial
from typing import Mapping

import numpy as np
import pandas as pd

from roamstat.models.base import FittedModel, StepModel, TurnModel
from roamstat.models.bootstrap import bootstrap_ci, ci_json
from roamstat.models.powerlaw_tail import MIN_TAIL, fit_power_law, fit_truncated_power_law
from roamstat.models.select import akaike_weights, ks_statistic, vuong_test
from roamstat.models.tail_tests import goodness_of_fit_p_value, truncation_p_value
from roamstat.models.steps import FULL_RANGE, TAIL_REFIT, fit_step_family
from roamstat.models.turns import TURN_FAMILIES
from roamstat.track import SCHEDULE_TOLERANCE, schedule_of_intervals

MIN_VALUES = 10  # fewest observations for any fit (common practice, no source)
#: Relative distance from the nominal interval within which a step is fitted (the schedule tolerance).
FIT_INTERVAL_TOLERANCE = SCHEDULE_TOLERANCE
VUONG_P = 0.1  # significance of the sign of the Vuong statistic (Clauset et al. 2009, §5)
GOF_P = 0.1  # a power law with gof_p <= 0.1 is ruled out (Clauset et al. 2009, §4.1)

COLUMNS = ["variable", "model", "comparison", "params", "n", "loglik", "aic", "aicc", "delta_aic",
           "weight", "ks_stat", "best", "vuong_stat", "vuong_p", "gof_p", "note"]


@dataclass
class AnimalFits:
    """All fits for one animal.

    Attributes
    ----------
    rows : DataFrame
        ``fits.csv`` rows without ``animal_id`` (columns ``COLUMNS``, plus
        ``params_ci`` when bootstrap intervals were asked for).
    best_step : StepModel or None
        Lowest-AIC model of the ``full`` (light-tailed) set.
    best_turn : TurnModel or None
        Lowest-AIC turn model.
    tail : StepModel or None
        The better (AIC) of power law and truncated power law on x >= xmin;
        its ``support[0]`` is xmin.
    step_values, turn_values : ndarray
        The observations the fits used.
    n_excluded_steps : int
        Steps <= min_step left out.
    note : str
        Why something is missing ("" when nothing is).
    tail_supported : bool
        The power-law-tail rule of this module's docstring.
    tail_reason : str
        Why the tail is not supported ("" when it is), for summary.csv.
    """

    rows: pd.DataFrame
    best_step: StepModel | None
    best_turn: TurnModel | None
    tail: StepModel | None
    step_values: np.ndarray
    turn_values: np.ndarray
    n_excluded_steps: int
    note: str = ""
    tail_supported: bool = False
    tail_reason: str = ""
    models: dict = field(default_factory=dict)  # (comparison, model name) -> fitted model
    states: object = None  # states.HmmFit selected for the animal (set by the states stage), for the states null


@dataclass
class _Candidate:
    """One row-to-be: a family fitted (or not) to one comparison set."""

    variable: str
    comparison: str
    name: str
    data: np.ndarray
    model: FittedModel | None
    note: str
    vuong: tuple = (math.nan, math.nan)
    gof_p: float = math.nan


def fit_animal(steps_a: pd.DataFrame, cfg, rng: np.random.Generator) -> AnimalFits:
    """Fit and compare all step-length and turning-angle families for one animal.

    Parameters
    ----------
    steps_a : DataFrame
        The animal's steps (``step_m``, ``turn_rad``, ``segment`` of the data contract).
    cfg : Config
        Uses ``min_step`` (metres) and ``bootstrap`` (replicates; 0 = none).
    rng : numpy.random.Generator
        Source of the bootstrap replicates: the tail tests draw from child
        generators spawned from it, the parameter intervals from ``rng`` itself.

    Returns
    -------
    AnimalFits
    """
    steps, turns, n_excl, counts_note, turn_note = _observations(steps_a, cfg.min_step)
    notes = []
    candidates = []

    problem = _too_little(steps, "step lengths")
    if problem:
        candidates.append(_Candidate("step", "full", "none", steps, None, _join(problem, counts_note)))
        notes.append(f"step: {problem}")
    else:
        for name in FULL_RANGE:
            candidates.append(_attempt("step", "full", name, steps, partial(fit_step_family, name), counts_note))
        tail_set, tail_problem = _tail_candidates(steps, counts_note, rng.spawn(2))
        candidates += tail_set
        if tail_problem:
            notes.append(f"tail: {tail_problem}")

    problem = _too_little(turns, "turning angles")
    if problem:
        candidates.append(_Candidate("turn", "turn", "none", turns, None, _join(problem, turn_note)))
        notes.append(f"turn: {problem}")
    else:
        for name, family in TURN_FAMILIES.items():
            candidates.append(_attempt("turn", "turn", name, turns, family.fit, turn_note))

    rows = _rows(candidates)
    if cfg.bootstrap > 0:
        rows["params_ci"] = [_ci_text(c, cfg.bootstrap, rng) for c in candidates]
    models = {(c.comparison, c.name): c.model for c in candidates if c.model is not None}
    best = {comparison: models[(comparison, model)]  # plain zip: itertuples builds a class per call
            for comparison, model, is_best in zip(rows["comparison"], rows["model"], rows["best"]) if is_best}
    tail = _better(_step(models.get(("tail", "power_law"))), _step(models.get(("tail", "truncated_power_law"))))
    reason = _tail_unsupported_reason(rows, tail, next((n[6:] for n in notes if n.startswith(("step: ", "tail: "))), ""))
    best_turn = best.get("turn")
    assert best_turn is None or isinstance(best_turn, TurnModel)
    return AnimalFits(rows=rows, best_step=_step(best.get("full")), best_turn=best_turn, tail=tail,
                      step_values=steps, turn_values=turns, n_excluded_steps=n_excl,
                      note="; ".join(notes), tail_supported=not reason, tail_reason=reason, models=models)


def fits_table(fits_by_animal: Mapping[str, AnimalFits]) -> pd.DataFrame:
    """``fits.csv`` for several animals: their rows with ``animal_id`` first, in sorted id order.

    Parameters
    ----------
    fits_by_animal : mapping
        animal_id -> AnimalFits.

    Returns
    -------
    DataFrame
    """
    parts = []
    for aid in sorted(fits_by_animal):
        part = fits_by_animal[aid].rows.copy()
        part.insert(0, "animal_id", aid)
        parts.append(part)
    if not parts:
        return pd.DataFrame(columns=["animal_id", *COLUMNS])
    return pd.concat(parts, ignore_index=True)


def on_interval(steps_a: pd.DataFrame) -> tuple[np.ndarray, float, str]:
    """Which steps span one nominal interval between observed positions.

    Parameters
    ----------
    steps_a : DataFrame
        One animal's steps (``dt_s`` and ``interp_s`` of the data contract; a
        missing column counts as on schedule).

    Returns
    -------
    mask : ndarray of bool
        Steps within ``FIT_INTERVAL_TOLERANCE`` of the nominal interval and
        with both ends within that tolerance of an observed fix.
    nominal_dt_s : float
        The nominal interval of the steps (NaN without intervals).
    note : str
        What was left out, "" when nothing was.
    """
    n = len(steps_a)
    dt = _numeric(steps_a, "dt_s", np.nan)
    if "dt_s" not in steps_a or not np.isfinite(dt).any():
        return np.ones(n, dtype=bool), math.nan, ""
    nominal = float(schedule_of_intervals(dt)["nominal_dt_s"])
    slack = FIT_INTERVAL_TOLERANCE * nominal
    regular = np.abs(dt - nominal) <= slack
    observed = _numeric(steps_a, "interp_s", 0.0) <= slack
    parts = []
    if (~regular).any():
        parts.append(f"{int((~regular).sum())} steps not within {FIT_INTERVAL_TOLERANCE:.0%} of the nominal "
                     f"interval {nominal:g} s left out")
    if (regular & ~observed).any():
        parts.append(f"{int((regular & ~observed).sum())} steps with an interpolated end left out")
    return regular & observed, nominal, "; ".join(parts)


def _numeric(frame: pd.DataFrame, name: str, default: float) -> np.ndarray:
    if name not in frame:
        return np.full(len(frame), default)
    if frame[name].dtype.kind == "f":  # already numeric: skip the costly coercion
        return frame[name].to_numpy(float)
    return pd.to_numeric(frame[name], errors="coerce").to_numpy(float)


def _observations(steps_a: pd.DataFrame, min_step: float):
    """Step and turn values used by the fits, with counts of what was left out."""
    step = _numeric(steps_a, "step_m", np.nan)
    turn = _numeric(steps_a, "turn_rad", np.nan)
    usable, _, interval_note = on_interval(steps_a)
    missing = ~np.isfinite(step)
    short = np.isfinite(step) & (step <= min_step)
    n_excl = int((short & usable).sum())
    parts = [interval_note]
    if n_excl:
        parts.append(f"{n_excl} steps <= min_step {min_step:g} m left out")
    if (missing & usable).any():
        parts.append(f"{int((missing & usable).sum())} steps without a length left out")
    turn_ok = np.isfinite(turn)
    segment = steps_a["segment"].to_numpy() if "segment" in steps_a else np.zeros(len(steps_a))
    # a turn joins a step and the one before it: both must be fitted steps
    bad = ~usable | (short if min_step > 0 else np.zeros(len(steps_a), dtype=bool))
    prev_bad = np.zeros(len(steps_a), dtype=bool)  # the step before in the same segment (segments are contiguous runs)
    prev_bad[1:] = bad[:-1] & (segment[1:] == segment[:-1])
    near = turn_ok & (bad | prev_bad)
    turn_note = ""
    if near.any():
        why = "a step off the nominal interval" + (f" or <= min_step {min_step:g} m" if min_step > 0 else "")
        turn_note = f"{int(near.sum())} turns next to {why} left out"
    turn_ok &= ~near
    keep = ~missing & ~short & usable
    return step[keep], turn[turn_ok], n_excl, "; ".join(p for p in parts if p), turn_note


def _too_little(x: np.ndarray, what: str) -> str:
    if x.size < MIN_VALUES:
        return f"not enough data: {x.size} {what} (need {MIN_VALUES})"
    if np.ptp(x) == 0:
        return f"not enough data: all {x.size} {what} equal ({x[0]:g})"
    return ""


def _attempt(variable, comparison, name, data, fitter, note, vuong_against=None):
    try:
        model = fitter(data)
    except (FloatingPointError, ValueError, RuntimeError) as exc:
        return _Candidate(variable, comparison, name, data, None, _join(f"fit failed: {exc}", note))
    if model is None:
        return _Candidate(variable, comparison, name, data, None, _join("fit failed", note))
    if getattr(model, "at_bound", False):
        note = _join("stopped at its parameter bound (nearly degenerate data)", note)
    vuong = (math.nan, math.nan)
    if vuong_against is not None:
        vuong = vuong_test(model.logpdf(data), vuong_against.logpdf(data))
    return _Candidate(variable, comparison, name, data, model, note, vuong)


def _tail_candidates(steps: np.ndarray, counts_note: str, rngs):
    power = fit_power_law(steps)
    if power is None:
        problem = f"not enough data for a tail fit (need {MIN_TAIL} steps at or above a candidate xmin)"
        return [_Candidate("step", "tail", "none", steps, None, _join(problem, counts_note))], problem
    xmin = power.xmin
    tail = np.sort(steps[steps >= xmin])
    where = f"tail x >= xmin {xmin:.6g} m: {tail.size} of {steps.size} steps"
    gof_p = goodness_of_fit_p_value(steps, xmin, power.alpha, rngs[0])
    out = [_Candidate("step", "tail", "power_law", tail, power, _join(where, counts_note), gof_p=gof_p)]
    truncated = _attempt("step", "tail", "truncated_power_law", tail, partial(fit_truncated_power_law, xmin=xmin),
                         _join(where, "vuong_p: bootstrap likelihood-ratio test against the power law", counts_note),
                         vuong_against=power)
    if truncated.model is not None:
        truncated.vuong = (truncated.vuong[0], truncation_p_value(tail, xmin, rngs[1])[1])
    out.append(truncated)
    for name in TAIL_REFIT:
        out.append(_attempt("step", "tail", name, tail, partial(fit_step_family, name, xmin=xmin),
                            _join(where, "likelihood left-truncated at xmin", counts_note),
                            vuong_against=power))
    return out, ""


def _rows(candidates) -> pd.DataFrame:
    records = []
    for c in candidates:
        m = c.model
        records.append({
            "variable": c.variable, "model": c.name, "comparison": c.comparison,
            "params": json.dumps(m.params if m else {}, sort_keys=True),
            "n": int(m.n if m else c.data.size),
            "loglik": m.loglik if m else math.nan, "aic": m.aic if m else math.nan,
            "aicc": m.aicc if m else math.nan, "delta_aic": math.nan, "weight": math.nan,
            "ks_stat": ks_statistic(c.data, m.cdf) if m else math.nan, "best": False,
            "vuong_stat": c.vuong[0], "vuong_p": c.vuong[1], "gof_p": c.gof_p, "note": c.note,
        })
    # Ranked on plain arrays before the table is built: per-comparison DataFrame edits cost
    # milliseconds, which dominated runs of many short tracks.
    aic = np.array([r["aic"] for r in records], dtype=float)
    comparison = np.array([r["comparison"] for r in records], dtype=object)
    for name in dict.fromkeys(comparison):
        idx = np.flatnonzero(comparison == name)
        delta, weight = akaike_weights(aic[idx])
        for i, d, w in zip(idx, delta, weight):
            records[i]["delta_aic"], records[i]["weight"] = float(d), float(w)
        if not np.isnan(aic[idx]).all():
            records[idx[np.nanargmin(aic[idx])]]["best"] = True  # the first listed wins an exact tie
    return pd.DataFrame.from_records(records, columns=COLUMNS)


def _ci_text(c: _Candidate, replicates: int, rng: np.random.Generator) -> str:
    if c.model is None:
        return ci_json({})
    ci, _ = bootstrap_ci(c.model, replicates, rng)
    return ci_json(ci)


def _step(model: FittedModel | None) -> StepModel | None:
    """A ``full`` or ``tail`` comparison's model, typed as the step model it always is."""
    assert model is None or isinstance(model, StepModel)
    return model


def _better(a: StepModel | None, b: StepModel | None) -> StepModel | None:
    if a is None or b is None:
        return a or b
    return b if b.aic < a.aic else a


def _tail_unsupported_reason(rows: pd.DataFrame, tail: StepModel | None, problem: str) -> str:
    """"" when the tail rule of the module docstring holds, else why not (``problem``: why no tail was fitted)."""
    if tail is None:
        return f"insufficient: {problem}" if problem else "no tail model could be fitted"
    t = rows[rows["comparison"] == "tail"].set_index("model")
    if tail.name not in t.index or not bool(t.at[tail.name, "best"]):
        return "a light-tailed family has a lower AIC above xmin"
    if not t.at["power_law", "gof_p"] > GOF_P:
        return (f"the power law fails its goodness-of-fit test (p {t.at['power_law', 'gof_p']:.2g}, "
                f"needs > {GOF_P:g})")
    for alternative in TAIL_REFIT:
        if alternative not in t.index:
            return f"{alternative} could not be fitted above xmin for comparison"
        stat, p = t.at[alternative, "vuong_stat"], t.at[alternative, "vuong_p"]
        if not (stat < 0 and p < VUONG_P):
            return f"not distinguishable from {alternative} (Vuong p {p:.2g}, needs < {VUONG_P:g})"
    return ""


def _join(*parts: str) -> str:
    return "; ".join(p for p in parts if p)
