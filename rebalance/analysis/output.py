"""Write analysis tables as CSV files, atomically (:func:`rebalance.files.atomic_file`), so a
reader never sees half a table."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from rebalance.files import atomic_file

__all__ = ["write_table", "write_tables"]


# Significant digits of an analysis table's numbers: float dust off (scenarios.csv had
# 2021.6299999999994 FTE-periods of demand, a sum of 2021.63's rows), every real digit kept.
CSV_DIGITS = 12


def write_table(frame: pd.DataFrame, path: str | Path) -> Path:
    """Write ``frame`` to ``path`` (CSV, no index, numbers to :data:`CSV_DIGITS` significant
    digits), whole or not at all."""
    target = Path(path)
    with atomic_file(target) as tmp, open(tmp, "x", encoding="utf-8", newline="") as handle:
        frame.to_csv(handle, index=False, float_format=f"%.{CSV_DIGITS}g")
    return target


def write_tables(tables: dict[str, pd.DataFrame], folder: str | Path) -> list[Path]:
    """Write each ``name -> frame`` as ``folder/name`` (names include ``.csv``)."""
    return [write_table(frame, Path(folder) / name) for name, frame in tables.items()]
