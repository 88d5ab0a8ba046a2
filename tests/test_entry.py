"""The console entry point limits BLAS threads by default and leaves a user's own choice alone."""

from __future__ import annotations

import gc
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
    gc.unfreeze()  # entry.main froze this test process's objects: let them be collected again


def test_only_the_command_freezes_the_collector(monkeypatch, tmp_path):
    # Python's gc.freeze docs: frozen objects are ignored by every later collection, hence the exit
    # cost it saves; a library call must not do it (its garbage would never be collected)
    gc.unfreeze()
    try:
        assert roamstat.cli.main(["inspect", str(tmp_path / "absent.csv")]) == 2  # the library: a whole command
        assert gc.get_freeze_count() == 0
        monkeypatch.setattr(roamstat.cli, "main", lambda argv=None: 0)
        entry.main(["inspect", "x.csv"])
        assert gc.get_freeze_count() > 0
    finally:
        gc.unfreeze()  # the test process goes on collecting as before
