"""The offline pilot: fast, reproducible, and identical to playing rounds one by one."""

from pathlib import Path

import numpy as np
import pytest
from studies import teach_study

from ebbtide.game_logic import pilot, seeding
from ebbtide.game_logic.behaviour import choose_from_view, make_model
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.rounds import next_block, resolve, start_block
from ebbtide.game_logic.seeding import behaviour_rng, round_rng
from ebbtide.game_logic.study import load_study
from ebbtide.game_logic.treatments import participant_view

ROOT = Path(__file__).parent.parent
DEMO = load_study(ROOT / "examples" / "brackwater-demo.toml")
BETWEEN = load_study(ROOT / "examples" / "between-groups.toml")


def test_everyone_taking_the_maximum_collapses_every_group():
    run = run_pilot(DEMO, groups=1000, seed=5, strategy="max")
    crossed = {(o.group, o.block) for o in run.outcomes if o.crossed}
    assert crossed == {(g, b) for g in range(1000) for b in range(len(DEMO.blocks))}


def test_equal_share_of_sustainable_yield_stays_in_good_regime():
    run = run_pilot(DEMO, groups=1000, seed=5, strategy="sustainable")
    assert all(o.regime_after == "good" for o in run.outcomes)
    assert len(run.outcomes) == 1000 * DEMO.total_rounds


@pytest.mark.parametrize("study", [DEMO, BETWEEN], ids=["demo", "between"])
def test_pilot_groups_equal_round_by_round_play(study):
    seed = 21
    run = run_pilot(study, groups=12, seed=seed, strategy="conditional")
    for g in (0, 5, 11):
        mine = [o for o in run.outcomes if o.group == g]
        state = start_block(study, seed, g, 0)
        replayed = []
        for o in mine:
            if o.block != state.block:
                state = next_block(study, seed, state)
            state, out = resolve(study, state, list(o.asked), round_rng(seed, g, o.block, o.round))
            replayed.append(out)
        assert replayed == mine


def test_conditional_cooperators_vary_but_stay_within_limits():
    run = run_pilot(BETWEEN, groups=50, seed=2, strategy="conditional")
    asked = np.array([a for o in run.outcomes for a in o.asked])
    assert asked.min() >= 0 and asked.max() <= BETWEEN.resource.max_harvest
    assert len(set(asked.tolist())) > 3


def test_unknown_strategy_names_the_allowed_ones():
    with pytest.raises(ValueError, match="allowed: selfish, sustainable, conditional, logit"):
        run_pilot(DEMO, groups=2, seed=1, strategy="greedy")


class _TwoDraws:
    """Stands in for a round's generator: hands ``resolve`` the two draws it was given."""

    def __init__(self, flip, cont):
        self.pair = np.array([flip, cont])

    def random(self, count):
        assert count == 2
        return self.pair


@pytest.mark.parametrize("live", [True, False], ids=["live-draws", "own-draws"])
@pytest.mark.parametrize("name", ["conditional", "threshold-averse", "selfish"])
@pytest.mark.parametrize("study", [teach_study(), BETWEEN], ids=["six-treatments", "between"])
def test_pilot_in_slices_equals_each_group_played_alone(monkeypatch, study, name, live):
    # Reference, written here: one group at a time, each seat choosing from the view its
    # phone receives (choose_from_view, the rehearsal bots' path) with its own numpy
    # generator, each round through resolve. The pilot plays many groups at once, in
    # slices; tiny slices and generator chunks make every slice and chunk boundary show.
    monkeypatch.setattr(pilot, "_SLICE", 4)
    monkeypatch.setattr(seeding, "_CHUNK", 3)
    seed, groups, model = 17, 11, make_model(name, study)
    steps = []
    pilot.play(study, model, seed, np.arange(groups), steps.append, live_draws=live)
    outcomes = [o for step in steps for o in pilot.round_outcomes(step)]
    for g in range(groups):
        mine = [o for o in outcomes if o.group == g]
        replayed, state, last = [], start_block(study, seed, g, 0), None
        for block in range(len(study.blocks)):
            if block:
                state, last = next_block(study, seed, state), None
            rounds = study.blocks[block].rounds
            draws = behaviour_rng(seed, g, block).random(rounds * study.seats + 2 * rounds)
            while not state.block_over:
                k = state.round + 1
                views = [participant_view(study, state, seat, last, 0.0) for seat in range(study.seats)]
                asked = [choose_from_view(model, study, view, seed, g) for view in views]
                own = rounds * study.seats + 2 * (k - 1)  # the group's own two draws follow its seats'
                rng = round_rng(seed, g, block, k) if live else _TwoDraws(*draws[own:own + 2])
                state, last = resolve(study, state, asked, rng)
                replayed.append(last)
        assert replayed == mine
