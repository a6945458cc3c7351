"""Social optimum by dynamic programming, selfish play, and the threshold belief."""

from __future__ import annotations

import functools

import numpy as np
import pytest
from numpy.testing import assert_allclose
from studies import dp_study

from ebbtide.game_logic.benchmarks import (
    optimal_group_policy,
    selfish_group_take,
    threshold_belief,
)
from ebbtide.game_logic.resource import next_regime, regrow
from ebbtide.game_logic.rounds import advance


def follow(study, policy, start, threshold):
    """Remainders left and harvests taken each round along the policy (flip probability 1)."""
    stock, degraded, kept, taken = start, False, [], []
    for k in range(1, policy.rounds + 1):
        taken.append(policy.harvest_at(k, stock, degraded))
        remaining = stock - taken[-1]
        degraded = degraded or remaining < threshold
        kept.append(remaining)
        stock = int(regrow(remaining, degraded, study.resource.growth, study.resource.capacity, 0.2))
    return kept, taken


@pytest.mark.parametrize("rounds", [1, 5])
def test_last_round_takes_everything_without_threshold(rounds):
    # Known answer: with linear payoff, no threshold and nothing after the block,
    # the planner's last round takes all it may (common practice, no source).
    study = dp_study(rounds=rounds)
    policy = optimal_group_policy(study, rounds)
    stocks = np.arange(study.resource.capacity + 1)
    expected = np.minimum(stocks, study.seats * study.resource.max_harvest)
    assert_allclose(policy.harvest[-1, 0], expected, atol=0)
    if rounds == 1:
        assert_allclose(policy.value[0], expected, atol=1e-12)


def test_optimum_keeps_stock_at_or_above_known_threshold_until_final_rounds():
    # T = 60 lies above the MSY stock K/2 = 50, so the best a patient planner can do
    # is to hold the remainder at the threshold and take its regrowth,
    # round_half_up(g(60)) = round(0.5 * 60 * 0.4) = 12 a round (Clark, Mathematical
    # Bioeconomics, ch. 1: a stock constraint binds above the golden-rule stock).
    study = dp_study(threshold='rule = "fixed"\nvalue = 60\nrecovery_gap = 15', rounds=40)
    policy = optimal_group_policy(study, 40)
    kept, taken = follow(study, policy, 80, 60)
    assert min(kept[:-2]) >= 60
    assert set(taken[1:-2]) == {12}
    assert kept[-1] == 0


def test_steady_escapement_approaches_msy_stock_for_logistic_growth():
    # Golden rule for zero discounting (Clark, Mathematical Bioeconomics, ch. 2): the
    # optimal escapement is the MSY stock K/2. Grid tolerance: whole-unit rounding makes
    # every R with g(R) >= rK/4 - 1/2 give the same take, i.e. |R - K/2| <= sqrt(K / (2r))
    # = 31.6 units of 1,000.
    study = dp_study(seats=10, capacity=1000, start=800, cap=100, rounds=60)
    policy = optimal_group_policy(study, 60)
    kept, _ = follow(study, policy, 800, float("nan"))
    middle = np.array(kept[5:50])
    assert_allclose(middle, 500, atol=np.sqrt(1000 / (2 * 0.5)))


def test_heavy_discounting_makes_the_planner_take_the_maximum():
    # A planner who hardly values the future behaves like open access (Clark,
    # Mathematical Bioeconomics, ch. 2: infinite discount rate).
    study = dp_study(threshold='rule = "fixed"\nvalue = 40\nrecovery_gap = 15', rounds=8)
    policy = optimal_group_policy(study, 8, discount=0.01)
    stocks = np.arange(101)
    assert_allclose(policy.harvest[:, 0, :], np.broadcast_to(np.minimum(stocks, 40), (8, 101)), atol=0)


def test_value_matches_brute_force_expectimax_with_flip_risk():
    # Independent check: plain recursion over every harvest and both flip outcomes,
    # written from the model's rules, on a tiny stock.
    study = dp_study(seats=2, capacity=12, start=10, cap=3, rounds=4,
                     threshold='rule = "fixed"\nvalue = 6\nrecovery_gap = 3\nflip_probability = 0.4')
    spec, p = study.resource, 0.4

    @functools.cache
    def best(stock, degraded, rounds_left):
        if rounds_left == 0:
            return 0.0
        values = []
        for h in range(min(stock, 6) + 1):
            remaining = stock - h
            total = 0.0
            for draw, chance in ((0.0, p), (1.0, 1 - p)):
                after, _, _ = next_regime(degraded, remaining, 6.0, 3.0, p, draw)
                nxt = int(regrow(remaining, after, spec.growth, spec.capacity, spec.degraded_growth_factor))
                total += chance * best(nxt, bool(after), rounds_left - 1)
            values.append(h + total)
        return max(values)

    policy = optimal_group_policy(study, 4)
    for stock in range(13):
        for degraded in (False, True):
            assert_allclose(policy.value_at(stock, degraded), best(stock, degraded, 4), rtol=1e-12)


