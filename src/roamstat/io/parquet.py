"""Parquet output for big deployments (needs the optional ``pyarrow``)."""

from __future__ import annotations

import io
from pathlib import Path

import pandas as pd

from roamstat.errors import RoamstatError
from roamstat.io.write import atomic_write


def require_pyarrow():
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        raise RoamstatError(
            "Parquet needs pyarrow: install it with pip install 'roamstat[parquet]', or use --format csv"
        ) from None


def write_parquet(table: pd.DataFrame, path: str | Path) -> Path:
    """Write a table as Parquet, atomically (times stay timezone-aware UTC)."""
    require_pyarrow()
    buffer = io.BytesIO()
    table.to_parquet(buffer, index=False, engine="pyarrow")
    return atomic_write(path, buffer.getvalue())
