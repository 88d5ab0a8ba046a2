"""Behavioural states of one animal: fit K = 1, 2, 3, select by BIC, decode, tabulate.

``fit_animal_states(steps_a, cfg, rng)`` is the whole per-animal stage.  The
number of states is chosen by BIC (Schwarz 1978), with AIC (Akaike 1974)
reported beside it; both tend to favour too many states on real movement
data, whose structure no simple HMM fully captures (Pohle et al. 2017), so
the choice supports, and does not replace, the biologist's judgement.

References
----------
Akaike, H. (1974). IEEE Transactions on Automatic Control 19: 716-723.
Schwarz, G. (1978). Estimating the dimension of a model. Annals of
Statistics 6: 461-464.
Pohle, J., Langrock, R., van Beest, F. M. & Schmidt, N. M. (2017). Selecting
the number of states in hidden Markov models: pragmatic solutions
illustrated using animal movement. Journal of Agricultural, Biological and
Environmental Statistics 22: 270-293.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from roamstat.results import empty_table
from roamstat.states.chain import Chain, build_chain
from roamstat.states.decode import decode
from roamstat.states.families import TURN_FAMILIES, check_families, step_model
from roamstat.states.fit import HmmFit, fit_hmm
from roamstat.states.likelihood import Observations

#: Fewest observed one-interval steps per state for a K-state fit (rule of thumb, no source:
#: each state needs enough steps for its four parameters and its transitions).
MIN_STEPS_PER_STATE = 30

MODEL_COLUMNS = ["animal_id", "n_states", "state", "step_family", "step_params", "zero_mass", "turn_family",
                 "turn_params", "mean_step_m", "stationary_p", "mean_dwell_s"]
FIT_COLUMNS = ["n_steps", "loglik", "n_params", "aic", "bic", "delta_bic", "best", "n_starts", "n_best_starts",
               "converged"]


@dataclass
class StatesResult:
    """One animal's state models.

    Attributes
    ----------
    rows : DataFrame
        ``state_models.csv`` rows: one per (K, state), columns :func:`model_columns`.
    decoded : DataFrame
        ``states.csv`` rows, one per step (input row order), columns :func:`decoded_columns`,
        from the best model; empty when no model was fitted.
    best : HmmFit or None
        The model selected by BIC.
    fits : dict
        K -> HmmFit for every K fitted.
    chain : Chain
        The steps laid on slots.
    note : str
        Why some K (or all) were not fitted.
    """

    rows: pd.DataFrame
    decoded: pd.DataFrame
    best: HmmFit | None
    fits: dict = field(default_factory=dict)
    chain: Chain | None = None
    note: str = ""


def model_columns(max_states: int) -> list[str]:
    """Columns of ``state_models.csv`` (transition row: ``p_to_state_1`` ... ``p_to_state_<max>``)."""
    return MODEL_COLUMNS + [f"p_to_state_{j}" for j in range(1, max_states + 1)] + FIT_COLUMNS


def decoded_columns(max_states: int) -> list[str]:
    """Columns of ``states.csv``."""
    return (["animal_id", "time", "state"] + [f"p_state_{j}" for j in range(1, max_states + 1)]
            + ["step_residual", "turn_residual"])


def fit_animal_states(steps_a: pd.DataFrame, cfg, rng: np.random.Generator) -> StatesResult:
    """Fit K-state movement HMMs to one animal's steps and decode the best.

    Parameters
    ----------
    steps_a : DataFrame
        One animal's steps (``track.STEP_COLUMNS``).
    cfg : Config
        Uses ``state_counts``, ``state_starts``, ``state_step_family``,
        ``state_turn_family`` and ``min_step`` (steps at or below it form the zero mass).
    rng : numpy.random.Generator
        Random starting points; one child generator per K, in the order of
        ``cfg.state_counts``.

    Returns
    -------
    StatesResult
    """
    check_families(cfg.state_step_family, cfg.state_turn_family)
    counts = tuple(cfg.state_counts)
    max_k = max(counts)
    animal = str(steps_a["animal_id"].iloc[0]) if len(steps_a) else ""
    chain = build_chain(steps_a)
    obs = Observations(chain, cfg.min_step)
    fits, skipped = {}, []
    for k, child in zip(counts, rng.spawn(len(counts))):
        if obs.n_obs < MIN_STEPS_PER_STATE * k or obs.step_pos.size == 0:
            skipped.append(k)
            continue
        fit = fit_hmm(obs, k, cfg.state_step_family, cfg.state_turn_family, cfg.state_starts, child)
        if fit is None:
            skipped.append(k)
        else:
            fits[k] = fit
    note = ""
    if skipped:
        note = (f"K={','.join(map(str, skipped))} not fitted: {obs.n_obs} one-interval steps, "
                f"{MIN_STEPS_PER_STATE} per state needed")
    if not fits:
        return StatesResult(empty_table(model_columns(max_k)), empty_table(decoded_columns(max_k)), None, {}, chain,
                            note)
    best_k = min(fits, key=lambda k: fits[k].bic)
    rows = _model_rows(animal, fits, best_k, chain.nominal_dt_s, max_k)
    decoded = _decoded_rows(animal, steps_a, chain, obs, fits[best_k], max_k)
    return StatesResult(rows, decoded, fits[best_k], fits, chain, note)


def _model_rows(animal: str, fits: dict, best_k: int, dt_s: float, max_k: int) -> pd.DataFrame:
    records = []
    best_bic = fits[best_k].bic
    for k, fit in sorted(fits.items()):
        p = fit.params
        delta = p.delta
        conc_key = TURN_FAMILIES[p.turn_family].keys[1]
        for i in range(k):
            law = step_model(p.step_family, p.shape[i], p.scale[i])
            zero = 0.0 if p.zero is None else float(p.zero[i])
            stay = p.gamma[i, i]
            record = {
                "animal_id": animal, "n_states": k, "state": i + 1,
                "step_family": p.step_family, "step_params": json.dumps(law.params, sort_keys=True),
                "zero_mass": zero, "turn_family": p.turn_family,
                "turn_params": json.dumps({"mu": float(np.angle(np.exp(1j * p.mu[i]))), conc_key: float(p.conc[i])},
                                          sort_keys=True),
                "mean_step_m": (1.0 - zero) * law.mean(), "stationary_p": float(delta[i]),
                # sojourn times of a Markov chain are geometric with mean 1 / (1 - gamma_ii)
                "mean_dwell_s": dt_s / (1.0 - stay) if stay < 1.0 else math.inf,
                "n_steps": fit.n_obs, "loglik": fit.loglik, "n_params": fit.n_free, "aic": fit.aic,
                "bic": fit.bic, "delta_bic": fit.bic - best_bic, "best": k == best_k,
                "n_starts": fit.n_starts, "n_best_starts": fit.n_best_starts, "converged": fit.converged,
            }
            for j in range(max_k):
                record[f"p_to_state_{j + 1}"] = float(p.gamma[i, j]) if j < k else math.nan
            records.append(record)
    return pd.DataFrame.from_records(records, columns=model_columns(max_k))


def _decoded_rows(animal: str, steps_a: pd.DataFrame, chain: Chain, obs: Observations, fit: HmmFit,
                  max_k: int) -> pd.DataFrame:
    dec = decode(obs, fit.params)
    slot = chain.row_slot
    out = {"animal_id": animal, "time": steps_a["t_start"].reset_index(drop=True), "state": dec.state[slot] + 1}
    for j in range(max_k):
        out[f"p_state_{j + 1}"] = dec.local[slot, j] if j < fit.n_states else np.full(slot.size, np.nan)
    out["step_residual"] = np.where(chain.row_step, dec.step_residual[slot], np.nan)
    out["turn_residual"] = np.where(chain.row_turn, dec.turn_residual[slot], np.nan)
    return pd.DataFrame(out, columns=decoded_columns(max_k))
