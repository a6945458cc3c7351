"""Write the contract tables and their Data Package descriptor to a folder."""

from __future__ import annotations

import csv
import hashlib
import json
from decimal import Decimal
from pathlib import Path

from ebbtide.game_logic.money import decimal_text
from ebbtide.game_logic.study import Study

from .schema import CONTRACT, Column

FORMAT_VERSION = "1"


def _field(column: Column) -> dict:
    field = {"name": column.name, "type": column.type, "description": column.description}
    if column.unit:
        field["unit"] = column.unit
    if column.type == "datetime":
        field["format"] = "any"  # ISO 8601 with milliseconds and offset, as the event log stores it
    return field


def _cell(value):
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        # Whole numbers without ".0" keep the CSV readable; others keep full precision.
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, Decimal):
        # Money columns: the exact decimal (0.3), never a binary float's 0.30000000000000004.
        return decimal_text(value)
    return value


def write_table(path: Path, columns: tuple[Column, ...], rows: list[dict]) -> None:
    """Write one CSV table (UTF-8, one header row, Table Schema booleans)."""
    names = [c.name for c in columns]
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(names)
        for row in rows:
            writer.writerow([_cell(row[name]) for name in names])


def _tables(names) -> dict[str, tuple[Column, ...]]:
    """The contract tables, then the field-day tables that were written."""
    from .field_day import FIELD_DAY_TABLES

    return {**CONTRACT, **{name: cols for name, cols in FIELD_DAY_TABLES.items() if name in names}}


def descriptor(study: Study, session_id: str, seed: int, source: str, written=()) -> dict:
    """Frictionless Data Package descriptor: every column's type, unit and meaning."""
    from .field_day import survey_codebook

    package = {
        "profile": "tabular-data-package",
        "name": session_id,
        "title": study.session.title,
        "resources": [
            {
                "name": name,
                "path": f"{name}.csv",
                "profile": "tabular-data-resource",
                "format": "csv",
                "mediatype": "text/csv",
                "encoding": "utf-8",
                "schema": {"fields": [_field(c) for c in columns]},
            }
            for name, columns in _tables(written).items()
        ],
        "ebbtide": {
            "format_version": FORMAT_VERSION,
            "session_id": session_id,
            "source": source,
            "seed": seed,
            "study_sha256": hashlib.sha256(study.source_text.encode("utf-8")).hexdigest(),
            "study": study.source_text,
        },
    }
    for resource in package["resources"]:
        if resource["name"] == "surveys":
            # Each item's wording per language and its allowed answers (the study's own words).
            resource["ebbtide_items"] = survey_codebook(study)
    return package


def write_export(
    out_dir: str | Path,
    study: Study,
    session_id: str,
    seed: int,
    source: str,
    tables: dict[str, list[dict]],
) -> Path:
    """Write decisions.csv, rounds.csv, seats.csv and datapackage.json into ``out_dir``."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    for name, columns in _tables(tables).items():
        write_table(out / f"{name}.csv", columns, tables[name])
    package = descriptor(study, session_id, seed, source, tuple(tables))
    (out / "datapackage.json").write_text(
        json.dumps(package, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )
    return out
