"""Parquet output for big deployments."""

from __future__ import annotations

import io
from pathlib import Path

import pandas as pd

from roamstat.io.write import atomic_write


def write_parquet(table: pd.DataFrame, path: str | Path) -> Path:
    """Write a table as Parquet, atomically (times stay timezone-aware UTC)."""
    buffer = io.BytesIO()
    table.to_parquet(buffer, index=False, engine="pyarrow")
    return atomic_write(path, buffer.getvalue())
