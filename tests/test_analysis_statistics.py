"""The statistics of the analysis against reference libraries, hand computations and textbook values."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lifelines.datasets import load_leukemia
from lifelines.statistics import logrank_test
from numpy.testing import assert_allclose
from scipy import stats

from ebbtide.analysis.comparisons import compare_paired, compare_two
from ebbtide.analysis.panel import fit_panel_models, panel_frame, readable_term
from ebbtide.analysis.survival import good_regime_survival, kaplan_meier


def test_mann_whitney_u_and_p_match_scipy_and_hand_counted_effect_sizes():
    x = np.array([12.0, 15, 9, 20, 14, 11, 17])
    y = np.array([8.0, 10, 13, 7, 9, 12])
    result = compare_two(x, y, np.random.default_rng(5), resamples=999)
    reference = stats.mannwhitneyu(x, y, alternative="two-sided")  # scipy.stats reference
    assert_allclose(result.u, reference.statistic, atol=0)
    assert_allclose(result.p_mann_whitney, reference.pvalue, rtol=1e-12)
    # Hand count: pairs with x > y, ties one half (McGraw & Wong 1992 common-language effect size).
    greater = sum((a > b) + 0.5 * (a == b) for a in x for b in y)
    assert_allclose(result.common_language, greater / (x.size * y.size), rtol=1e-12)
    # Rank-biserial r = 1 - 2 U_y / (n_x n_y) (Kerby 2014, simple difference formula).
    u_y = x.size * y.size - reference.statistic
    assert_allclose(result.rank_biserial, 1 - 2 * u_y / (x.size * y.size), rtol=1e-12)
    assert result.common_language_low <= result.common_language <= result.common_language_high
    assert result.mean_difference_low <= result.mean_difference <= result.mean_difference_high


def test_permutation_test_is_exact_on_a_tiny_example():
    # Hand computation: of the C(6,3) = 20 ways to split {1..6} into two triples, only the
    # two extreme splits give |mean difference| >= 3, so the exact two-sided p is 2/20.
    result = compare_two([1, 2, 3], [4, 5, 6], np.random.default_rng(0))
    assert_allclose(result.p_permutation, 0.1, rtol=1e-12)
    assert_allclose(result.mean_difference, -3.0, atol=0)


def test_wilcoxon_signed_rank_matches_scipy_and_the_exact_distribution():
    # Five positive differences: W- = 0, and the exact two-sided p is 2 / 2^5 = 0.0625
    # (signed-rank null distribution, Wilcoxon 1945; hand computation).
    after, before = np.array([3.0, 5, 8, 10, 13]), np.array([2.0, 3, 5, 6, 8])
    result = compare_paired(after, before)
    assert_allclose(result.p_value, 0.0625, rtol=1e-12)
    rng = np.random.default_rng(11)
    a, b = rng.normal(10, 2, 15), rng.normal(10.5, 2, 15)
    reference = stats.wilcoxon(a, b)  # scipy.stats reference
    ours = compare_paired(a, b)
    assert_allclose(ours.statistic, reference.statistic, atol=0)
    assert_allclose(ours.p_value, reference.pvalue, rtol=1e-12)


def test_paired_comparison_refuses_unequal_lengths():
    with pytest.raises(ValueError, match="at least 2 pairs of equal length"):
        compare_paired([1, 2, 3], [1, 2])


def test_kaplan_meier_reproduces_the_6mp_leukaemia_textbook_table():
    # Check values: Freireich et al. (1963) 6-MP arm as shipped by lifelines (load_leukemia, Rx = 0).
    # Product-limit estimates as tabulated in Kleinbaum & Klein, Survival Analysis (from memory):
    # 0.857, 0.807, 0.753, 0.690, 0.627, 0.538, 0.448 at the event times 6, 7, 10, 13, 16, 22, 23.
    leukaemia = load_leukemia()
    arm = leukaemia[leukaemia["Rx"] == 0]
    table = kaplan_meier(arm["t"], arm["status"]).set_index("time")
    times = [6, 7, 10, 13, 16, 22, 23]
    textbook = [0.857, 0.807, 0.753, 0.690, 0.627, 0.538, 0.448]
    assert_allclose(table.loc[times, "survival"], textbook, atol=5e-4)
    assert_allclose(table.loc[6, "at_risk"], 21, atol=0)


def test_log_rank_matches_lifelines_textbook_value_and_hand_computation():
    # Textbook value for the two leukaemia arms: chi-square 16.79 on 1 df (Kleinbaum & Klein, from memory).
    leukaemia = load_leukemia()
    groups = pd.DataFrame({
        "treatment": np.where(leukaemia["Rx"] == 0, "6-MP", "placebo"),
        "group": [f"patient{i}" for i in range(len(leukaemia))], "block": 1,  # independent subjects
        "collapsed": leukaemia["status"].astype(bool),
        "collapse_round": leukaemia["t"].astype(float),
        "rounds_played": leukaemia["t"],
    })
    result = good_regime_survival(groups, has_threshold=True)
    assert_allclose(result.logrank_statistic, 16.79, atol=0.005)
    reference = logrank_test(*[leukaemia.loc[leukaemia["Rx"] == r, "t"] for r in (0, 1)],
                             *[leukaemia.loc[leukaemia["Rx"] == r, "status"] for r in (0, 1)])
    assert_allclose(result.logrank_statistic, reference.test_statistic, rtol=1e-10)
    assert_allclose(result.logrank_p, reference.p_value, rtol=1e-8)
    # Hand computation (Mantel 1966): sum over event times of O - E and of the hypergeometric variance.
    observed_minus_expected, variance = 0.0, 0.0
    t, event, arm = leukaemia["t"].to_numpy(), leukaemia["status"].to_numpy(), leukaemia["Rx"].to_numpy()
    for time in np.unique(t[event == 1]):
        at_risk = t >= time
        n, n1 = at_risk.sum(), (at_risk & (arm == 0)).sum()
        d = ((t == time) & (event == 1)).sum()
        d1 = ((t == time) & (event == 1) & (arm == 0)).sum()
        observed_minus_expected += d1 - d * n1 / n
        variance += d * (n1 / n) * (1 - n1 / n) * (n - d) / (n - 1) if n > 1 else 0.0
    assert_allclose(result.logrank_statistic, observed_minus_expected**2 / variance, rtol=1e-10)


def test_survival_not_applicable_without_threshold_or_crossings():
    groups = pd.DataFrame({"treatment": ["none", "exact"], "group": ["a", "b"], "block": [1, 1],
                           "collapsed": [False, False],
                           "collapse_round": [np.nan, np.nan], "rounds_played": [10, 10]})
    assert "no threshold" in good_regime_survival(groups, has_threshold=False).not_applicable
    assert "no group collapsed" in good_regime_survival(groups, has_threshold=True).not_applicable


def tiny_decisions(seed=3, groups=6, seats=3, rounds=5):
    """Invented decisions of a tiny between-groups design, for the regression checks."""
    rng = np.random.default_rng(seed)
    rows = []
    for g in range(groups):
        stock = 60
        for k in range(1, rounds + 1):
            asks = rng.integers(0, 9, seats)
            for s in range(seats):
                rows.append({
                    "session_id": "tiny", "group_id": f"G{g + 1:02d}", "seat_id": f"G{g + 1:02d}-{s + 1}",
                    "block": 1, "treatment": "none" if g % 2 else "exact", "round": k,
                    "stock_before": stock, "harvest_asked": int(asks[s]), "harvest_taken": int(asks[s]),
                })
            stock = max(5, stock - int(asks.sum()) + 12)
    return pd.DataFrame(rows)


def test_others_lag_is_the_mean_of_the_other_seats_last_round():
    decisions = tiny_decisions()
    panel = panel_frame(decisions)
    row = panel[(panel["group_id"] == "G02") & (panel["seat_id"] == "G02-1") & (panel["round"] == 3)].iloc[0]
    last = decisions[(decisions["group_id"] == "G02") & (decisions["round"] == 2)]
    others = last[last["seat_id"] != "G02-1"]["harvest_taken"].mean()
    assert_allclose(row["others_lag"], others, rtol=1e-12)
    assert panel["round"].min() == 2


@pytest.mark.filterwarnings("ignore::UserWarning")
def test_cluster_robust_errors_match_the_sandwich_formula_by_hand():
    # Sandwich (Liang & Zeger 1986): (X'X)^-1 (sum_g X_g' e_g e_g' X_g) (X'X)^-1, times the
    # small-sample factor statsmodels applies by default, G/(G-1) * (N-1)/(N-K).
    decisions = tiny_decisions()
    models = fit_panel_models(decisions)
    panel = panel_frame(decisions)
    x = np.column_stack([np.ones(len(panel)), (panel["treatment"] == "none").astype(float), panel["round"],
                         panel["lagged_stock"], panel["others_lag"]])
    y = panel["harvest"].to_numpy()
    bread = np.linalg.inv(x.T @ x)
    beta = bread @ x.T @ y
    residual = y - x @ beta
    meat = np.zeros((5, 5))
    for group in panel["group"].unique():
        rows = (panel["group"] == group).to_numpy()
        score = x[rows].T @ residual[rows]
        meat += np.outer(score, score)
    n, k, g = len(y), x.shape[1], panel["group"].nunique()
    covariance = g / (g - 1) * (n - 1) / (n - k) * bread @ meat @ bread
    table = models.table.set_index("term")
    terms = ["Intercept", "C(treatment)[T.none]", "round", "lagged_stock", "others_lag"]
    assert_allclose(table.loc[terms, "ols_coef"], beta, rtol=1e-9)
    assert_allclose(table.loc[terms, "ols_cluster_se"], np.sqrt(np.diag(covariance)), rtol=1e-9)
    # 95% Wald interval with the normal quantile (statsmodels' cluster covariance uses z, not t).
    half = stats.norm.ppf(0.975) * np.sqrt(np.diag(covariance))
    assert_allclose(table.loc[terms, "ols_coef_low"], beta - half, rtol=1e-9)
    assert_allclose(table.loc[terms, "ols_coef_high"], beta + half, rtol=1e-9)
    # The base of the treatment dummy is the level the design matrix above leaves out.
    assert models.bases == {"treatment": "exact"} and models.clusters == g
    assert readable_term("C(treatment)[T.none]", models.bases) == "treatment none (base: exact)"
