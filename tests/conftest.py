"""Shared fixtures: paths to the sample deployment and the open real datasets."""

from __future__ import annotations

from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
SAMPLE = REPO / "sample_tracks" / "collars.csv"
REALDATA = REPO.parent / "shared" / "realdata"


@pytest.fixture
def sample_csv() -> Path:
    if not SAMPLE.exists():
        pytest.fail(f"sample data missing: regenerate with python {REPO / 'sample_tracks' / 'make_sample.py'}")
    return SAMPLE


def realdata(name: str) -> Path:
    """Path of an open dataset in ../shared/realdata, or skip the test saying why."""
    path = REALDATA / name
    if not path.exists():
        pytest.skip(f"open dataset {name} not found in {REALDATA} (it lives beside the repo, not in it)")
    return path
