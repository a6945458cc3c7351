"""The ebbtide command: check and pilot, as a researcher runs them."""

import csv
import hashlib
import json
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
DEMO = ROOT / "examples" / "brackwater-demo.toml"


def test_every_command_has_help():
    runner = CliRunner()
    for name, command in main.commands.items():
        result = runner.invoke(main, [name, "--help"])
        assert result.exit_code == 0, name
        assert command.help, f"{name} has no help text"


def test_check_prints_summary_and_succeeds():
    result = CliRunner().invoke(main, ["check", str(DEMO)])
    assert result.exit_code == 0
    assert "groups: 2 x 2 seats = 4 participants" in result.output
    assert "ok: the design is valid" in result.output


def test_check_fails_with_the_wrong_key(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(DEMO.read_text().replace("capacity = 100", "capacity = -5"))
    result = CliRunner().invoke(main, ["check", str(bad)])
    assert result.exit_code == 2
    assert "resource.capacity: holds -5" in result.output


def test_check_warns_when_a_participant_label_names_the_treatment(tmp_path):
    telling = tmp_path / "telling.toml"
    telling.write_text(DEMO.read_text().replace('en = "Second tides"', 'en = "Range season"'))
    result = CliRunner().invoke(main, ["check", str(telling)])
    assert result.exit_code == 0
    assert "warning: blocks.1.label.en = 'Range season' names the treatment range" in result.output
    assert "(1 warning(s))" in result.output


def test_pilot_writes_the_contract_tables(tmp_path):
    result = CliRunner().invoke(
        main, ["pilot", str(DEMO), "--groups", "3", "--seed", "4", "--strategy", "max",
               "--out", str(tmp_path)]
    )
    assert result.exit_code == 0, result.output
    with (tmp_path / "decisions.csv").open() as fh:
        rows = list(csv.DictReader(fh))
    assert list(rows[0])[:11] == [
        "session_id", "group_id", "seat_id", "block", "treatment", "round", "stock_before",
        "harvest_asked", "harvest_taken", "points", "source",
    ]
    assert {r["source"] for r in rows} == {"pilot"}
    package = json.loads((tmp_path / "datapackage.json").read_text())
    assert package["ebbtide"]["seed"] == 4
    assert package["ebbtide"]["study_sha256"] == hashlib.sha256(DEMO.read_bytes()).hexdigest()
    names = [r["name"] for r in package["resources"]]
    assert names == ["decisions", "rounds", "seats"]
    units = {f["name"]: f.get("unit") for f in package["resources"][1]["schema"]["fields"]}
    assert units["stock_after"] == "units"


def test_pilot_is_byte_for_byte_reproducible(tmp_path):
    def run(out):
        subprocess.run(
            [sys.executable, "-m", "ebbtide.server.cli", "pilot", str(DEMO), "--groups", "20",
             "--seed", "9", "--strategy", "conditional", "--out", str(out)],
            cwd=ROOT, check=True, capture_output=True,
        )
        return {p.name: p.read_bytes() for p in sorted(out.iterdir())}

    assert run(tmp_path / "a") == run(tmp_path / "b")


@pytest.mark.parametrize("args, message", [
    (["--groups", "0"], "Invalid value for '--groups'"),
    (["--strategy", "greedy"], "Invalid value for '--strategy'"),
])
def test_pilot_refuses_bad_options(tmp_path, args, message):
    result = CliRunner().invoke(main, ["pilot", str(DEMO), "--out", str(tmp_path), *args])
    assert result.exit_code == 2 and message in result.output


def test_check_lists_missing_pictures_and_sounds_of_a_study_folder(tmp_path):
    import shutil

    folder = tmp_path / "day"
    shutil.copytree(ROOT / "examples" / "saltmarsh-day", folder)
    ok = CliRunner().invoke(main, ["check", str(folder)])
    assert ok.exit_code == 0, ok.output
    assert "plan of the day" in ok.output and "consent" in ok.output
    (folder / "pictures" / "shared-bed.svg").unlink()
    missing = CliRunner().invoke(main, ["check", str(folder)])
    assert missing.exit_code == 2
    assert "- pictures/shared-bed.svg" in missing.output
