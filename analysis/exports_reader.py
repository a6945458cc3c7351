"""Read one export folder (a session's or a pooled one) into typed tables."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from ebbtide.exports.schema import CONTRACT
from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.study import Study, parse_study

from .errors import ExportFolderError

TABLES = tuple(CONTRACT)
_TEXT = {"session_id", "group_id", "seat_id", "treatment", "source", "regime_after", "regime_before",
         "block_name", "end_reason", "currency"}
_FLAGS = {"crossed", "recovered", "talk", "show_others", "practice", "pictures"}


@dataclass(frozen=True)
class SessionInfo:
    """One session carried by an export folder: its id, origin, seed and study file."""

    session_id: str
    source: str
    seed: int | None
    study_sha256: str
    study_text: str


@dataclass(frozen=True)
class ExportData:
    """The contract tables of a folder with the sessions they hold (pooled or not)."""

    folder: Path
    format_version: str
    sessions: tuple[SessionInfo, ...]
    decisions: pd.DataFrame
    rounds: pd.DataFrame
    seats: pd.DataFrame

    @property
    def pooled(self) -> bool:
        return len(self.sessions) > 1

    def studies(self) -> dict[str, Study]:
        """Validated study of every session, keyed by session id."""
        found = {}
        for info in self.sessions:
            try:
                found[info.session_id] = parse_study(info.study_text)
            except StudyError as exc:
                raise ExportFolderError(
                    f"{self.folder}: the study file carried for session {info.session_id} is invalid: {exc}"
                ) from exc
        return found


def read_package(folder: Path) -> dict:
    """The folder's datapackage.json, or a clear error naming what is missing."""
    path = folder / "datapackage.json"
    if not folder.is_dir():
        raise ExportFolderError(f"{folder}: no such folder; give a folder written by ebbtide pilot or export")
    if not path.is_file():
        raise ExportFolderError(f"{folder}: no datapackage.json; this is not an Ebbtide export folder")
    try:
        package = json.loads(path.read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise ExportFolderError(f"{path}: not valid JSON ({exc})") from exc
    if not isinstance(package.get("ebbtide"), dict) or "format_version" not in package["ebbtide"]:
        raise ExportFolderError(f"{path}: has no ebbtide.format_version; this is not an Ebbtide export")
    return package


def sessions_of(package: dict) -> tuple[SessionInfo, ...]:
    """Sessions listed in a descriptor: one for a session export, many for a pooled one."""
    meta = package["ebbtide"]
    entries = meta.get("sessions") or [meta]
    return tuple(
        SessionInfo(
            session_id=str(e["session_id"]),
            source=str(e.get("source", "")),
            seed=e.get("seed"),
            study_sha256=str(e.get("study_sha256", "")),
            study_text=str(e.get("study", "")),
        )
        for e in entries
    )


def read_table(folder: Path, name: str) -> pd.DataFrame:
    """One contract table with ids as text, flags as booleans and an empty threshold as NaN."""
    path = folder / f"{name}.csv"
    if not path.is_file():
        raise ExportFolderError(f"{folder}: {name}.csv is missing; an export holds {', '.join(TABLES)}")
    columns = pd.read_csv(path, nrows=0).columns
    dtype = {c: "string" for c in columns if c in _TEXT}
    empty_is_missing = {"threshold": [""], "seconds_from_open": [""], "risk_gamble": [""]}
    table = pd.read_csv(path, dtype=dtype, keep_default_na=False, na_values=empty_is_missing)
    for column in _FLAGS & set(table.columns):
        flags = table[column].map({"true": True, "false": False, True: True, False: False})
        # A flag that may be unknown (a phone's pictures mode) reads as 1.0 / 0.0 / NaN.
        table[column] = flags.astype(float) if flags.isna().any() else flags
    for column in dtype:
        table[column] = table[column].astype(str)
    if "threshold" in table.columns:
        table["threshold"] = table["threshold"].astype(float)
    missing = [c.name for c in CONTRACT[name] if c.name not in table.columns]
    if missing:
        raise ExportFolderError(f"{path}: columns {missing} of the export contract are missing")
    return table


def paid_decisions(decisions: pd.DataFrame) -> pd.DataFrame:
    """The decisions of the paid game: practice rounds and absent seats (no harvest) left out."""
    keep = pd.Series(True, index=decisions.index)
    if "practice" in decisions.columns:
        keep &= decisions["practice"] != True  # noqa: E712 - elementwise on a column
    if "source" in decisions.columns:
        keep &= decisions["source"] != "absent"
    if keep.all():
        return decisions
    paid = decisions[keep].copy()
    for column in ("harvest_asked", "harvest_taken", "points"):
        if column in paid.columns:
            paid[column] = pd.to_numeric(paid[column])
    return paid.reset_index(drop=True)


def read_export(folder: str | Path) -> ExportData:
    """Read an export folder written by ``ebbtide pilot``, ``ebbtide export`` or ``ebbtide pool``."""
    folder = Path(folder)
    package = read_package(folder)
    tables = {name: read_table(folder, name) for name in TABLES}
    tables["decisions"] = paid_decisions(tables["decisions"])
    return ExportData(
        folder=folder,
        format_version=str(package["ebbtide"]["format_version"]),
        sessions=sessions_of(package),
        **tables,
    )
