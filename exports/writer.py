"""Write the contract tables and their Data Package descriptor to a folder."""

from __future__ import annotations

import csv
import hashlib
import json
import operator
from collections.abc import Iterable
from decimal import Decimal
from pathlib import Path

from ebbtide.game_logic.money import decimal_text
from ebbtide.game_logic.study import Study

from .schema import (
    BOOLEAN_LABELS,
    CONTRACT,
    FALSE_VALUES,
    FIELD_DAY_TABLES,
    FOREIGN_KEYS,
    PRIMARY_KEYS,
    TRUE_VALUES,
    Column,
)

FORMAT_VERSION = "1"


def _field(column: Column) -> dict:
    field = {"name": column.name, "type": column.type, "description": column.description}
    if column.unit:
        field["unit"] = column.unit
    if column.type == "datetime":
        field["format"] = "any"  # ISO 8601 with milliseconds and offset, as the event log stores it
    if column.constraints:
        field["constraints"] = dict(column.constraints)
    if column.type == "boolean":
        field.update(trueValues=TRUE_VALUES, falseValues=FALSE_VALUES,
                     valueLabels={str(k): v for k, v in BOOLEAN_LABELS.items()})
    return field


def table_schema(name: str) -> dict:
    """Table Schema of one table (contract or field day): fields, primary key and foreign keys."""
    columns = CONTRACT.get(name) or FIELD_DAY_TABLES[name]
    schema = {"fields": [_field(c) for c in columns], "primaryKey": PRIMARY_KEYS[name]}
    if FOREIGN_KEYS[name]:
        schema["foreignKeys"] = FOREIGN_KEYS[name]
    return schema


def _cell(value):
    if isinstance(value, bool):
        return "1" if value else "0"  # R's read.csv and Stata read 0/1 as numbers
    if isinstance(value, float):
        # Whole numbers without ".0" keep the CSV readable; others keep full precision.
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, Decimal):
        # Money columns: the exact decimal (0.3), never a binary float's 0.30000000000000004.
        return decimal_text(value)
    return value


def write_table(path: Path, columns: tuple[Column, ...], rows: Iterable[dict]) -> None:
    """Write one CSV table (UTF-8, one header row, booleans as 0/1)."""
    with TableFile(path, columns) as table:
        table.write_rows(rows)


class TableFile:
    """One CSV table open for writing, rows added as they come (the streamed export)."""

    def __init__(self, path: Path, columns: tuple[Column, ...]) -> None:
        self.names = [c.name for c in columns]
        self._handle = path.open("w", encoding="utf-8", newline="")
        self._writer = csv.writer(self._handle, lineterminator="\n")
        self._writer.writerow(self.names)

    def write_rows(self, rows: Iterable[dict]) -> None:
        # Ten million rows for a large pilot: the values fetched in C, and only the cells that
        # are not already text or a whole number go through ``_cell`` (``type``: a bool is not
        # an int here).
        names = self.names
        values = operator.itemgetter(*names) if len(names) > 1 else (lambda row: (row[names[0]],))
        self._writer.writerows(
            [v if type(v) is str or type(v) is int else _cell(v) for v in values(row)] for row in rows
        )

    def close(self) -> None:
        self._handle.close()

    def __enter__(self) -> TableFile:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _tables(names) -> dict[str, tuple[Column, ...]]:
    """The contract tables, then the field-day tables that were written."""
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
                "schema": table_schema(name),
            }
            for name in _tables(written)
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
    return write_descriptor(out, study, session_id, seed, source, tuple(tables))


def write_descriptor(out: Path, study: Study, session_id: str, seed: int, source: str, written=()) -> Path:
    """Write datapackage.json into the export folder ``out``; return the folder."""
    package = descriptor(study, session_id, seed, source, written)
    (out / "datapackage.json").write_text(
        json.dumps(package, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )
    return out
