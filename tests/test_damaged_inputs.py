"""Damaged inputs through report, pool, export and check: one clear line, exit code 2, nothing written.

Every case is made from a valid fixture by one systematic damage (emptied, header only,
a stray byte, a ragged row, a dropped column, a repeated row, a wrong value in each typed
column, a broken descriptor, a corrupt database, a binary study file). Nothing is accepted
silently and no case ends in a traceback.
"""

from __future__ import annotations

import csv
import io
import json
import shutil
from pathlib import Path

import pytest
from _analysis_exports import EXAMPLES, pilot_export
from click.testing import CliRunner

from ebbtide.exports.schema import CONTRACT
from ebbtide.server.cli import main

SOURCE = pilot_export("within-subject.toml", 3, 5, "conditional")

# Values that break each column type or constraint (what is allowed: exports/schema.py).
WRONG = {
    "integer": ["abc", "2.5", "-3", ""],
    "number": ["abc", "-1", "inf"],
    "boolean": ["maybe", "yes", ""],
    "string": [""],
    "datetime": ["yesterday", "2026-13-40T25:00:00"],  # not ISO 8601 (ISO 8601-1:2019)
}
# Optional columns that may be empty only for some sources (the reader's cross-field check).
EMPTY_ONLY_FOR_SOME_SOURCES = {"harvest_asked", "harvest_taken", "points"}


def _rows(text: str) -> list[list[str]]:
    return list(csv.reader(io.StringIO(text)))


def _write(rows: list[list[str]]) -> str:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerows(rows)
    return buffer.getvalue()


def _cell_damages():
    for name, columns in CONTRACT.items():
        for column in columns:
            wrong = list(WRONG[column.type])
            if column.type == "string" and column.constraints.get("enum"):
                wrong.append("bogus")
            if column.type == "string" and not column.constraints.get("required") and "bogus" not in wrong:
                continue  # free text (block name, end reason) may be anything
            if column.type == "number" and not column.constraints.get("required"):
                wrong = [w for w in wrong if w != ""]  # an empty threshold means "none"
            if column.type in ("integer", "boolean") and not column.constraints.get("required") \
                    and column.name not in EMPTY_ONLY_FOR_SOME_SOURCES:
                wrong = [w for w in wrong if w != ""]  # no risk gamble, an unknown pictures mode
            if column.type == "string" and not column.constraints.get("required"):
                wrong = [w for w in wrong if w != ""]  # empty: not asked, no risk task
            if column.name == "regrowth":
                wrong = [w for w in wrong if w != "-3"]  # regrowth may be negative
            for value in wrong:
                yield pytest.param(name, column.name, value, id=f"{name}.{column.name}={value or 'blank'}")


def _damage_cell(folder: Path, table: str, column: str, value: str) -> None:
    path = folder / f"{table}.csv"
    rows = _rows(path.read_text(encoding="utf-8"))
    rows[1][rows[0].index(column)] = value
    path.write_text(_write(rows), encoding="utf-8")


def _file_damages():
    for table in CONTRACT:
        yield table, "empty", lambda p: p.write_bytes(b"")
        yield table, "header-only", lambda p: p.write_text(p.read_text().splitlines()[0] + "\n")
        yield table, "non-utf8", lambda p: p.write_bytes(p.read_bytes().replace(b"G01", b"G\xff1", 1))
        yield table, "ragged-row", lambda p: p.write_text(p.read_text().replace("\n", ",extra\n", 2))
        yield table, "dropped-column", lambda p: p.write_text(
            _write([r[1:] for r in _rows(p.read_text())]))
        yield table, "duplicated-row", lambda p: p.write_text(
            p.read_text() + p.read_text().splitlines()[1] + "\n")
        yield table, "binary", lambda p: p.write_bytes(bytes(range(256)) * 4)


def _package_damages():
    def edit(change):
        def apply(path: Path) -> None:
            package = json.loads(path.read_text())
            change(package)
            path.write_text(json.dumps(package))
        return apply

    yield "json-list", lambda p: p.write_text("[1, 2, 3]")
    yield "not-json", lambda p: p.write_text("{ resources: ")
    yield "non-utf8", lambda p: p.write_bytes(b"\xff\xfe" + p.read_bytes())
    yield "empty", lambda p: p.write_bytes(b"")
    yield "no-ebbtide", edit(lambda d: d.pop("ebbtide"))
    yield "ebbtide-list", edit(lambda d: d.__setitem__("ebbtide", []))
    yield "session-id-number", edit(lambda d: d["ebbtide"].__setitem__("session_id", 7))
    yield "other-session-id", edit(lambda d: d["ebbtide"].__setitem__("session_id", "another"))
    yield "seed-negative", edit(lambda d: d["ebbtide"].__setitem__("seed", -4))
    yield "study-not-toml", edit(lambda d: d["ebbtide"].__setitem__("study", "[[[ not toml"))
    yield "study-a-number", edit(lambda d: d["ebbtide"].__setitem__("study", 12))
    yield "pooled-without-sessions", edit(lambda d: d["ebbtide"].__setitem__("pooled", True))


