"""Typed, labelled exports: Frictionless validation with keys, 0/1 flags, Stata types and value labels."""

from __future__ import annotations

import shutil
import warnings

import pandas as pd
import pytest
from _analysis_exports import EXAMPLES, copy_export, pilot_export

from ebbtide.analysis.pool import pool_exports
from ebbtide.exports.stata import write_stata


@pytest.fixture(scope="module")
def frictionless():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        import frictionless
    return frictionless


def _validate(frictionless, folder):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # The Frictionless Python library's validator (Table Schema types, constraints,
        # primaryKey uniqueness and foreignKeys) is the reference.
        return frictionless.validate(str(folder / "datapackage.json"))


def test_pilot_and_pooled_packages_validate_with_keys_and_foreign_keys(frictionless, tmp_path):
    single = pilot_export("within-subject.toml", 4, 2, "conditional")
    report = _validate(frictionless, single)
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])[:5]
    pooled = pool_exports([single, pilot_export("within-subject.toml", 4, 3, "conditional")], tmp_path / "p")
    report = _validate(frictionless, pooled.out)
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])[:5]


def test_frictionless_sees_a_broken_foreign_key_and_a_repeated_key(frictionless, tmp_path):
    folder = copy_export(pilot_export("within-subject.toml", 4, 2, "conditional"), tmp_path / "broken")
    lines = (folder / "decisions.csv").read_text().splitlines()
    lines.append(lines[1].replace(",G01,", ",G99,").replace(",G01-", ",G99-"))
    lines.append(lines[2])
    (folder / "decisions.csv").write_text("\n".join(lines) + "\n")
    errors = {e[0] for e in _validate(frictionless, folder).flatten(["type"])}
    assert {"foreign-key", "primary-key"} <= errors


def test_flags_are_written_as_0_and_1_and_read_as_numbers():
    folder = pilot_export("within-subject.toml", 4, 2, "conditional")
    rounds = pd.read_csv(folder / "rounds.csv")  # pandas' default reader, like R's read.csv
    for flag in ("crossed", "recovered", "talk", "show_others"):
        assert set(rounds[flag].unique()) <= {0, 1}
        assert pd.api.types.is_integer_dtype(rounds[flag])


def test_stata_files_keep_types_when_nothing_was_played_and_label_flags(tmp_path):
    played = copy_export(pilot_export("within-subject.toml", 4, 2, "conditional"), tmp_path / "played")
    empty = shutil.copytree(played, tmp_path / "empty")
    for name in ("decisions", "rounds"):
        header = (empty / f"{name}.csv").read_text().splitlines()[0]
        (empty / f"{name}.csv").write_text(header + "\n")
    write_stata(played)
    write_stata(empty)
    for name in ("decisions", "rounds", "seats"):
        full = pd.read_stata(played / f"{name}.dta", convert_categoricals=False)
        none = pd.read_stata(empty / f"{name}.dta", convert_categoricals=False)
        assert full.dtypes.to_dict() == none.dtypes.to_dict()
    labelled = pd.read_stata(played / "rounds.dta")  # value labels applied by pandas' Stata reader
    assert set(labelled["talk"].astype(str)) <= {"no", "yes"}
    with pd.io.stata.StataReader(played / "rounds.dta") as reader:
        assert reader.value_labels()["crossed"] == {0: "no", 1: "yes"}


@pytest.mark.parametrize("study, strategy", [
    ("within-subject.toml", "conditional"),  # none then range, uniform threshold
    ("between-groups.toml", "threshold-averse"),  # none / exact / signal, random stop
])
def test_streamed_pilot_export_equals_the_in_memory_export_byte_for_byte(
    frictionless, tmp_path, study, strategy
):
    from click.testing import CliRunner

    from ebbtide.server.cli import main

    # Reference: the in-memory path (tables_from_outcomes + write_export), unchanged since release.
    in_memory = pilot_export(study, 7, 4, strategy)
    streamed = tmp_path / "streamed"
    result = CliRunner().invoke(main, ["pilot", str(EXAMPLES / study), "--groups", "7", "--seed", "4",
                                       "--strategy", strategy, "--out", str(streamed)])
    assert result.exit_code == 0, result.output
    names = ["datapackage.json", "decisions.csv", "rounds.csv", "seats.csv"]
    assert sorted(p.name for p in streamed.iterdir()) == names
    for name in names:
        assert (streamed / name).read_bytes() == (in_memory / name).read_bytes(), name
    report = _validate(frictionless, streamed)
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])[:5]
