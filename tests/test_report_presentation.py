"""What the report shows a reader: numbers, headers, prose, sampled paths and the standard figure."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from _analysis_exports import pilot_export
from scipy import stats

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.figures import round_means, sample_groups, stock_paths_figure
from ebbtide.analysis.presentation import header, p_value, table_html
from ebbtide.analysis.report import build_report, render_html


def test_p_values_print_below_a_thousandth_as_less_than_and_never_as_zero():
    # APA style for p-values (common practice, no source): "< .001" below one thousandth, exact otherwise.
    assert p_value(0.0) == "< 0.001" and p_value(3e-12) == "< 0.001"
    assert p_value(0.0456) == "0.046" and p_value(float("nan")) == "–"


def test_tables_use_readable_headers_fixed_decimals_and_no_scientific_notation():
    table = pd.DataFrame({"block": [1, 2], "group_harvest_per_round_mean": [23860.0, 0.5],
                          "p_mann_whitney": [0.0, 0.2], "common_language": [0.61, float("nan")],
                          "common_language_low": [0.5, float("nan")],
                          "common_language_high": [0.7, float("nan")]})
    html = table_html(table)
    assert "Group harvest per round, mean" in html and "group_harvest_per_round_mean" not in html
    assert "23,860.00" in html and "0.50" in html and not re.search(r"\d[eE][+-]\d", html)
    assert "&lt; 0.001" in html and ">0<" not in html
    assert "0.610 [0.500, 0.700]" in html and "nan" not in html.lower()
    assert header("mean_difference_low") == "Mean difference low"


def test_wide_tables_are_split_with_their_keys_repeated():
    values = {f"value_{i}": [float(i)] for i in range(20)}
    wide = pd.DataFrame({"block": [1], "treatment": ["none"], **values})
    html = table_html(wide)
    assert html.count("<table") == 3 and html.count(">Block<") == 3
    assert all(part.count("<th scope") <= 9 for part in html.split("</table>")[:-1])


def test_sampled_stock_paths_show_crossing_groups_as_often_as_they_occur():
    # A block of 20 groups, 2 of which crossed; 4 are drawn. A simple random sample shows on
    # average 4 * 2 / 20 = 0.4 crossing groups (hypergeometric mean, scipy); "crossings first"
    # showed 2 every time.
    groups = pd.DataFrame({"block": 1, "treatment": "none", "crossed": [True] * 2 + [False] * 18})
    shown = [sample_groups(groups, np.random.default_rng(seed))["crossed"].sum() for seed in range(2000)]
    expected = stats.hypergeom(20, 2, 4).mean()
    assert np.mean(shown) == pytest.approx(expected, abs=0.05)


def test_the_grey_band_has_a_legend():
    data = read_export(pilot_export("between-groups.toml", 6, 2, "conditional"))
    from ebbtide.analysis.group_outcomes import group_outcomes
    groups = group_outcomes(data, replicates=50)
    figure = stock_paths_figure(data.rounds, groups.head(3), 120)
    labels = [t.get_text() for legend in figure.legends for t in legend.get_texts()]
    assert "round ended in the degraded regime" in labels and "revealed threshold" in labels


def test_round_means_count_lost_rounds_of_an_exhausted_group_as_zero():
    # Hand example: group a exhausted the stock in round 1 of 3 planned; group b played all 3.
    rounds = pd.DataFrame({"session_id": "s", "group_id": ["a", "b", "b", "b"], "block": 1,
                           "treatment": "none", "round": [1, 1, 2, 3], "total_taken": [40, 10, 10, 10],
                           "stock_before": [40, 40, 38, 36]})
    groups = pd.DataFrame({"session_id": "s", "group_id": ["a", "b"], "block": 1, "treatment": "none",
                           "exhausted": [True, False], "rounds_played": [1, 3], "horizon_rounds": [3, 3]})
    means = round_means(rounds, groups).set_index("round")
    assert means["groups"].tolist() == [2, 2, 2]
    assert means["group_harvest_mean"].tolist() == [25.0, 5.0, 5.0]
    assert means["stock_mean"].tolist() == [40.0, 19.0, 18.0]


@pytest.fixture(scope="module")
def within_html():
    report = build_report(read_export(pilot_export("within-subject.toml", 12, 3, "conditional")))
    return report, render_html(report, [])


def test_report_has_the_standard_figure_and_earnings_and_no_nan_in_prose(within_html):
    report, html = within_html
    titles = [s.title for s in report.sections]
    assert "Harvest and stock by round" in titles and "Earnings by treatment" in titles
    earnings = report.tables["earnings"]
    decisions = pd.read_csv(pilot_export("within-subject.toml", 12, 3, "conditional") / "decisions.csv")
    # Independent recomputation with pandas from the raw file: points per seat and block.
    block_one = decisions[decisions["block"] == 1].groupby("seat_id")["points"].sum()
    assert earnings.set_index("block").loc[1, "points_per_seat_mean"] == pytest.approx(block_one.mean())
    text = re.sub(r"<[^>]+>", " ", re.sub(r"data:image/png;base64,[^\"]+", "", html))
    assert not re.search(r"\bnan\b", text, re.IGNORECASE) and not re.search(r"\d[eE][+-]\d", text)
