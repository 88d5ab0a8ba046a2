"""Animals too short for any test: their "insufficient" rows, built directly.

A deployment can hold tens of thousands of animals with a handful of fixes
each (collars that failed, test deployments).  Every stage turns them away
with a note, but running each stage's full code on them costs a few
milliseconds an animal in table handling alone.  An animal with fewer rows
than the smallest minimum of every stage (:func:`shortest_analysed`) is
recognised here before the stages run, and its rows are built as plain
dicts from the stages' own note-building helpers: the same columns, values
and notes the stages write (``tests/test_too_short.py`` checks that the two
paths give identical tables).

The minimums (each stage's own constant): 10 step lengths or turning angles
for a fit, 10 located fixes for a range or a motion model, 20 for a
residency pattern, 30 one-interval steps per behavioural state, and
``cfg.min_steps_test`` steps (one more fix) for a null test.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np

from roamstat import rows
from roamstat.compare import FEW_LOCATED, FEW_PROJECTED, NO_NOMINAL, dropped_note, too_short_note
from roamstat.results import AnimalResult


def shortest_analysed(cfg) -> int:
    """Fewest rows of an animal's fixes table at which some per-animal stage may analyse it.

    An animal with fewer rows has fewer located fixes, fewer steps and fewer
    turns than every stage's minimum, so each stage can only say so.
    """
    from roamstat.models.fit import MIN_VALUES
    from roamstat.motion.fit import MIN_FIXES as MOTION_MIN
    from roamstat.ranges.estimate import MIN_FIXES as RANGE_MIN
    from roamstat.ranges.residency import MIN_FIXES as RESIDENCY_MIN
    from roamstat.states.animal import MIN_STEPS_PER_STATE

    # n rows give at most n - 1 steps and n - 2 turns
    return min(MIN_VALUES + 1, MOTION_MIN, RANGE_MIN, RESIDENCY_MIN,
               MIN_STEPS_PER_STATE * min(cfg.state_counts) + 1, cfg.min_steps_test + 1)


def is_too_short(task) -> bool:
    """Whether ``task``'s animal is below every per-animal stage's minimum."""
    return len(task.fixes) < shortest_analysed(task.cfg)


def short_animal(task) -> AnimalResult:
    """:func:`roamstat.pipeline.analyse_animal` of an animal for which :func:`is_too_short` holds.

    Tables hold plain rows (dicts with ``animal_id`` first); the deployment
    builds one table from all animals' rows.  No behavioural-state result is
    kept (the stage would have fitted nothing), nor, without a report, the
    motion stage's unfitted track.
    """
    cfg, aid = task.cfg, task.animal_id
    result = AnimalResult(animal_id=aid, fits=[], null_tests=[], ranges=[])  # rows, not empty tables: cheaper
    # the stage's own code where its output is more than rows: masked empty layouts, and the report's
    # semivariance figure of the unfitted motion (a report costs far more per animal anyway)
    if "motion" in task.stages and (cfg.mask_locations or "report" in task.stages):
        from roamstat.pipeline import _motion_stage

        _motion_stage(task, rows.located(task.fixes), result)
    if "fit" in task.stages:
        result.fits, result.fitted = _fit_rows(task)
    if "null" in task.stages:
        result.null_tests = _null_rows(task)
    if "ranges" in task.stages:
        from roamstat.ranges.estimate import too_few_fixes
        from roamstat.ranges.residency import too_few_row

        n_located = int(rows.located_mask(task.fixes).sum())
        result.residency = {"animal_id": aid, **too_few_row(n_located)}
        range_rows, result.features, result.range_extras = too_few_fixes(n_located, cfg.mask_locations)
        result.ranges = [{"animal_id": aid, **row} for row in range_rows]
    return result


def _fit_rows(task):
    """fits.csv rows (no family fitted) and the :class:`~roamstat.models.fit.AnimalFits` the report reads."""
    from roamstat.models import fit

    steps, turns, n_excluded, counts_note, turn_note = fit._observations(task.steps, task.cfg.min_step)
    step_problem, turn_problem = fit._too_little(steps, "step lengths"), fit._too_little(turns, "turning angles")
    assert step_problem and turn_problem, "too_short.is_too_short let through an animal with enough steps"
    table = [_unfitted(task.animal_id, "step", "full", steps.size, fit._join(step_problem, counts_note)),
             _unfitted(task.animal_id, "turn", "turn", turns.size, fit._join(turn_problem, turn_note))]
    if task.cfg.bootstrap > 0:
        from roamstat.models.bootstrap import ci_json

        for row in table:
            row["params_ci"] = ci_json({})
    fitted = fit.AnimalFits(rows=_no_rows(), best_step=None, best_turn=None, tail=None, step_values=steps,
                            turn_values=turns, n_excluded_steps=n_excluded,
                            note=f"step: {step_problem}; turn: {turn_problem}", tail_supported=False,
                            tail_reason=f"insufficient: {step_problem}")
    return table, fitted


def _unfitted(animal_id: str, variable: str, comparison: str, n: int, note: str) -> dict:
    """A fits.csv row of a comparison with too little data (what ``models.fit`` writes for it)."""
    return {"animal_id": animal_id, "variable": variable, "model": "none", "comparison": comparison, "params": "{}",
            "n": int(n), "loglik": math.nan, "aic": math.nan, "aicc": math.nan, "delta_aic": math.nan,
            "weight": math.nan, "ks_stat": math.nan, "best": False, "vuong_stat": math.nan, "vuong_p": math.nan,
            "gof_p": math.nan, "note": note}


def _no_rows():
    """The per-animal fits table of a short animal: its rows go straight into the deployment's table."""
    from roamstat.results import empty_table

    return empty_table()


