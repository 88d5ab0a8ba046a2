"""Behavioural states: hidden Markov models of step length and turning angle.

``fit_animal_states(steps_a, cfg, rng)`` fits K-state HMMs (K in
``cfg.state_counts``) to one animal's steps, selects K by BIC, decodes the
best model and returns the rows of ``state_models.csv`` and ``states.csv``.
:func:`simulate_hmm` simulates a fitted model (the ``states`` null walk).

References
----------
Morales, J. M. et al. (2004). Ecology 85: 2436-2445.
Langrock, R. et al. (2012). Ecology 93: 2336-2342.
Patterson, T. A. et al. (2017). Statistical modelling of individual animal
movement: an overview of key methods and a discussion of practical
challenges. AStA Advances in Statistical Analysis 101: 399-438.
Zucchini, W., MacDonald, I. L. & Langrock, R. (2016). Hidden Markov Models
for Time Series: An Introduction Using R, 2nd ed. CRC Press.
"""

from roamstat.states.animal import StatesResult, decoded_columns, fit_animal_states, model_columns
from roamstat.states.fit import HmmFit, fit_hmm
from roamstat.states.params import HmmParams
from roamstat.states.simulate import simulate_hmm

__all__ = ["HmmFit", "HmmParams", "StatesResult", "decoded_columns", "fit_animal_states", "fit_hmm",
           "model_columns", "simulate_hmm"]
