"""The planning commands as a researcher runs them before the trip: power, fit, preview, plan."""

import csv
from pathlib import Path

from click.testing import CliRunner

from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
WITHIN = ROOT / "examples" / "within-subject.toml"
DEMO = ROOT / "examples" / "brackwater-demo.toml"


def test_power_prints_a_table_names_the_groups_for_80_percent_and_draws_the_curve(tmp_path):
    out = tmp_path / "power"
    result = CliRunner().invoke(main, ["power", str(WITHIN), "--model", "threshold-averse",
                                       "--groups", "4,8,12", "--sims", "30", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "block 2 vs block 1 (group_harvest_per_round, wilcoxon)" in result.output
    assert "80 % power:" in result.output
    rows = list(csv.DictReader((out / "power.csv").read_text().splitlines()))
    assert [int(r["groups"]) for r in rows] == [4, 8, 12]
    assert all(0 <= float(r["power"]) <= 1 for r in rows)
    assert (out / "power-curve.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "<svg" in (out / "power-curve.svg").read_text()


def test_power_refuses_bad_input_in_one_line(tmp_path):
    runner = CliRunner()
    result = runner.invoke(main, ["power", str(WITHIN), "--groups", "40:4", "--out", str(tmp_path / "p")])
    assert result.exit_code == 2 and "allowed: START:STOP" in result.output
    assert not (tmp_path / "p").exists()
    result = runner.invoke(main, ["power", str(WITHIN), "--model", "greedy", "--out", str(tmp_path / "p")])
    assert result.exit_code == 2 and "neither a model name" in result.output
    assert "Traceback" not in result.output
