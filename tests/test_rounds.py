"""One round of one group: regime, hysteresis, end rules, validation, determinism."""

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from studies import make_study

from ebbtide.game_logic.errors import InvalidHarvest, RoundClosed
from ebbtide.game_logic.rounds import Regime, next_block, resolve, start_block
from ebbtide.game_logic.seeding import round_rng

STUDY = make_study()
SEED = 7


def _play(study, state, harvests, seed=SEED):
    return resolve(study, state, harvests, round_rng(seed, state.group, state.block, state.round + 1))


def test_first_block_starts_at_initial_stock_in_good_regime():
    state = start_block(STUDY, SEED, group=0, block=0)
    assert (state.stock, state.regime, state.round, state.threshold) == (80, Regime.GOOD, 0, 30.0)


def test_crossing_below_threshold_flips_to_degraded():
    state = start_block(STUDY, SEED, 0, 0)
    state, out = _play(STUDY, state, [10, 10, 10, 10])  # 80 - 40 = 40 >= 30: still good
    assert not out.crossed and out.regime_after is Regime.GOOD
    state, out = _play(STUDY, state, [10, 10, 10, 10])  # 52 - 40 = 12 < 30
    assert out.crossed and out.regime_after is Regime.DEGRADED
    assert out.remaining == 12
    # Degraded regrowth: 12 + 0.2 * 0.5*12*(1-0.12) = 13.056 -> 13.
    assert out.stock_after == 13


@pytest.mark.parametrize(
    "stock, expected",
    [
        (31, Regime.DEGRADED),  # back above T = 30 is not enough ...
        (45, Regime.DEGRADED),  # ... nor reaching T + gap exactly ...
        (46, Regime.GOOD),  # ... only climbing above T + gap = 45 recovers
    ],
)
def test_degraded_stock_recovers_only_above_recovery_level(stock, expected):
    state = replace(start_block(STUDY, SEED, 0, 0), stock=stock, regime=Regime.DEGRADED)
    _, out = _play(STUDY, state, [0, 0, 0, 0])
    assert out.regime_after is expected
    assert out.recovered == (expected is Regime.GOOD)


def test_zero_flip_probability_never_flips():
    study = make_study(threshold='rule = "fixed"\nvalue = 30\nflip_probability = 0.0')
    state = start_block(study, SEED, 0, 0)
    for _ in range(3):
        state, out = _play(study, state, [10, 10, 10, 10])
        assert not out.crossed
    assert state.regime is Regime.GOOD


def test_flip_probability_is_the_share_of_crossings_that_flip():
    study = make_study(threshold='rule = "fixed"\nvalue = 30\nflip_probability = 0.3',
                       max_harvest=15)
    trials = 2000
    flips = 0
    for g in range(trials):
        state = start_block(study, SEED, g, 0)
        _, out = resolve(study, state, [15, 15, 15, 15], round_rng(SEED, g, 0, 1))
        assert out.remaining == 20  # below T = 30 in every trial
        flips += out.crossed
    # Binomial(2000, 0.3): mean 600, sd ~ 20.5; accept 4 sd (textbook binomial).
    assert 518 < flips < 682


def test_exhaustion_ends_the_block():
    study = make_study(initial=30, max_harvest=10, seats=4)
    state = start_block(study, SEED, 0, 0)
    state, out = _play(study, state, [10, 10, 10, 10])
    assert out.stock_after == 0 and out.block_over and out.end_reason == "exhausted"
    assert state.session_over
    with pytest.raises(RoundClosed, match="last block") as closed:
        _play(study, state, [0, 0, 0, 0])
    assert closed.value.code == "session_over"


def test_fixed_block_ends_after_its_rounds():
    study = make_study(rounds=3)
    state = start_block(study, SEED, 0, 0)
    reasons = []
    for _ in range(3):
        state, out = _play(study, state, [1, 1, 1, 1])
        reasons.append(out.end_reason)
    assert reasons == [None, None, "last round"]


def test_random_stopping_matches_continuation_probability():
    study = make_study(
        end='rule = "random"\ncontinuation_probability = 0.8\nmin_rounds = 1', rounds=100
    )
    lengths = []
    for g in range(400):
        state = start_block(study, SEED, g, 0)
        while not state.block_over:
            state, _ = resolve(study, state, [0, 0, 0, 0], round_rng(SEED, g, 0, state.round + 1))
        lengths.append(state.round)
    # Geometric with p(stop) = 0.2 has mean 1/0.2 = 5 (textbook geometric distribution).
    assert 4.3 < np.mean(lengths) < 5.7


@pytest.mark.parametrize("bad", [[1, 2, 3], [1, 2, 3, 11], [1, 2, 3, -1], [1, 2, 3, 2.5], [1, 2, 3, True]])
def test_invalid_harvests_are_refused_with_the_allowed_range(bad):
    state = start_block(STUDY, SEED, 0, 0)
    with pytest.raises(InvalidHarvest, match="expected 4 harvests|whole number from 0 to 10"):
        _play(STUDY, state, bad)


def test_next_block_requires_the_block_to_be_over():
    state = start_block(STUDY, SEED, 0, 0)
    with pytest.raises(RoundClosed, match="still running"):
        next_block(STUDY, SEED, state)


def test_same_seed_gives_same_outcomes():
    def run(seed):
        study = make_study(threshold='rule = "uniform"\nlow = 20\nhigh = 40\nflip_probability = 0.5')
        state = start_block(study, seed, 0, 0)
        outs = []
        while not state.block_over:
            state, out = _play(study, state, [7, 8, 9, 10], seed)
            outs.append(out)
        return outs

    assert run(11) == run(11)
    assert run(11) != run(12)


@settings(max_examples=150, deadline=None)
@given(
    harvests=st.lists(st.lists(st.integers(0, 10), min_size=4, max_size=4), min_size=1, max_size=10),
    initial=st.integers(1, 100),
    law=st.sampled_from(["logistic", "allee", "grazing", "step"]),
)
def test_resolve_keeps_stock_within_bounds_and_takes_at_most_asked(harvests, initial, law):
    extra = {
        "logistic": "",
        "allee": "allee_point = 15",
        "grazing": "consumption = 5\nhalf_saturation = 10",
        "step": "step_at = 40",
    }[law]
    text_study = make_study(initial=initial)
    source = text_study.source_text.replace('law = "logistic"', f'law = "{law}"\n{extra}')
    from ebbtide.game_logic.study import parse_study

    study = parse_study(source)
    state = start_block(study, SEED, 0, 0)
    for asked in harvests:
        if state.block_over:
            break
        before = state.stock
        state, out = _play(study, state, asked)
        assert all(0 <= t <= a for t, a in zip(out.taken, out.asked, strict=True))
        assert out.total_taken == min(before, sum(asked))
        assert 0 <= out.remaining <= before
        assert 0 <= out.stock_after <= study.resource.capacity
