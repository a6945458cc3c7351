"""ebbtide pool: merging session exports, refusing mismatches, Stata output."""

from __future__ import annotations

import json
import subprocess
import sys

import pandas as pd
import pytest
from _analysis_exports import ROOT, copy_export, pilot_export
from click.testing import CliRunner
from numpy.testing import assert_allclose

from ebbtide.analysis.errors import ExportFolderError, PoolError
from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.pool import pool_exports
from ebbtide.server.cli import main


@pytest.fixture(scope="module")
def two_sessions():
    return (pilot_export("between-groups.toml", 12, 7, "conditional"),
            pilot_export("within-subject.toml", 8, 7, "conditional"))


def test_pool_concatenates_rows_and_lists_sessions_with_seeds_and_hashes(two_sessions, tmp_path):
    result = pool_exports(two_sessions, tmp_path / "pool")
    pooled = read_export(tmp_path / "pool")
    parts = [read_export(f) for f in two_sessions]
    for name in ("decisions", "rounds", "seats"):
        assert len(getattr(pooled, name)) == sum(len(getattr(p, name)) for p in parts)
    package = json.loads((tmp_path / "pool" / "datapackage.json").read_text())
    listed = package["ebbtide"]["sessions"]
    assert [s["session_id"] for s in listed] == list(result.session_ids)
    assert [s["seed"] for s in listed] == [7, 7]
    originals = [json.loads((f / "datapackage.json").read_text())["ebbtide"] for f in two_sessions]
    assert [s["study_sha256"] for s in listed] == [o["study_sha256"] for o in originals]
    assert len(pooled.studies()) == 2


def test_pool_skips_identical_duplicate_with_a_note(two_sessions, tmp_path):
    twin = copy_export(two_sessions[0], tmp_path / "twin")
    result = pool_exports([two_sessions[0], twin, two_sessions[1]], tmp_path / "pool")
    assert len(result.session_ids) == 2
    assert len(result.notes) == 1 and "skipped" in result.notes[0] and "twin" in result.notes[0]


def test_pool_refuses_same_session_id_with_different_content(two_sessions, tmp_path):
    altered = copy_export(two_sessions[0], tmp_path / "altered")
    rounds = (altered / "rounds.csv").read_text().splitlines(keepends=True)
    # A valid edit (the block's name in one row): the copy still passes every cell check.
    rounds[-1] = rounds[-1].replace(",season,", ",season-renamed,")
    (altered / "rounds.csv").write_text("".join(rounds))
    with pytest.raises(PoolError, match=r"altered: carries session .* different content"):
        pool_exports([two_sessions[0], altered], tmp_path / "pool")
    assert not (tmp_path / "pool").exists()


def test_pool_refuses_different_columns_naming_folder_and_columns(two_sessions, tmp_path):
    odd = copy_export(two_sessions[1], tmp_path / "odd")
    table = pd.read_csv(odd / "seats.csv").drop(columns=["currency"])
    table.to_csv(odd / "seats.csv", index=False)
    # The contract check of the folder itself names the file and the missing column first.
    with pytest.raises(ExportFolderError, match=r"odd/seats.csv: columns \['currency'\] .* missing"):
        pool_exports([two_sessions[0], odd], tmp_path / "pool")
    assert not (tmp_path / "pool").exists()


def test_pool_refuses_different_format_version(two_sessions, tmp_path):
    newer = copy_export(two_sessions[1], tmp_path / "newer")
    package = json.loads((newer / "datapackage.json").read_text())
    package["ebbtide"]["format_version"] = "2"
    (newer / "datapackage.json").write_text(json.dumps(package))
    with pytest.raises(PoolError, match=r"newer: format_version is '2' but .* has '1'"):
        pool_exports([two_sessions[0], newer], tmp_path / "pool")


def test_pool_refuses_a_folder_that_is_not_an_export(two_sessions, tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(ExportFolderError, match="empty: no datapackage.json"):
        pool_exports([two_sessions[0], tmp_path / "empty"], tmp_path / "pool")


def test_pool_writes_stata_files_that_read_back_equal(two_sessions, tmp_path):
    pool_exports(two_sessions, tmp_path / "pool", stata=True)
    pooled = read_export(tmp_path / "pool")
    back = pd.read_stata(tmp_path / "pool" / "rounds.dta", convert_categoricals=False)
    assert list(back.columns) == list(pooled.rounds.columns)
    assert_allclose(back["stock_after"].to_numpy(), pooled.rounds["stock_after"].to_numpy(), atol=0)
    assert_allclose(back["crossed"].to_numpy(), pooled.rounds["crossed"].to_numpy().astype(int), atol=0)


def test_pool_command_reports_refusal_and_exit_code(two_sessions, tmp_path):
    newer = copy_export(two_sessions[1], tmp_path / "newer")
    package = json.loads((newer / "datapackage.json").read_text())
    package["ebbtide"]["format_version"] = "9"
    (newer / "datapackage.json").write_text(json.dumps(package))
    arguments = ["pool", str(two_sessions[0]), str(newer), "--out", str(tmp_path / "p")]
    result = CliRunner().invoke(main, arguments)
    assert result.exit_code == 2
    assert "pool refused, nothing written" in result.output and "format_version" in result.output


def test_pool_command_runs_as_a_subprocess(two_sessions, tmp_path):
    done = subprocess.run(
        [sys.executable, "-m", "ebbtide.server.cli", "pool", *map(str, two_sessions),
         "--out", str(tmp_path / "p"), "--stata"],
        cwd=ROOT, capture_output=True, text=True, check=False,
    )
    assert done.returncode == 0, done.stderr
    assert "pooled 2 session(s)" in done.stdout
    assert (tmp_path / "p" / "decisions.dta").is_file()
