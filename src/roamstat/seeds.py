"""Per-animal random generators that do not depend on order, workers or backend.

Each (run seed, animal id, stage) triple gets its own
:class:`numpy.random.SeedSequence`, keyed by a stable hash of the animal id,
so an animal's random draws are the same whether it is analysed first or
last, alone or beside a thousand others, serially or on a cluster.
"""

from __future__ import annotations

import hashlib

import numpy as np


def _words(text: str) -> list[int]:
    digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).digest()
    return [int.from_bytes(digest[i : i + 4], "little") for i in range(0, 16, 4)]


def animal_rng(seed: int, animal_id: str, stage: str) -> np.random.Generator:
    """The generator for one animal and one stage of a run."""
    entropy = [int(seed) & 0xFFFFFFFF, *_words(str(animal_id)), *_words(stage)]
    return np.random.default_rng(np.random.SeedSequence(entropy))
