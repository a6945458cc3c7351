"""Read one export folder (a session's or a pooled one) into typed tables."""

from __future__ import annotations

import csv
import hashlib
import io
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ebbtide.exports.schema import CONTRACT, FOREIGN_KEYS, PRIMARY_KEYS
from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.study import Study, parse_study

from .errors import ExportFolderError

TABLES = tuple(CONTRACT)


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
    except UnicodeDecodeError as exc:
        raise ExportFolderError(
            f"{path}: not UTF-8 text (byte {exc.start}); expected a JSON descriptor") from exc
    except json.JSONDecodeError as exc:
        raise ExportFolderError(f"{path}: not valid JSON ({exc})") from exc
    if not isinstance(package, dict):
        raise ExportFolderError(f"{path}: holds a JSON {type(package).__name__}; expected an object with "
                                "resources and an ebbtide section")
    meta = package.get("ebbtide")
    if not isinstance(meta, dict) or "format_version" not in meta:
        raise ExportFolderError(f"{path}: has no ebbtide.format_version; this is not an Ebbtide export")
    entries = meta.get("sessions") if meta.get("pooled") else [meta]
    if not isinstance(entries, list) or not entries:
        raise ExportFolderError(f"{path}: ebbtide.sessions must be a non-empty list of sessions")
    for number, entry in enumerate(entries, 1):
        session_id = entry.get("session_id") if isinstance(entry, dict) else None
        if not session_id or not isinstance(session_id, str):
            raise ExportFolderError(f"{path}: session {number} has no session_id text")
        for key in ("study", "study_sha256"):
            if not isinstance(entry.get(key, ""), str):
                raise ExportFolderError(f"{path}: session {entry['session_id']}: {key} must be text")
        study = entry.get("study", "")
        if study and entry.get("study_sha256") and (
                hashlib.sha256(study.encode("utf-8")).hexdigest() != entry["study_sha256"]):
            raise ExportFolderError(f"{path}: session {session_id}: the study text does not match its "
                                    "study_sha256; the descriptor was altered after export")
        seed = entry.get("seed")
        if seed is not None and (isinstance(seed, bool) or not isinstance(seed, int) or seed < 0):
            raise ExportFolderError(f"{path}: session {entry['session_id']}: seed {seed!r}; allowed: a whole "
                                    "number >= 0 or null")
    return package


def sessions_of(package: dict) -> tuple[SessionInfo, ...]:
    """Sessions listed in a descriptor: one for a session export, many for a pooled one."""
    meta = package["ebbtide"]
    entries = meta.get("sessions") if meta.get("pooled") else [meta]
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


_BOOLEAN = {"1": True, "0": False, "true": True, "false": False}  # 0/1 now; true/false in format 1 exports


def _problem(path: Path, row: int, column: str, value, allowed: str) -> ExportFolderError:
    # Row numbers count data rows from 1; the file line is one more (the header).
    return ExportFolderError(
        f"{path}: row {row} (line {row + 1}), column {column}: {str(value)[:40]!r}; allowed: {allowed}"
    )


def _names(path: Path) -> list[str]:
    """Header names of a CSV file (empty list for an empty file)."""
    try:
        return list(pd.read_csv(path, nrows=0, dtype=str).columns)
    except pd.errors.EmptyDataError:
        return []


def _check_field_counts(path: Path, data: bytes, text: str) -> None:
    """Every row has as many fields as the header (the CSV reader would pad a short row)."""
    if b'"' in data:
        counts = [len(row) for row in csv.reader(io.StringIO(text)) if row]
    else:  # no quoting: a field count is the comma count plus one
        counts = [line.count(b",") + 1 for line in data.split(b"\n") if line.strip()]
    if not counts:
        return
    wrong = [i for i, n in enumerate(counts) if n != counts[0]]
    if wrong:
        row = wrong[0]
        raise ExportFolderError(f"{path}: row {row} (line {row + 1}) has {counts[row]} values but the header "
                                f"has {counts[0]}; every row needs one value per header column")


def _first_bad(mask: pd.Series) -> int:
    return int(np.flatnonzero(mask.to_numpy())[0])