def _assert_refused(result, needle: str, written: Path) -> None:
    # A traceback would surface as an exception other than SystemExit.
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    assert result.exit_code == 2, result.output
    lines = [line for line in result.output.splitlines() if line.strip()]
    assert len(lines) == 1, result.output
    assert needle in lines[0]
    assert "Traceback" not in result.output
    assert not written.exists()


def _run_report_and_pool(folder: Path, tmp_path: Path, needle: str) -> None:
    runner = CliRunner()
    report = runner.invoke(main, ["report", str(folder), "--out", str(tmp_path / "r" / "r.html")])
    _assert_refused(report, needle, tmp_path / "r" / "r.html")
    pool = runner.invoke(main, ["pool", str(SOURCE), str(folder), "--out", str(tmp_path / "p"), "--stata"])
    _assert_refused(pool, needle, tmp_path / "p")


@pytest.mark.parametrize(("table", "column", "value"), list(_cell_damages()))
def test_a_wrong_cell_is_named_by_file_row_and_column(tmp_path, table, column, value):
    folder = shutil.copytree(SOURCE, tmp_path / "damaged")
    _damage_cell(folder, table, column, value)
    _run_report_and_pool(folder, tmp_path, f"{table}.csv")


@pytest.mark.parametrize(("table", "damage"),
                         [pytest.param(t, d, id=f"{t}-{n}") for t, n, d in _file_damages()])
def test_a_damaged_table_file_is_refused(tmp_path, table, damage):
    folder = shutil.copytree(SOURCE, tmp_path / "damaged")
    damage(folder / f"{table}.csv")
    # A header-only seats table is read, and then the decisions' seats are missing from it.
    _run_report_and_pool(folder, tmp_path, "damaged")


@pytest.mark.parametrize("damage", [pytest.param(d, id=n) for n, d in _package_damages()])
def test_a_damaged_descriptor_is_refused(tmp_path, damage):
    folder = shutil.copytree(SOURCE, tmp_path / "damaged")
    damage(folder / "datapackage.json")
    _run_report_and_pool(folder, tmp_path, "damaged")


def _study_damages():
    text = (EXAMPLES / "within-subject.toml").read_text(encoding="utf-8")
    yield "binary", bytes(range(256)) * 8
    yield "latin-1", text.replace("reed", "r\u00e9ed").encode("latin-1")
    yield "empty", b""
    yield "json-list", b"[1, 2, 3]"
    yield "not-toml", b"[[[ not toml"
    yield "negative-harvest", text.replace("max_harvest = 10", "max_harvest = -10").encode()
    yield "text-harvest", text.replace("max_harvest = 10", 'max_harvest = "ten"').encode()
    yield "unknown-treatment", text.replace('treatment = "range"', 'treatment = "rumour"').encode()
    yield "duplicated-key", text.replace("capacity = 100", "capacity = 100\ncapacity = 90").encode()


@pytest.mark.parametrize(("damage", "content"), [pytest.param(n, c, id=n) for n, c in _study_damages()])
def test_check_refuses_a_damaged_study_file(tmp_path, damage, content):
    study = tmp_path / "study.toml"
    study.write_bytes(content)
    result = CliRunner().invoke(main, ["check", str(study)])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    assert result.exit_code == 2, result.output
    assert "study.toml" in result.output.splitlines()[0]
    assert "Traceback" not in result.output


def _database_damages(tmp_path: Path):
    yield "random-bytes", bytes(range(256)) * 64
    yield "text-file", b"session_id,seed\nx,1\n"
    yield "empty", b""
    yield "sqlite-header-then-garbage", b"SQLite format 3\x00" + b"\x00\xff" * 3000
    import sqlite3

    other = tmp_path / "other.db"
    with sqlite3.connect(other) as connection:
        connection.execute("CREATE TABLE notes (text TEXT)")
    connection.close()
    yield "unrelated-database", other.read_bytes()


@pytest.mark.parametrize("case", ["random-bytes", "text-file", "empty", "sqlite-header-then-garbage",
                                  "unrelated-database"])
def test_export_refuses_a_damaged_database_and_leaves_it_unchanged(tmp_path, case):
    content = dict(_database_damages(tmp_path))[case]
    database = tmp_path / "session.db"
    database.write_bytes(content)
    result = CliRunner().invoke(main, ["export", str(database), "--out", str(tmp_path / "out")])
    _assert_refused(result, "session.db", tmp_path / "out")
    assert database.read_bytes() == content  # opening the store would have added tables


def test_at_least_a_hundred_damaged_inputs_are_tried():
    cells = len(list(_cell_damages()))
    files = len(list(_file_damages()))
    packages = len(list(_package_damages()))
    studies = len(list(_study_damages()))
    assert cells + files + packages + studies + 5 >= 100
