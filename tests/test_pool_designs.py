"""Pooling that knows designs: a pool of two study designs is never compared as one sample.

The defect: the summary filtered by block number and treatment only, so block 1 /
"none" of two different designs printed one mixed mean; the treatment comparison
mixed groups of two designs.
"""

from __future__ import annotations

import json

import pandas as pd
import pytest
from _analysis_exports import pilot_export
from click.testing import CliRunner

from ebbtide.analysis.errors import MixedDesignsError
from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.pool import pool_exports
from ebbtide.analysis.report import build_report
from ebbtide.server.cli import main

BETWEEN = ("between-groups.toml", 9, 5, "conditional")
WITHIN = ("within-subject.toml", 6, 5, "conditional")


@pytest.fixture(scope="module")
def mixed_pool(tmp_path_factory):
    out = tmp_path_factory.mktemp("mixed") / "pool"
    result = pool_exports([pilot_export(*BETWEEN), pilot_export(*WITHIN)], out)
    return out, result


def test_pool_records_each_sessions_study_hash_and_says_the_designs_differ(mixed_pool):
    out, result = mixed_pool
    listed = json.loads((out / "datapackage.json").read_text())["ebbtide"]["sessions"]
    hashes = [s["study_sha256"] for s in listed]
    assert len(set(hashes)) == 2 and all(len(h) == 64 for h in hashes)
    assert any("2 study designs" in note for note in result.notes)


def test_report_refuses_a_pool_of_two_designs_in_one_line_and_writes_nothing(mixed_pool, tmp_path):
    out, _ = mixed_pool
    with pytest.raises(MixedDesignsError, match="2 study designs.*--by-design"):
        build_report(read_export(out))
    run = CliRunner().invoke(main, ["report", str(out), "--out", str(tmp_path / "r.html")])
    assert run.exit_code == 2 and "--by-design" in run.output and "Traceback" not in run.output
    assert len(run.output.strip().splitlines()) == 1 and not (tmp_path / "r.html").exists()


def test_by_design_keeps_each_designs_block_one_apart(mixed_pool):
    out, _ = mixed_pool
    report = build_report(read_export(out), by_design=True)
    summary = report.tables["summary"]
    # Both designs have a block 1 with treatment "none"; each keeps its own name, group count and mean.
    cells = summary[(summary["block"] == 1) & (summary["treatment"] == "none")]
    assert len(cells) == 2 and set(cells["design"]) == set(report.tables["group_outcomes"]["design"])
    assert sorted(cells["block_name"]) == ["baseline", "season"]
    for (name, groups, seed, strategy), block_name in ((BETWEEN, "season"), (WITHIN, "baseline")):
        # Independent recomputation from the session's own CSV (pandas on the raw file).
        decisions = pd.read_csv(pilot_export(name, groups, seed, strategy) / "decisions.csv")
        own = decisions[(decisions["block"] == 1) & (decisions["treatment"] == "none")]
        row = cells[cells["block_name"] == block_name].iloc[0]
        assert row["individual_harvest_mean"] == pytest.approx(own["harvest_taken"].mean())
    # Every section says which design it is computed within.
    assert all(s.scope.startswith("Within design ") for s in report.sections)
    assert {s.title.rsplit(" — design ", 1)[1] for s in report.sections} == set(cells["design"])


def test_a_single_design_report_says_it_is_within_that_design():
    report = build_report(read_export(pilot_export(*WITHIN)))
    assert all(s.scope.startswith("Within design ") for s in report.sections)
