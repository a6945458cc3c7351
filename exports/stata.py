"""Stata copies of the contract tables: typed from the contract, flags 0/1 with value labels."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from .schema import BOOLEAN_LABELS, CONTRACT


def _typed(table: pd.DataFrame, name: str) -> pd.DataFrame:
    """Columns typed by the contract, so a table with no rows has the same types as a full one."""
    out = pd.DataFrame(index=table.index)
    for column in CONTRACT[name]:
        values = table[column.name]
        required = column.constraints.get("required", False)
        if column.type == "integer" and required:
            out[column.name] = values.astype("int64")
        elif column.type in ("integer", "number"):
            # An optional whole number (an empty ask, no risk gamble) may be Stata's missing value.
            out[column.name] = values.astype("float64")
        elif column.type == "boolean" and not required:
            # An unknown flag (a phone's pictures mode) is Stata's missing value, not 1.
            out[column.name] = values.astype("float64")
        elif column.type == "boolean":
            out[column.name] = values.astype(bool).astype("int8")  # Stata has no boolean type
        else:
            out[column.name] = values.astype(str).astype(object)
    return out


def write_stata(folder: str | Path) -> list[Path]:
    """Write each contract table as a Stata 118 ``.dta`` file with variable and value labels.

    Reads the folder through the analysis reader (which checks every cell), so a
    damaged table is refused before any ``.dta`` file is written.
    """
    from ebbtide.analysis.exports_reader import read_table

    folder = Path(folder)
    tables = {name: _typed(read_table(folder, name, allow_empty=True), name) for name in CONTRACT}
    written = []
    for name, table in tables.items():
        labels = {c.name: c.description[:80] for c in CONTRACT[name]}
        flags = {c.name: dict(BOOLEAN_LABELS) for c in CONTRACT[name] if c.type == "boolean"}
        path = folder / f"{name}.dta"
        table.to_stata(path, write_index=False, version=118, variable_labels=labels,
                       value_labels=flags or None)
        written.append(path)
    return written
