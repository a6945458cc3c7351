"""Benchmarks over the planned horizon, and collapse that includes exhaustion.

The defect: ratios to the optimum over the rounds actually played made a group
that emptied the stock in one round score 100 % of optimal, and an emptied
stock without a regime flip counted as "survived".
"""

from __future__ import annotations

import pytest
from _analysis_exports import pilot_export

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.group_outcomes import group_outcomes
from ebbtide.analysis.survival import good_regime_survival

# Invented design: two fishers, a pond of 40 units, each may take up to 20, ten rounds planned, fast regrowth.
POND = """
[session]
id = "harrowmere-pond"
title = "Harrowmere pond (invented)"
place = "Harrowmere (invented)"
[groups]
count = 4
seats_per_group = 2
[resource]
capacity = 40
initial_stock = 40
max_harvest = 20
[resource.growth]
law = "logistic"
r = 1.0
[threshold]
rule = "fixed"
value = 8
[[blocks]]
name = "season"
treatment = "exact"
rounds = 10
"""


@pytest.fixture(scope="module")
def greedy_and_careful():
    greedy = group_outcomes(read_export(pilot_export(POND, 4, 1, "max")), replicates=50)
    careful = group_outcomes(read_export(pilot_export(POND, 4, 1, "sustainable")), replicates=50)
    return greedy, careful


def test_a_group_that_empties_the_stock_is_held_to_the_planned_rounds(greedy_and_careful):
    greedy, _ = greedy_and_careful
    # Hand arithmetic: both seats take 20 of 40 in round 1, nothing remains, nothing regrows.
    assert (greedy["rounds_played"] == 1).all() and (greedy["group_harvest_total"] == 40).all()
    assert (greedy["horizon_rounds"] == 10).all()
    assert greedy["group_harvest_per_planned_round"].tolist() == pytest.approx([40 / 10] * 4)
    # Before the fix the optimum was taken over one round (all 40 units): a ratio of 100 %.
    assert (greedy["ratio_to_optimum"] < 1).all()


def test_careful_groups_score_higher_than_groups_that_emptied_the_stock(greedy_and_careful):
    greedy, careful = greedy_and_careful
    assert not careful["exhausted"].any() and (careful["horizon_rounds"] == 10).all()
    assert careful["ratio_to_optimum"].min() > greedy["ratio_to_optimum"].max()


def test_exhaustion_is_a_collapse_even_without_a_regime_flip(greedy_and_careful):
    greedy, _ = greedy_and_careful
    emptied = greedy[greedy["exhausted"]]
    assert len(emptied) == 4 and (emptied["exhausted_round"] == 1).all()
    assert emptied["collapsed"].all() and (emptied["collapse_round"] == 1).all()
    result = good_regime_survival(greedy, has_threshold=True)
    # Kaplan–Meier with every subject failing at t = 1 gives S(1) = 0 (product-limit definition).
    assert result.curves["exact"]["survival"].iloc[-1] == 0