def read_table(folder: Path, name: str, allow_empty: bool = False) -> pd.DataFrame:
    """One contract table, checked against the contract's types and constraints.

    Ids are text, flags booleans, an empty threshold NaN. Any cell that breaks
    the contract (wrong type, below its minimum, outside its enumeration, a
    required value missing), a ragged row or a repeated primary key raises
    ``ExportFolderError`` naming the file, the row and what is allowed.
    """
    path = folder / f"{name}.csv"
    if not path.is_file():
        raise ExportFolderError(f"{folder}: {name}.csv is missing; an export holds {', '.join(TABLES)}")
    data = path.read_bytes()
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ExportFolderError(f"{path}: not UTF-8 text (byte {exc.start}); exports are UTF-8 CSV") from exc
    _check_field_counts(path, data, text)
    del data, text
    columns = CONTRACT[name]
    numeric = {c.name: "float64" for c in columns if c.type in ("integer", "number")}
    try:
        try:
            # Fast path: numbers parsed by the C reader; a cell that is not a number sends the
            # file through the text path below, which names the row.
            raw = pd.read_csv(path, dtype={**dict.fromkeys(_names(path), str), **numeric},
                              keep_default_na=False, na_values={k: [""] for k in numeric})
        except ValueError:
            raw = pd.read_csv(path, dtype=str, keep_default_na=False, na_filter=False)
    except pd.errors.EmptyDataError as exc:
        raise ExportFolderError(f"{path}: is empty; expected a header row naming "
                                f"{', '.join(c.name for c in columns)}") from exc
    except pd.errors.ParserError as exc:
        raise ExportFolderError(f"{path}: malformed CSV ({str(exc).strip()}); every row needs one value "
                                "per header column") from exc
    missing = [c.name for c in columns if c.name not in raw.columns]
    if missing:
        raise ExportFolderError(f"{path}: columns {missing} of the export contract are missing")
    if raw.columns.duplicated().any():
        raise ExportFolderError(f"{path}: column {raw.columns[raw.columns.duplicated()][0]!r} appears twice")
    if name != "seats" and raw.empty and not allow_empty:
        raise ExportFolderError(f"{path}: has a header but no rows; nothing was played in this export")
    table = pd.DataFrame(index=raw.index)
    for column in columns:
        values = raw[column.name]
        required = column.constraints.get("required", False)
        text = values.dtype == object or isinstance(values.dtype, pd.StringDtype)
        blank = values == "" if text else values.isna()
        if required and blank.any():
            raise _problem(path, _first_bad(blank) + 1, column.name, "", "a value (this column is required)")
        if column.type in ("integer", "number"):
            numbers = pd.to_numeric(values.where(~blank), errors="coerce") if text else values
            bad = numbers.isna() & ~blank
            if column.type == "integer":
                bad |= numbers.notna() & (numbers != numbers.round())
            kind = "a whole number" if column.type == "integer" else "a number"
            if bad.any():
                index = _first_bad(bad)
                raise _problem(path, index + 1, column.name, values.iloc[index], kind)
            minimum = column.constraints.get("minimum")
            if minimum is not None and (numbers < minimum).any():
                index = _first_bad(numbers < minimum)
                raise _problem(path, index + 1, column.name, values.iloc[index], f"{kind} >= {minimum}")
            if not np.isfinite(numbers.dropna()).all():
                index = _first_bad(numbers.isin([np.inf, -np.inf]))
                raise _problem(path, index + 1, column.name, values.iloc[index], f"a finite {kind[2:]}")
            # An optional whole number (the ask of a closed round) stays float so that it can be empty.
            whole = column.type == "integer" and required
            table[column.name] = numbers.astype("int64" if whole else float)
        elif column.type == "boolean":
            flags = values.map(_BOOLEAN)
            bad = flags.isna() & ~(blank & (not required))
            if bad.any():
                index = _first_bad(bad)
                raise _problem(path, index + 1, column.name, values.iloc[index],
                               "1 or 0" if required else "1, 0 or empty")
            # An optional flag that is unknown somewhere (a phone's pictures mode) reads as 1.0 / 0.0 / NaN.
            table[column.name] = flags.astype(float) if flags.isna().any() else flags.astype(bool)
        elif column.type == "datetime":
            # Kept as text; a time that is not ISO 8601 (with its offset) is refused.
            stamps = pd.to_datetime(values.where(~blank), format="ISO8601", utc=True, errors="coerce")
            bad = stamps.isna() & ~blank
            if bad.any():
                index = _first_bad(bad)
                raise _problem(path, index + 1, column.name, values.iloc[index],
                               "an ISO 8601 date and time, e.g. 2026-03-01T09:30:00.000+00:00")
            table[column.name] = values.astype(str)
        else:
            allowed = column.constraints.get("enum")
            if allowed:
                bad = ~values.isin(allowed) & ~(blank & (not required))
                if bad.any():
                    index = _first_bad(bad)
                    raise _problem(path, index + 1, column.name, values.iloc[index], ", ".join(allowed))
            table[column.name] = values.astype(str)
    for extra in raw.columns:
        if extra not in table.columns:
            table[extra] = raw[extra]
    if name == "decisions":
        # No ask is recorded only where the facilitator closed the round before the seat decided or
        # the seat was absent (its person did not agree to take part); an absent seat took nothing.
        for column, excuses in (("harvest_asked", ("closed", "absent")), ("harvest_taken", ("absent",)),
                                ("points", ("absent",))):
            unexplained = table[column].isna() & ~table["source"].isin(excuses)
            if unexplained.any():
                index = _first_bad(unexplained)
                raise _problem(path, index + 1, column, "", f"a number >= 0 (empty only when source is "
                               f"{' or '.join(excuses)})")
    key = PRIMARY_KEYS[name]
    repeated = table.duplicated(key, keep="first")
    if repeated.any():
        index = _first_bad(repeated)
        shown = ", ".join(f"{k}={table[k].iloc[index]}" for k in key)
        raise ExportFolderError(f"{path}: row {index + 1} (line {index + 2}) repeats the key {shown}; "
                                f"each ({', '.join(key)}) may appear once")
    return table


