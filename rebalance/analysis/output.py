"""Write analysis tables as CSV files, atomically: each file is written whole under a
temporary name in its folder and renamed into place, so a reader never sees half a table."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pandas as pd

__all__ = ["write_table", "write_tables"]


def write_table(frame: pd.DataFrame, path: str | Path) -> Path:
    """Write ``frame`` to ``path`` (CSV, no index) by temp file and ``os.replace``."""
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as handle:
            frame.to_csv(handle, index=False)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target


def write_tables(tables: dict[str, pd.DataFrame], folder: str | Path) -> list[Path]:
    """Write each ``name -> frame`` as ``folder/name`` (names include ``.csv``)."""
    return [write_table(frame, Path(folder) / name) for name, frame in tables.items()]
