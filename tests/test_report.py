"""ebbtide report: sections, robustness on odd designs, CSV tables, no external address."""

from __future__ import annotations

import re
import subprocess
import sys

import pytest
from _analysis_exports import NO_THRESHOLD, ROOT, pilot_export

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.report import build_report, write_report


def sections_by_title(report):
    return {s.title.split(" (")[0]: s for s in report.sections}


@pytest.fixture(scope="module")
def between_report():
    return build_report(read_export(pilot_export("between-groups.toml", 30, 4, "conditional")), seed=2)


def test_report_has_every_section_with_a_reading_for_a_between_groups_design(between_report):
    sections = sections_by_title(between_report)
    assert {"Benchmarks", "Harvests per block and treatment", "Stock paths", "Treatment comparisons",
            "Survival of the good regime", "Panel regressions of individual harvest"} <= set(sections)
    assert sections["Treatment comparisons"].not_applicable is None
    assert "Mann–Whitney" in sections["Treatment comparisons"].reading
    assert "one block" in sections["Block comparisons within groups"].not_applicable
    assert all(f.png.startswith(b"\x89PNG") for s in between_report.sections for f in s.figures)


def test_report_of_a_design_without_threshold_and_one_treatment_says_not_applicable():
    report = build_report(read_export(pilot_export(NO_THRESHOLD, 6, 1, "conditional")))
    sections = sections_by_title(report)
    assert "no block has two treatments" in sections["Treatment comparisons"].not_applicable
    assert "no threshold" in sections["Survival of the good regime"].not_applicable
    assert "no threshold" in sections["Early-warning indicators of the stock paths"].not_applicable
    assert "one treatment only" in " ".join(sections["Panel regressions of individual harvest"].notes)


def test_report_of_a_pilot_where_nobody_crossed_keeps_curves_and_explains_the_test():
    data = read_export(pilot_export("within-subject.toml", 8, 1, "sustainable"))
    assert not data.rounds["crossed"].any()
    sections = sections_by_title(build_report(data))
    survival = sections["Survival of the good regime"]
    assert "no group collapsed" in survival.reading and len(survival.figures) == 1
    assert sections["Block comparisons within groups"].not_applicable is None


def test_report_of_selfish_pilot_skips_regression_when_nobody_varies():
    sections = sections_by_title(build_report(read_export(pilot_export("within-subject.toml", 6, 1, "max"))))
    assert "asked the same amount" in sections["Panel regressions of individual harvest"].not_applicable


def test_written_report_is_self_contained_and_writes_csv_tables(tmp_path):
    folder = pilot_export("within-subject.toml", 12, 3, "conditional")
    files = write_report(folder, tmp_path / "out" / "r.html")
    html = files.html.read_text(encoding="utf-8")
    assert not re.search(r"(src|href)\s*=\s*[\"']?(https?:|//)", html)
    assert "http://" not in html and "https://" not in html
    assert html.count("<img ") == 4  # harvest box plots, round means, stock paths, survival curves
    assert "not a\nforecast" in html or "not a forecast" in html
    names = {p.name for p in files.tables}
    assert {"r-summary.csv", "r-group_outcomes.csv", "r-regression.csv", "r-block_comparisons.csv"} <= names
    assert all(p.stat().st_size > 0 for p in files.tables)


def test_report_command_refuses_a_folder_that_is_not_an_export(tmp_path):
    done = subprocess.run([sys.executable, "-m", "ebbtide.server.cli", "report", str(tmp_path), "--out",
                           str(tmp_path / "r.html")], cwd=ROOT, capture_output=True, text=True, check=False)
    assert done.returncode == 2
    assert "no datapackage.json" in done.stderr
    assert not (tmp_path / "r.html").exists()
