"""Debrief: the revealed threshold, the crossing, regrowth lost and the what-if replay."""

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose
from studies import DEBRIEF_SEED as SEED
from studies import DEBRIEF_TOML, debrief_study

from ebbtide.game_logic.debrief import CAUTION, debrief_block, debrief_group, regrowth_lost, what_if
from ebbtide.game_logic.rounds import Regime, next_block, resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.study import parse_study


# Invented Ulmsby reed-bed study: numbers made up for the tests.
def play(study, asks_per_round, group=0, seed=SEED, blocks=1):
    """Play blocks through resolve with the session's generators; returns all outcomes."""
    state = start_block(study, seed, group, 0)
    outcomes = []
    for b in range(blocks):
        if b:
            state = next_block(study, seed, state)
        for asks in asks_per_round[b]:
            if state.block_over:
                break
            state, outcome = resolve(study, state, asks, round_rng(seed, group, b, state.round + 1))
            outcomes.append(outcome)
    return outcomes


GREEDY = [[10, 10]] * 8  # 20 a round drains a logistic stock of 80 below 40 in round 4


def test_what_if_with_zero_cut_reproduces_actual_path_exactly():
    study = debrief_study(flip=0.5, treatment="risk")
    outcomes = play(study, [GREEDY])
    replay = what_if(study, SEED, outcomes, 0)
    assert replay.stock_path == (outcomes[0].stock_before, *(o.stock_after for o in outcomes))
    assert replay.taken_per_round == tuple(o.total_taken for o in outcomes)
    assert replay.crossed_round == next((o.round for o in outcomes if o.crossed), None)


def test_greedy_path_crosses_at_the_hand_computed_round():
    # By hand with the model's rule S' = round_half_up(R + 0.5 R (1 - R/100)):
    # 80 -20-> 60 -> 72; 72 -> 52 -> 64 (64.48); 64 -> 44 -> 56 (56.32);
    # 56 -> 36 < 40: crosses in round 4, regrows at 0.2 x logistic: 36 + 2.30 -> 38;
    # 38 -> 18 -> 19 (19.48); round 6 can take only 19, the stock is exhausted.
    study = debrief_study()
    block = debrief_block(study, SEED, play(study, [GREEDY]))
    assert block.stock_path == (80, 72, 64, 56, 38, 19, 0)
    assert block.total_taken == 5 * 20 + 19
    assert block.regrowth_lost[:2] == (12 - 2, 7 - 1)  # good 11.52 -> 12, 18*0.5*0.82 -> 7
    assert block.first_below_round == 4
    assert block.crossed_round == 4
    assert block.threshold == 40
    assert block.recovery_level == 55


def test_taking_less_avoids_the_crossing():
    study = debrief_study()
    block = debrief_block(study, SEED, play(study, [GREEDY]), less_by=(3,))
    (replay,) = block.what_ifs
    assert block.crossed
    assert not replay.crossed
    assert replay.crossed_round is None
    assert min(replay.stock_path) >= 40
    # The greedy group emptied the lagoon in round 6; the replay plays all 8
    # rounds (the last two repeat the last asks, cut) and leaves a healthy stock.
    assert replay.extended_rounds == 2
    assert replay.taken_per_round == (14,) * 8
    assert replay.stock_path[-1] > 55 and block.stock_path[-1] == 0


def test_regrowth_lost_is_good_minus_degraded_regrowth_from_same_remainder():
    study = debrief_study()
    outcomes = play(study, [GREEDY])
    lost = regrowth_lost(study, outcomes)
    first = next(i for i, o in enumerate(outcomes) if o.regime_after is Regime.DEGRADED)
    assert len(lost) == len(outcomes) - first
    for loss, o in zip(lost, outcomes[first:], strict=True):
        r = o.remaining
        good = np.floor(r + 0.5 * r * (1 - r / 100) + 0.5) - r  # docs/model.md regrowth rule
        assert loss == good - o.regrowth
        assert loss >= 0


def test_regrowth_lost_is_empty_without_a_crossing():
    study = debrief_study()
    assert regrowth_lost(study, play(study, [[[2, 2]] * 8])) == ()


