"""Within-subject survival: the two blocks of the same groups are paired, not independent.

The defect: the log-rank test compared the blocks of the same groups as if they were
independent samples.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from _analysis_exports import pilot_export

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.report import build_report
from ebbtide.analysis.survival import collapse_order, good_regime_survival, paired_collapse_tests


def paired_groups(first: list[tuple[float, bool]], second: list[tuple[float, bool]]) -> pd.DataFrame:
    """Invented outcomes: group i played block 1 with first[i], block 2 with second[i] (time, collapsed)."""
    rows = []
    for block, outcomes in ((1, first), (2, second)):
        for i, (time, event) in enumerate(outcomes):
            rows.append({"group": f"s/g{i}", "design": "d", "block": block,
                         "treatment": ["none", "range"][block - 1], "collapsed": event,
                         "collapse_round": time if event else np.nan, "rounds_played": time})
    return pd.DataFrame(rows)


def test_gehan_scoring_of_a_pair_with_censoring():
    # Gehan (1965): an event at t precedes any later time and a censored time equal to t.
    assert collapse_order(3, True, 5, True) == 1
    assert collapse_order(3, True, 3, False) == 1  # the other held through round 3
    assert collapse_order(5, True, 3, False) == 0  # the other stopped being watched first: order unknown
    assert collapse_order(4, True, 4, True) == 0
    assert collapse_order(10, False, 10, False) == 0
    assert collapse_order(6, False, 2, True) == -1


def test_paired_sign_test_on_collapse_order_matches_the_binomial_formula():
    # Block 2 collapses first in 6 groups, one pair is open (both censored), none the other way round.
    first = [(10, False)] * 6 + [(10, False)]
    second = [(2, True), (3, True), (4, True), (5, True), (6, True), (9, True), (10, False)]
    table = paired_collapse_tests(paired_groups(first, second))
    row = table.iloc[0]
    assert (row.x_collapsed_first, row.y_collapsed_first, row.undetermined, row.pairs) == (6, 0, 1, 7)
    # Exact two-sided sign test, 6 of 6 one way: p = 2 * (1/2)^6 = 0.03125 (binomial formula by hand).
    assert row.p_sign_test == pytest.approx(0.03125)


def test_log_rank_is_not_run_on_blocks_of_the_same_groups():
    first = [(10, False), (8, True), (10, False), (7, True)]
    second = [(3, True), (4, True), (5, True), (6, True)]
    result = good_regime_survival(paired_groups(first, second), has_threshold=True)
    assert np.isnan(result.logrank_p) and "paired" in result.not_applicable
    assert set(result.curves) == {"block 1: none", "block 2: range"}


def test_report_of_a_within_subject_pilot_gives_the_paired_test():
    data = read_export(pilot_export("within-subject.toml", 12, 3, "conditional"))
    report = build_report(data)
    survival = next(s for s in report.sections if s.title.startswith("Survival"))
    assert "Log-rank chi-square" not in survival.reading
    if "survival_paired" in report.tables:
        assert "sign test p =" in survival.reading
        assert report.tables["survival_paired"]["pairs"].iloc[0] == 12
    else:  # nobody collapsed in either block: nothing to order
        assert "no group collapsed" in survival.reading
