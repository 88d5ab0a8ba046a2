"""Named choices at the extension points, with the words users see.

A :class:`Registry` maps a name (what the user types, what the tables say) to an
:class:`Entry`: a one-line summary for the command-line help, a sentence for the
report's methods text with its reference, and the object that does the work.
The work is named as ``"module:attribute"`` and imported on first use, so the
command line can list the choices without importing numpy or scipy.

The registries themselves live beside the code they choose from:

- null models: :data:`NULLS` below (every name is a module of ``roamstat.nulls``);
- step-length families: ``roamstat.models.steps.STEP_FAMILIES``;
- turning-angle families: ``roamstat.models.turns.TURN_FAMILIES``;
- home-range methods: ``roamstat.ranges.estimate.RANGE_METHODS``;
- screening rules: ``roamstat.screen.REASONS`` (reason code -> text).

The command-line choices, :func:`roamstat.config.check_config`, the report's
methods text and ``tests/test_registry_docs.py`` (which holds the docs tables to
them) all read these; nothing else lists the names.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from typing import Any, Iterator

from roamstat.errors import RoamstatError


@dataclass(frozen=True)
class Entry:
    """One choice at an extension point.

    Attributes
    ----------
    name : str
        What the user types and the tables show (snake_case).
    summary : str
        One line for ``--help`` and error messages.
    methods : str
        A sentence (trusted HTML, with its reference) for the report's methods text.
    target : str
        ``"module:attribute"`` of the object that does the work, imported by :meth:`load`.
    """

    name: str
    summary: str
    methods: str = ""
    target: str = ""
    default: bool = True  # chosen when the user names none (nulls: offered-only ones set False)

    def load(self) -> Any:
        """The object named by ``target``."""
        module, _, attribute = self.target.partition(":")
        return getattr(importlib.import_module(module), attribute)


class Registry:
    """Ordered name -> :class:`Entry` for one extension point.

    Parameters
    ----------
    what : str
        What the entries are, for messages (e.g. "null model").
    option : str
        The command-line option that chooses among them (e.g. "--null").
    entries : iterable of Entry
        In their canonical order (for nulls: the order their generators are spawned in).
    """

    def __init__(self, what: str, option: str, entries) -> None:
        self.what = what
        self.option = option
        self._entries = {e.name: e for e in entries}

    def names(self) -> tuple[str, ...]:
        return tuple(self._entries)

    def defaults(self) -> tuple[str, ...]:
        """The entries used when the user names none, in registry order."""
        return tuple(e.name for e in self if e.default)

    def __contains__(self, name: object) -> bool:
        return name in self._entries

    def __iter__(self) -> Iterator[Entry]:
        return iter(self._entries.values())

    def __len__(self) -> int:
        return len(self._entries)

    def __getitem__(self, name: str) -> Entry:
        if name not in self._entries:
            raise RoamstatError(self.unknown_message([name]))
        return self._entries[name]

    def unknown_message(self, names) -> str:
        """``<option> <names>: unknown <what>; choose from a, b, c``."""
        return (f"{self.option} {','.join(map(str, names))}: unknown {self.what}; "
                f"choose from {', '.join(self.names())}")

    def help_lines(self) -> str:
        """``name: summary`` for every entry, joined by "; " (for ``--help``)."""
        return "; ".join(f"{e.name}: {e.summary}" for e in self)


#: Null walks for the displacement tests.  Append new ones at the end: each null's
#: generator is spawned in this order, so appending keeps earlier results identical.
NULLS = Registry("null model", "--null", (
    Entry("crw", "correlated random walk from the fitted step and turn models",
          "a correlated random walk drawing steps and turns from the animal's best-AIC models "
          "(Kareiva &amp; Shigesada 1983; Turchin 1998)",
          "roamstat.nulls.crw:CrwNull"),
    Entry("shuffle", "the observed steps and turns, resampled",
          "a resampling null that shuffles the observed steps and turns",
          "roamstat.nulls.shuffle:ShuffleNull"),
    Entry("levy", "Lévy walk with the fitted power-law tail, uniform turns",
          "a Lévy walk with the fitted power-law tail of step lengths and uniform turns "
          "(Viswanathan et al. 1999)",
          "roamstat.nulls.levy:LevyNull"),
    Entry("states", "the fitted hidden Markov model of behavioural states (offered, not default)",
          "a state-switching walk simulating the animal's fitted hidden Markov model of steps and turns "
          "(Morales et al. 2004; Langrock et al. 2012)",
          "roamstat.nulls.states:StatesNull", default=False),
    Entry("ctcrw", "the best unbounded continuous-time motion model, simulated at the animal's own fix "
                   "times with its location error",
          "the animal's best unbounded continuous-time motion model (Brownian motion or the continuous-time "
          "correlated random walk of Johnson et al. 2008, by AICc), simulated exactly at its own fix times "
          "with each fix's location error",
          "roamstat.nulls.ctcrw:CtcrwNull"),
))

#: The null that stands for "an unbounded random walk with the animal's own steps and turns":
#: residency does not call an animal a range-study candidate if it is "farther" than this one.
UNBOUNDED_WALK_NULL = "crw"
