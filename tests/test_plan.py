"""Pre-analysis plan: written before the data, held against the report's tests, refused for another study."""

from __future__ import annotations

import csv
import hashlib
import itertools
import tomllib
from pathlib import Path

import pandas as pd
import pytest
from _analysis_exports import pilot_export
from click.testing import CliRunner
from scipy import stats

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.plan import read_plan
from ebbtide.analysis.report import build_report
from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
BETWEEN = ROOT / "examples" / "between-groups.toml"
WITHIN = ROOT / "examples" / "within-subject.toml"


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()  # Python's hashlib, not the project's hashing


def _plan(tmp_path: Path, study: Path, *extra: str) -> Path:
    out = tmp_path / f"{study.stem}-plan.toml"
    result = CliRunner().invoke(main, ["plan", str(study), "--out", str(out), "--sims", "40", *extra])
    assert result.exit_code == 0, result.output
    return out


@pytest.fixture(scope="module")
def between_plan(tmp_path_factory) -> Path:
    return _plan(tmp_path_factory.mktemp("plan"), BETWEEN, "--groups", "30")


def test_plan_file_holds_every_treatment_pair_with_test_level_groups_power_hash_and_time(between_plan):
    plan = tomllib.loads(between_plan.read_text())
    assert plan["study"]["sha256"] == _sha256(BETWEEN)
    assert plan["design"]["groups"] == 30
    assert pd.Timestamp(plan["created"]).tzinfo is not None  # an ISO 8601 time with its zone
    # Three treatments rotated in one block give C(3, 2) = 3 pairs (common practice, no source).
    pairs = {frozenset((c["x"], c["y"])) for c in plan["comparisons"]}
    assert pairs == {frozenset(p) for p in itertools.combinations(["none", "exact", "signal"], 2)}
    for c in plan["comparisons"]:
        assert (c["test"], c["direction"], c["level"]) == ("mann-whitney", "two-sided", 0.05)
        assert 0 <= c["power"] <= 1


def test_report_with_plan_marks_each_planned_comparison_confirmatory_and_every_other_test_exploratory(
        between_plan):
    data = read_export(pilot_export("between-groups.toml", 30, 4, "conditional"))
    report = build_report(data, seed=2, plan=read_plan(between_plan))
    labels = report.tables["test_labels"]
    confirmatory = labels[labels["label"] == "confirmatory"]
    assert len(confirmatory) == 3 and set(labels["label"]) == {"confirmatory", "exploratory"}
    assert set(confirmatory["report table"]) == {"treatment_comparisons"}
    assert confirmatory["test"].str.contains("mann-whitney").all()
    others = labels.drop(confirmatory.index)
    assert {"regression", "survival"} <= set(others["report table"])  # never planned, so exploratory
    assert (others["label"] == "exploratory").all()
    assert (report.tables["treatment_comparisons"]["label"] == "confirmatory").all()
    # The confirmatory p-values are scipy's Mann–Whitney on each group's mean harvest per round,
    # computed here from the export's rounds table (scipy.stats.mannwhitneyu, two-sided).
    rounds = data.rounds
    per_group = rounds.groupby("group_id").agg(taken=("total_taken", "sum"),
                                               played=("round", "size"), treatment=("treatment", "first"))
    per_group["rate"] = per_group["taken"] / per_group["played"]
    results = report.tables["plan_results"].set_index("comparison")
    for label, row in results.iterrows():
        x, y = label.split(": ")[1].split(" (")[0].split(" vs ")
        rate = per_group.set_index("treatment")["rate"]
        expected = stats.mannwhitneyu(rate[x], rate[y], alternative="two-sided").pvalue
        assert row["p_value"] == pytest.approx(expected)
    departures = {s.title: s.reading for s in report.sections}["Departures from the plan"]
    assert departures.startswith("None")  # 30 groups played and planned, same study file


def test_plan_for_another_study_is_refused_with_both_hashes_in_one_line(between_plan, tmp_path):
    export = pilot_export("within-subject.toml", 6, 1, "conditional")
    out = tmp_path / "r.html"
    result = CliRunner().invoke(main, ["report", str(export), "--plan", str(between_plan), "--out", str(out)])
    assert result.exit_code == 2
    lines = [line for line in result.output.splitlines() if line.strip()]
    assert len(lines) == 1 and "Traceback" not in result.output
    assert _sha256(BETWEEN) in lines[0] and _sha256(WITHIN) in lines[0]
    assert not out.exists()


def test_changed_study_file_and_fewer_groups_are_listed_as_departures(tmp_path):
    changed = tmp_path / "within-edited.toml"
    changed.write_text(WITHIN.read_text() + "\n# edited after the plan\n")
    plan = read_plan(_plan(tmp_path, changed, "--groups", "10"))
    data = read_export(pilot_export("within-subject.toml", 6, 1, "conditional"))
    report = build_report(data, plan=plan)
    reading = {s.title: s.reading for s in report.sections}["Departures from the plan"]
    assert "Fewer groups than planned: 6 played, 10 planned" in reading
    assert _sha256(changed) in reading and _sha256(WITHIN) in reading
    labels = report.tables["test_labels"]
    # A within-subject design plans the Wilcoxon test of block 2 against block 1 (docs/analysis.md).
    assert labels[labels["label"] == "confirmatory"]["test"].tolist() == [
        "block 2 vs block 1 (group_harvest_per_planned_round, wilcoxon)"]


def test_plan_takes_power_from_a_power_file_and_refuses_one_without_the_planned_groups(tmp_path):
    power = tmp_path / "power.csv"
    label = "block 2 vs block 1 (group_harvest_per_round, wilcoxon)"
    with power.open("w", newline="") as handle:  # the columns ebbtide power writes (docs/behaviour-models.md)
        writer = csv.writer(handle)
        writer.writerow(["groups", "hypothesis", "power", "standard_error", "sims"])
        writer.writerow([8, label, 0.83, 0.012, 1000])
    plan = tomllib.loads(_plan(tmp_path, WITHIN, "--groups", "8", "--power", str(power)).read_text())
    assert plan["comparisons"][0]["power"] == 0.83 and "power.csv" in plan["design"]["power_source"]
    result = CliRunner().invoke(main, ["plan", str(WITHIN), "--groups", "9", "--power", str(power),
                                       "--out", str(tmp_path / "p9.toml")])
    assert result.exit_code == 2 and "no row for 9 groups" in result.output
    assert not (tmp_path / "p9.toml").exists()
