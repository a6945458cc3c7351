"""Omnibus test across treatments and Holm's correction of the pairwise tests."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from ebbtide.analysis.comparisons import omnibus_tests, treatment_comparisons


def three_treatments(values: dict[str, list[float]]) -> pd.DataFrame:
    rows = [{"group": f"s/{t}{i}", "block": 1, "treatment": t, "y": v}
            for t, vs in values.items() for i, v in enumerate(vs)]
    return pd.DataFrame(rows)


def test_kruskal_wallis_matches_the_hand_computed_statistic():
    groups = three_treatments({"exact": [1, 2, 3], "none": [4, 5, 6], "range": [7, 8, 9]})
    row = omnibus_tests(groups, "y").iloc[0]
    # Kruskal & Wallis (1952): H = 12 / (N (N + 1)) * sum(R_i^2 / n_i) - 3 (N + 1);
    # rank sums 6, 15, 24, N = 9:
    # H = 12/90 * (36 + 225 + 576) / 3 - 30 = 7.2; chi-square on 2 df has survival exp(-H/2).
    assert row["h"] == pytest.approx(7.2)
    assert row["df"] == 2
    assert row["p_kruskal_wallis"] == pytest.approx(math.exp(-3.6))


def test_pairwise_p_values_are_holm_adjusted_within_the_block():
    groups = three_treatments({"exact": [1, 2, 3, 4.5], "none": [4, 5, 6, 1.5], "range": [7, 8, 9, 2.5]})
    table = treatment_comparisons(groups, "y", np.random.default_rng(1))
    raw = table["p_mann_whitney"].to_numpy()
    # Holm (1979) by hand: sort, multiply the i-th smallest by (m - i + 1), running maximum, cap at 1.
    order = np.argsort(raw)
    adjusted = np.empty(3)
    running = 0.0
    for rank, index in enumerate(order):
        running = max(running, min(1.0, raw[index] * (3 - rank)))
        adjusted[index] = running
    assert table["p_holm"].to_numpy() == pytest.approx(adjusted)
    assert (table["p_holm"] >= table["p_mann_whitney"]).all()