def test_stock_is_conserved_and_never_negative_in_actual_and_what_if():
    study = debrief_study(flip=0.7, treatment="risk")
    rng = np.random.default_rng(5)
    asks = [[int(a) for a in rng.integers(0, 16, size=2)] for _ in range(8)]
    outcomes = play(study, [asks])
    for o in outcomes:
        assert o.stock_before - o.total_taken == o.remaining
        assert o.remaining + o.regrowth == o.stock_after
    block = debrief_block(study, SEED, outcomes, less_by=(0, 1, 4, 15))
    for replay in block.what_ifs:
        assert min(replay.stock_path) >= 0
        assert max(replay.stock_path) <= 100
        # Each round's take fits the stock it was taken from.
        assert all(t <= s for t, s in zip(replay.taken_per_round, replay.stock_path, strict=False))
    assert block.what_ifs[-1].total_taken == 0  # cutting by the cap leaves nothing asked
    # A zero cut replays the round resolution itself: its total is what the group really took.
    assert block.what_ifs[0].total_taken == sum(o.total_taken for o in outcomes)


def test_what_if_uses_the_same_flip_draws_as_the_group():
    # With flip probability 0.5 the crossing depends on the draws; a zero cut
    # under a wrong seed would cross elsewhere, so the record check refuses it.
    study = debrief_study(flip=0.5, treatment="risk")
    outcomes = play(study, [GREEDY])
    with pytest.raises(ValueError, match="differ from seed 1; pass the seed the session was played with"):
        what_if(study, 1, outcomes, 0)


def test_debrief_group_covers_every_block_and_serialises_to_json():
    study = debrief_study(rounds=5)
    outcomes = play(study, [GREEDY[:5], [[3, 3]] * 4], blocks=2)
    debrief = debrief_group(study, SEED, outcomes, less_by=(1,))
    assert [b.name for b in debrief.blocks] == ["season-one", "season-two"]
    raw = json.loads(json.dumps(debrief.to_dict()))
    assert raw["caution"] == CAUTION
    assert raw["blocks"][0]["crossed"] is True
    # The first block crossed: from then on the degraded regime grew back less than the good one would.
    assert raw["blocks"][0]["total_regrowth_lost"] > 0
    assert min(raw["blocks"][0]["regrowth_lost"]) >= 0
    assert raw["blocks"][1]["what_ifs"][0]["less_by"] == 1


def test_caution_says_teaching_device_not_forecast():
    assert "teaching device" in CAUTION and "not a forecast" in CAUTION


@pytest.mark.parametrize("bad", [-1, 1.5, True, "2"])
def test_debrief_rejects_bad_cut(bad):
    study = debrief_study()
    with pytest.raises(ValueError, match="allowed: whole numbers of units, 0 or more"):
        debrief_block(study, SEED, play(study, [GREEDY]), less_by=(bad,))


def test_debrief_rejects_outcomes_out_of_order():
    study = debrief_study()
    outcomes = play(study, [GREEDY])
    with pytest.raises(ValueError, match="rounds must run 1, 2, 3"):
        debrief_block(study, SEED, outcomes[::-1])


def test_debrief_rejects_empty_record():
    with pytest.raises(ValueError, match="no outcomes given"):
        debrief_group(debrief_study(), SEED, [])


def test_regrowth_lost_total_matches_sum():
    study = debrief_study()
    block = debrief_block(study, SEED, play(study, [GREEDY]))
    assert_allclose(block.total_regrowth_lost, sum(block.regrowth_lost), atol=0)
    assert block.rounds_degraded == len(block.regrowth_lost)


def test_zero_cut_reproduces_every_pilot_group_exactly():
    # The pilot shares resolve's generators (game_logic.pilot), so a zero-cut
    # replay of each simulated group must land on the same stocks.
    from ebbtide.game_logic.pilot import run_pilot

    study = debrief_study(flip=0.6, treatment="risk", rounds=6)
    run = run_pilot(study, 12, SEED, "conditional")
    for g in range(12):
        record = [o for o in run.outcomes if o.group == g]
        debrief = debrief_group(study, SEED, record, less_by=(0,))
        for block in debrief.blocks:
            assert block.what_ifs[0].stock_path == block.stock_path
            assert block.what_ifs[0].crossed_round == block.crossed_round


def test_what_if_starts_from_carried_stock_and_regime():
    second_block = 'treatment = "none"\nrounds = 4'
    carried = DEBRIEF_TOML.replace(second_block, second_block + "\nreset_stock = false")
    study = parse_study(carried.format(flip=1.0, treatment="exact", rounds=4))
    outcomes = play(study, [GREEDY[:4], [[1, 1]] * 4], blocks=2)
    second = debrief_group(study, SEED, outcomes, less_by=(0,)).blocks[1]
    assert second.started_degraded
    assert second.stock_path[0] == outcomes[3].stock_after
    assert second.what_ifs[0].stock_path == second.stock_path
    assert len(second.regrowth_lost) == 4  # degraded from round 1 of the carried block
