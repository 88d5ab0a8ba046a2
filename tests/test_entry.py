"""The console entry point limits BLAS threads by default and leaves a user's own choice alone."""

from __future__ import annotations

import os

import roamstat.cli
from roamstat import entry


def test_blas_threads_default_to_one_and_the_users_choice_wins(monkeypatch):
    # common practice, no source: one BLAS thread per worker process when the work is parallel by process
    seen = {}
    monkeypatch.setattr(roamstat.cli, "main", lambda argv=None: seen.update(argv=argv) or 0)
    for name in entry.BLAS_THREAD_VARIABLES:
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("OMP_NUM_THREADS", "3")
    assert entry.main(["inspect", "x.csv"]) == 0
    assert seen["argv"] == ["inspect", "x.csv"]
    assert os.environ["OPENBLAS_NUM_THREADS"] == "1"
    assert os.environ["MKL_NUM_THREADS"] == "1"
    assert os.environ["OMP_NUM_THREADS"] == "3"
