"""Pool the export folders of many sessions into one folder with the same contract.

Every check runs before anything is written, so a refused pool changes nothing.
Rows are copied as text, byte for byte, so pooling never reformats a number.
"""

from __future__ import annotations

import csv
import hashlib
import json
import shutil
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from ebbtide.exports.stata import write_stata

from .errors import PoolError
from .exports_reader import TABLES, read_export, read_package
from .progress import progress_bar


@dataclass(frozen=True)
class PoolResult:
    """What a pool wrote: its folder, the sessions it holds and notes on skipped folders."""

    out: Path
    session_ids: tuple[str, ...]
    notes: tuple[str, ...]


@dataclass(frozen=True)
class _Folder:
    path: Path
    package: dict
    headers: dict[str, list[str]]
    fingerprint: str


def _inspect(path: Path) -> _Folder:
    package = read_package(path)
    if package["ebbtide"].get("pooled"):
        raise PoolError(f"{path}: is already a pooled folder; pool the sessions' own export folders instead")
    headers, digest = {}, hashlib.sha256()
    for name in TABLES:
        table = path / f"{name}.csv"
        if not table.is_file():
            raise PoolError(f"{path}: {name}.csv is missing; an export holds {', '.join(TABLES)}")
        data = table.read_bytes()
        digest.update(name.encode() + b"\0" + data + b"\0")
        first_line = data.decode("utf-8").splitlines()[:1]
        headers[name] = next(csv.reader(first_line)) if first_line else []
    digest.update(json.dumps(package["ebbtide"], sort_keys=True).encode())
    return _Folder(path, package, headers, digest.hexdigest())


def _column_difference(name: str, mine: list[str], theirs: list[str]) -> str:
    missing = [c for c in theirs if c not in mine]
    extra = [c for c in mine if c not in theirs]
    if not missing and not extra:
        return f"{name}.csv has the same columns in a different order"
    parts = ([f"missing {missing}"] if missing else []) + ([f"extra {extra}"] if extra else [])
    return f"{name}.csv has {' and '.join(parts)}"


def _check_same_schema(reference: _Folder, other: _Folder) -> None:
    version = other.package["ebbtide"]["format_version"]
    expected = reference.package["ebbtide"]["format_version"]
    if str(version) != str(expected):
        raise PoolError(
            f"{other.path}: format_version is {version!r} but {reference.path} has {expected!r}; "
            "only exports of the same format version can be pooled"
        )
    for name in TABLES:
        if other.headers[name] != reference.headers[name]:
            difference = _column_difference(name, other.headers[name], reference.headers[name])
            raise PoolError(f"{other.path}: {difference} compared with {reference.path}; columns must match")


def _rows(path: Path) -> list[str]:
    """Data lines of a CSV file without its header (ids and numbers kept as written)."""
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    return [line if line.endswith("\n") else line + "\n" for line in lines[1:]]


def pool_exports(folders: Sequence[str | Path], out: str | Path, stata: bool = False,
                 progress: bool | None = None) -> PoolResult:
    """Merge session export folders into ``out`` (tables, descriptor, optional Stata files).

    Refuses (``PoolError``, nothing written) folders whose columns or
    ``format_version`` differ from the first folder's, and two folders with the
    same session id but different content. An identical duplicate is skipped
    with a note. ``progress`` None shows a bar only on a terminal.
    """
    total = len(folders) + len(TABLES) + 1 + int(stata)
    with progress_bar(total, "pool: checking", "step", progress) as bar:
        return _pool(folders, out, stata, bar)


def _pool(folders: Sequence[str | Path], out: str | Path, stata: bool, bar) -> PoolResult:
    if not folders:
        raise PoolError("give at least one export folder to pool")
    out = Path(out)
    kept: dict[str, _Folder] = {}
    notes: list[str] = []
    for raw in folders:
        # Every cell, key and link is checked before anything else is compared or written.
        ids = set(read_export(Path(raw)).rounds["session_id"])
        folder = _inspect(Path(raw))
        if folder.path.resolve() == out.resolve():
            raise PoolError(f"{out}: the output folder is also an input; choose a new folder for --out")
        if kept:
            _check_same_schema(next(iter(kept.values())), folder)
        session_id = str(folder.package["ebbtide"]["session_id"])
        if session_id in kept:
            earlier = kept[session_id]
            if earlier.fingerprint == folder.fingerprint:
                notes.append(f"{folder.path}: same content as {earlier.path} (session {session_id}); skipped")
                bar.update(1)
                continue
            raise PoolError(
                f"{folder.path}: carries session {session_id}, as does {earlier.path}, but with different "
                "content; session ids must be unique across the pool"
            )
        # Session ids inside the tables must match the descriptor, or the pool would mix sessions up.
        if ids - {session_id}:
            raise PoolError(
                f"{folder.path}: rounds.csv holds session ids {sorted(ids)} but its datapackage.json "
                f"says {session_id!r}"
            )
        kept[session_id] = folder
        bar.update(1)
    reference = next(iter(kept.values()))
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise PoolError(f"{out}: already exists and is not an empty folder; choose a new folder for --out")
    out.parent.mkdir(parents=True, exist_ok=True)
    # Everything is written into a hidden folder beside ``out`` and renamed at the end,
    # so a failure part-way leaves nothing behind.
    staging = Path(tempfile.mkdtemp(prefix=f".{out.name}-", dir=out.parent))
    try:
        bar.set_description("pool: writing")
        for name in TABLES:
            with (staging / f"{name}.csv").open("w", encoding="utf-8", newline="") as handle:
                handle.write(",".join(reference.headers[name]) + "\n")
                for folder in kept.values():
                    handle.writelines(_rows(folder.path / f"{name}.csv"))
            bar.update(1)
        package = _pooled_descriptor(reference.package, kept)
        (staging / "datapackage.json").write_text(json.dumps(package, indent=2, ensure_ascii=False) + "\n",
                                                  encoding="utf-8")
        read_export(staging)  # keys must hold across sessions too (e.g. the same seat twice)
        bar.update(1)
        if stata:
            write_stata(staging)
            bar.update(1)
        if out.exists():
            out.rmdir()
        staging.rename(out)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    designs = {str(f.package["ebbtide"].get("study_sha256", "")) for f in kept.values()}
    if len(designs) > 1:
        notes.append(f"the pool holds {len(designs)} study designs (each session's study SHA-256 is in "
                     "datapackage.json); ebbtide report compares them only with --by-design, within "
                     "each design")
    return PoolResult(out, tuple(kept), tuple(notes))


def _pooled_descriptor(reference: dict, kept: dict[str, _Folder]) -> dict:
    sessions = []
    for session_id, folder in kept.items():
        meta = folder.package["ebbtide"]
        sessions.append({
            "session_id": session_id,
            "title": folder.package.get("title", ""),
            "source": meta.get("source", ""),
            "seed": meta.get("seed"),
            "study_sha256": meta.get("study_sha256", ""),
            "study": meta.get("study", ""),
        })
    return {
        "profile": "tabular-data-package",
        "name": "ebbtide-pool",
        "title": f"Pooled Ebbtide sessions ({len(sessions)})",
        # The contract tables only: a live session's surveys and timeline are not pooled.
        "resources": [r for r in reference["resources"] if r["name"] in TABLES],
        "ebbtide": {
            "format_version": reference["ebbtide"]["format_version"],
            "pooled": True,
            "sessions": sessions,
        },
    }