def test_uniform_threshold_value_matches_simulation_through_the_model():
    # The class decomposition makes the expectation over T ~ U(20, 40) exact: playing
    # the policy through rounds.advance with drawn thresholds and flips must give the
    # same mean total within Monte Carlo error (4 standard errors).
    study = dp_study(threshold='rule = "uniform"\nlow = 20\nhigh = 40\nrecovery_gap = 12.5\n'
                                 'flip_probability = 0.6', rounds=12)
    policy = optimal_group_policy(study, 12)
    rng = np.random.default_rng(20240611)
    n = 20_000
    threshold = rng.uniform(20, 40, n)
    stock = np.full(n, 80, dtype=np.int64)
    degraded = np.zeros(n, dtype=bool)
    total = np.zeros(n)
    seat = np.arange(study.seats)
    for k in range(1, 13):
        group = policy.harvest[k - 1, degraded.astype(int), stock]
        asked = group[:, None] // study.seats + (seat[None, :] < (group % study.seats)[:, None])
        step = advance(study, 0, np.full(n, k), stock, degraded, threshold, asked,
                       rng.random(n), np.zeros(n))
        total += step.taken.sum(axis=1)
        stock, degraded = step.stock_after, step.degraded_after
    standard_error = total.std(ddof=1) / np.sqrt(n)
    assert_allclose(total.mean(), policy.value_at(80), atol=4 * standard_error)


def test_threshold_belief_weights_lengths_of_classes():
    # Integer gap: the dynamics change only as T crosses a whole number, so a uniform
    # T on [20, 40] falls into 20 equally likely classes.
    study = dp_study(threshold='rule = "uniform"\nlow = 20\nhigh = 40\nrecovery_gap = 15')
    belief = threshold_belief(study)
    assert len(belief.values) == 20
    assert_allclose(belief.weights, np.full(20, 0.05), rtol=1e-12)
    uneven = 'rule = "uniform"\nlow = 20\nhigh = 40\nrecovery_gap = 15.5'
    half = threshold_belief(dp_study(threshold=uneven))
    assert len(half.values) == 40
    assert_allclose(sum(half.weights), 1.0, rtol=1e-12)


def test_selfish_take_drains_the_stock_in_one_round_when_maximum_exceeds_it():
    # 2 seats x 50 > 80 units: the first round takes all 80, nothing regrows from 0.
    study = dp_study(seats=2, cap=50, threshold='rule = "fixed"\nvalue = 30\nrecovery_gap = 15')
    assert_allclose(selfish_group_take(study, 5, np.random.default_rng(3), replicates=10), 80.0, atol=0)


def test_selfish_take_matches_hand_iteration_without_threshold():
    # Hand iteration of the logistic rule for 4 x 10 = 40 taken each round from 80:
    # 80 -40-> 40 -> 40 + 0.5*40*0.6 = 52 -40-> 12 -> 12 + 0.5*12*0.88 = 17.28 -> 17 -> take 17.
    study = dp_study()
    assert_allclose(selfish_group_take(study, 3, np.random.default_rng(0), replicates=3), 40 + 40 + 17,
                    atol=0)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [({"rounds": 0}, "rounds must be at least 1"), ({"rounds": 3, "discount": 0}, "discount must lie"),
     ({"rounds": 3, "continuation": [0.5]}, "continuation needs 2")],
)
def test_optimal_policy_refuses_bad_arguments(kwargs, message):
    with pytest.raises(ValueError, match=message):
        optimal_group_policy(dp_study(), **kwargs)


def test_random_stopping_lowers_the_planners_expected_take():
    study = dp_study(threshold='rule = "fixed"\nvalue = 40\nrecovery_gap = 15', rounds=10)
    sure = optimal_group_policy(study, 10).value_at(80)
    risky = optimal_group_policy(study, 10, continuation=[0.8] * 9).value_at(80)
    assert risky < sure