def _null_rows(task) -> list[dict]:
    """null_tests.csv rows: each null's observed-track summary and why it cannot test the track.

    What ``compare.test_animal`` writes for a track below ``cfg.min_steps_test``, computed on the
    animal's arrays (selecting its rows as frames, as the tests do, costs more than everything else).
    """
    from roamstat import compare
    from roamstat.track import NAT_NS, as_ns, duration_s

    cfg, fixes_a = task.cfg, task.fixes
    nominal_dt_s = duration_s(cfg.resample, "--resample") if getattr(cfg, "resample", None) else task.nominal_dt_s
    n_obs_steps = int(np.count_nonzero(np.isfinite(compare._column(task.steps, "step_m"))))
    projected = {"time", "x_m", "y_m"} <= set(fixes_a.columns)
    track = None
    if projected:
        ns, x, y = as_ns(fixes_a["time"]), compare._column(fixes_a, "x_m"), compare._column(fixes_a, "y_m")
        track = (ns, x, y, (ns != NAT_NS) & np.isfinite(x) & np.isfinite(y))
    in_time = _in_time_summary(track, rows.observed_mask(fixes_a), cfg.min_steps_test)
    discrete = _discrete_summary(track, rows.analysed_mask(fixes_a), nominal_dt_s, n_obs_steps, cfg.min_steps_test)
    table = []
    for name in cfg.nulls:
        obs, why = in_time if _in_time(name) else discrete
        row = {"animal_id": task.animal_id, **{c: math.nan for c in compare.ROW_COLUMNS}}
        row.update(null_model=name, n_steps=obs.get("n_steps", 0), observed_net_m=obs.get("net_m", math.nan),
                   note=compare._join(why, obs.get("note", "")))
        table.append(row)
    return table


def _in_time_summary(track, rows_mask: np.ndarray, min_steps: int) -> tuple[dict, str]:
    """``compare._observed_in_time`` of the rows ``rows_mask`` (observed fixes) of a short track."""
    if track is None or rows_mask.sum() < 2:
        return {}, FEW_PROJECTED
    n_good = int(np.count_nonzero(track[3] & rows_mask))
    n_steps = max(n_good - 1, 0)
    return ({"n_steps": n_steps, "note": dropped_note(int(rows_mask.sum()) - n_good)},
            too_short_note(n_steps, min_steps, between_fixes=True))


def _discrete_summary(track, rows_mask: np.ndarray, nominal_dt_s: float, n_obs_steps: int,
                      min_steps: int) -> tuple[dict, str]:
    """``compare._observed`` of the rows ``rows_mask`` (the analysed track) of a short track."""
    if not (math.isfinite(nominal_dt_s) and nominal_dt_s > 0):
        return {}, NO_NOMINAL
    if track is None or rows_mask.sum() < 2:
        return {}, FEW_PROJECTED
    ns, x, y, good = track
    good = good & rows_mask
    n_dropped = int(rows_mask.sum()) - int(np.count_nonzero(good))
    obs = {"n_steps": 0, "net_m": math.nan, "note": dropped_note(n_dropped)}
    if good.any():  # the observed curve's end: NSD of the last fix in time (compare.observed_curve)
        t_s = (ns[good] - ns[good].min()) / 1e9
        order = np.argsort(t_s, kind="stable")
        xs, ys = x[good][order], y[good][order]
        nsd = (xs - xs[0]) ** 2 + (ys - ys[0]) ** 2  # on arrays, as the curve does: scalar powers round differently
        obs["n_steps"] = int(np.rint(t_s[order][-1] / nominal_dt_s))
        obs["net_m"] = float(math.sqrt(nsd[-1]))
    if int(rows_mask.sum()) - n_dropped < 2:
        return obs, FEW_LOCATED
    return obs, too_short_note(n_obs_steps, min_steps)


@cache
def _in_time(name: str) -> bool:
    """Whether the null ``name`` walks in continuous time (its class, loaded once per process)."""
    from roamstat.registry import NULLS

    return bool(getattr(NULLS[name].load(), "in_time", False))
