"""The social-optimum DP against a brute-force reference over every (stock, harvest) pair.

``brute_force_policy`` below is an independent brute-force reference written in this test: it
scores every harvest at every stock in a full table each round and takes the first maximum, with
the hair's penalty per unit that makes the smaller harvest win ties. ``optimal_group_policy``
finds the same maximum with a windowed search over remainders; the chosen harvests must agree
exactly and the values to float rounding, on many randomised studies, ties included.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from studies import dp_study

from ebbtide.game_logic.benchmarks import ThresholdBelief, optimal_group_policy, threshold_belief
from ebbtide.game_logic.resource import next_regime, regrow


def make_study(seats, capacity, cap, threshold, flip, rounds, growth='law = "logistic"\nr = 0.5', factor=0.2):
    return dp_study(seats=seats, capacity=capacity, start=capacity, cap=cap, rounds=rounds, growth=growth,
                    factor=factor, threshold=f"{threshold}\nflip_probability = {flip}")


def brute_force_policy(study, rounds, discount=1.0, continuation=None, belief=None):
    """Backward induction scoring every harvest 0..seats x max_harvest at every stock.

    Returns (harvest[t, regime, stock], value[regime, stock]) as the reference.
    """
    survive = np.ones(rounds) if continuation is None else np.append(np.asarray(continuation, float), 1.0)
    res, thr = study.resource, study.threshold
    belief = threshold_belief(study) if belief is None else belief
    capacity, cap = res.capacity, study.seats * res.max_harvest
    levels = np.arange(capacity + 1)
    thresholds = np.asarray(belief.values, float)[:, None, None]
    weights = np.asarray(belief.weights, float)
    classes = np.arange(weights.size)[:, None, None]
    regimes = np.arange(2)[None, :, None]
    was_degraded = np.array([False, True])[None, :, None]
    outcomes = []
    for draw, p in ((0.0, thr.flip_probability), (1.0, 1.0 - thr.flip_probability)):
        after, _, _ = next_regime(was_degraded, levels[None, None, :], thresholds, thr.recovery_gap,
                                  thr.flip_probability, draw)
        after = np.broadcast_to(after, (weights.size, 2, levels.size))
        stock_after = regrow(np.broadcast_to(levels, after.shape), after, res.growth, capacity,
                             res.degraded_growth_factor)
        outcomes.append((after.astype(np.int64), stock_after, p))
    harvests = np.arange(cap + 1)
    remainder = levels[:, None] - harvests[None, :]
    allowed = remainder >= 0
    remainder = np.maximum(remainder, 0)
    value = np.zeros((weights.size, 2, levels.size))
    policy = np.zeros((rounds, 2, levels.size), dtype=np.int64)
    for t in range(rounds - 1, -1, -1):
        weight = discount * survive[t] if t < rounds - 1 else 0.0
        future = weight * sum(p * value[classes, nd, ns] for nd, ns, p in outcomes if p > 0)
        expected = np.tensordot(weights, future, axes=1)
        score = expected[:, remainder] + np.where(allowed, harvests[None, :], -np.inf)
        score -= 1e-9 * harvests
        take = np.argmax(score, axis=2)
        policy[t] = take
        value = take[None] + future[classes, regimes, (levels[None, :] - take)[None]]
    return policy, np.tensordot(weights, value, axes=1)


GROWTH = [
    'law = "logistic"\nr = {r}',
    'law = "allee"\nr = {r}\nallee_point = {a}',
    'law = "grazing"\nr = {r}\nconsumption = {c}\nhalf_saturation = {a}',
    'law = "step"\nr = {r}\nstep_at = {a}\nbelow_factor = {b}',
]


def random_case(rng):
    """A randomised study, with flat regrowth, certain or impossible flips and coarse grids."""
    capacity = int(rng.integers(10, 160))
    seats = int(rng.integers(2, 13))
    cap = int(rng.choice([1, 2, int(rng.integers(1, 20)), 100]))
    # r = 0.001 makes regrowth round to nothing: flat values, every harvest ties with waiting.
    r = float(rng.choice([0.001, 0.25, 0.5, 1.0, float(rng.uniform(0.05, 2.5))]))
    growth = str(rng.choice(GROWTH)).format(
        r=r, a=int(rng.integers(1, capacity)), c=float(rng.uniform(0, 3)), b=float(rng.choice([0.0, 0.3]))
    )
    rule = str(rng.choice(["none", "fixed", "uniform"]))
    gap = float(rng.choice([0.0, 3.0, float(rng.integers(1, 20)), round(float(rng.uniform(0, 15)), 2)]))
    low = float(rng.integers(1, capacity // 2))
    if rule == "none":
        threshold = 'rule = "none"'
    elif rule == "fixed":
        threshold = f'rule = "fixed"\nvalue = {low + float(rng.choice([0.0, 0.5]))}\nrecovery_gap = {gap}'
    else:
        high = low + float(rng.choice([0.5, 7.0, float(rng.integers(1, capacity // 2))]))
        threshold = f'rule = "uniform"\nlow = {low}\nhigh = {high}\nrecovery_gap = {gap}'
    flip = float(rng.choice([0.0, 0.5, 1.0, round(float(rng.uniform(0, 1)), 3)]))
    factor = float(rng.choice([0.0, 0.2, 0.5]))
    rounds = int(rng.integers(1, 14))
    study = make_study(seats, capacity, cap, threshold, flip, rounds, growth, factor)
    discount = float(rng.choice([1.0, 1.0, 0.9, 0.5, 0.01]))
    continuation = None
    if rounds > 1 and rng.random() < 0.3:
        continuation = [float(x) for x in rng.choice([0.0, 0.5, 0.8, 1.0], rounds - 1)]
    return study, rounds, discount, continuation


@pytest.mark.parametrize("seed", range(80))
def test_windowed_search_matches_brute_force_on_randomised_studies(seed):
    study, rounds, discount, continuation = random_case(np.random.default_rng([20261202, seed]))
    expected_harvest, expected_value = brute_force_policy(study, rounds, discount, continuation)
    policy = optimal_group_policy(study, rounds, discount, continuation)
    assert_array_equal(policy.harvest, expected_harvest)
    assert_allclose(policy.value, expected_value, rtol=1e-12, atol=1e-12)


def test_ties_go_to_the_smaller_harvest_when_waiting_is_worth_exactly_as_much():
    # Regrowth rounds to nothing at r = 0.001, so a unit left is worth exactly a unit later
    # (no discounting): every harvest that still lets the remaining rounds' caps (20 each) take
    # the rest ties, and the smallest of them, max(0, s - 20 (rounds left - 1)), must be kept
    # (hand-worked; common practice, no source: ties resolved towards restraint).
    study = make_study(4, 60, 5, 'rule = "none"', 1.0, 6, growth='law = "logistic"\nr = 0.001')
    expected_harvest, _ = brute_force_policy(study, 6)
    policy = optimal_group_policy(study, 6)
    assert_array_equal(policy.harvest, expected_harvest)
    stocks = np.arange(61)
    for t in range(6):
        assert_array_equal(policy.harvest[t, 0], np.clip(stocks - 20 * (5 - t), 0, 20))


def test_given_belief_with_an_empty_class_matches_brute_force():
    study = make_study(5, 90, 4, 'rule = "uniform"\nlow = 20\nhigh = 40\nrecovery_gap = 6', 0.7, 9,
                       growth='law = "logistic"\nr = 0.6')
    belief = ThresholdBelief((22.5, 31.0, 38.25), (0.5, 0.0, 0.5))
    expected_harvest, expected_value = brute_force_policy(study, 9, 0.95, belief=belief)
    policy = optimal_group_policy(study, 9, 0.95, belief=belief)
    assert_array_equal(policy.harvest, expected_harvest)
    assert_allclose(policy.value, expected_value, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize(
    ("cap", "threshold"),
    [(10, 'rule = "uniform"\nlow = 250\nhigh = 450\nrecovery_gap = 150'),
     (100, 'rule = "fixed"\nvalue = 300\nrecovery_gap = 150')],
)
def test_benchmark_sized_grid_matches_brute_force(cap, threshold):
    # The benchmark's 1,000-level grid (bench/bench_dp.py), over fewer rounds to keep the test short.
    study = make_study(10, 1000, cap, threshold, 0.7, 4)
    expected_harvest, expected_value = brute_force_policy(study, 4)
    policy = optimal_group_policy(study, 4)
    assert_array_equal(policy.harvest, expected_harvest)
    assert_allclose(policy.value, expected_value, rtol=1e-12, atol=1e-12)