def paid_decisions(decisions: pd.DataFrame) -> pd.DataFrame:
    """The decisions of the paid game: practice rounds and absent seats (no harvest) left out."""
    keep = ~decisions["practice"].astype(bool) & (decisions["source"] != "absent")
    paid = decisions[keep].reset_index(drop=True)
    # Once absent seats are gone every harvest is known: whole numbers again.
    paid["harvest_taken"] = paid["harvest_taken"].astype("int64")
    return paid


def paid_rounds(rounds: pd.DataFrame) -> pd.DataFrame:
    """The rounds of the paid game (practice rounds left out)."""
    return rounds[~rounds["practice"].astype(bool)].reset_index(drop=True)


def _check_links(folder: Path, sessions: tuple[SessionInfo, ...], tables: dict[str, pd.DataFrame]) -> None:
    """Session ids known to the descriptor; decisions point at existing rounds and seats."""
    known = {info.session_id for info in sessions}
    for name, table in tables.items():
        strangers = ~table["session_id"].isin(known)
        if strangers.any():
            index = _first_bad(strangers)
            raise _problem(folder / f"{name}.csv", index + 1, "session_id", table["session_id"].iloc[index],
                           "a session listed in datapackage.json: " + ", ".join(sorted(known)))
    for link in FOREIGN_KEYS["decisions"]:
        target = tables[link["reference"]["resource"]]
        fields = link["fields"]
        present = pd.MultiIndex.from_frame(tables["decisions"][fields]).isin(
            pd.MultiIndex.from_frame(target[link["reference"]["fields"]]))
        if not present.all():
            index = int(np.flatnonzero(~present)[0])
            shown = ", ".join(f"{k}={tables['decisions'][k].iloc[index]}" for k in fields)
            raise ExportFolderError(
                f"{folder / 'decisions.csv'}: row {index + 1} (line {index + 2}) refers to {shown}, which "
                f"{link['reference']['resource']}.csv does not hold; every decision needs its row there"
            )


def read_export(folder: str | Path) -> ExportData:
    """Read an export folder written by ``ebbtide pilot``, ``ebbtide export`` or ``ebbtide pool``."""
    folder = Path(folder)
    package = read_package(folder)
    tables = {name: read_table(folder, name) for name in TABLES}
    sessions = sessions_of(package)
    _check_links(folder, sessions, tables)
    # Links are checked on every row; the analysis then sees the paid game only.
    tables["decisions"] = paid_decisions(tables["decisions"])
    tables["rounds"] = paid_rounds(tables["rounds"])
    return ExportData(
        folder=folder,
        format_version=str(package["ebbtide"]["format_version"]),
        sessions=sessions,
        **tables,
    )
