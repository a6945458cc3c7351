"""Behaviour models: one implementation for pilot, rehearsal bots and power analysis."""

from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from studies import make_study

from ebbtide.game_logic.behaviour import (
    MODEL_NAMES,
    Danger,
    Observation,
    choose_from_view,
    make_model,
)
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.rounds import next_block, resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.study import load_study
from ebbtide.game_logic.treatments import participant_view

ROOT = Path(__file__).parent.parent
DEMO = load_study(ROOT / "examples" / "brackwater-demo.toml")
BETWEEN = load_study(ROOT / "examples" / "between-groups.toml")
WITHIN = load_study(ROOT / "examples" / "within-subject.toml")


def _observation(stock, kind="none", own=np.nan, total=np.nan, seats=1, **numbers):
    info = {"kind": kind, **numbers}
    return Observation(
        round=np.array([1 if np.isnan(total) else 2]), stock=np.array([stock]),
        own_last=np.full((1, seats), own), group_last=np.array([[total]]),
        danger=Danger.from_infos([info]),
    )


@pytest.mark.parametrize("name", MODEL_NAMES)
@pytest.mark.parametrize("study", [BETWEEN, WITHIN], ids=["between", "within"])
def test_a_groups_path_does_not_depend_on_how_many_groups_run(name, study):
    small = run_pilot(study, groups=3, seed=8, strategy=name)
    large = run_pilot(study, groups=40, seed=8, strategy=name)
    for g in range(3):
        assert [o for o in small.outcomes if o.group == g] == [o for o in large.outcomes if o.group == g]


@pytest.mark.parametrize("name", ["conditional", "logit", "threshold-averse"])
@pytest.mark.parametrize("study", [DEMO, BETWEEN], ids=["demo", "between"])
def test_a_bot_reading_its_phone_asks_what_the_pilot_seat_asked(name, study):
    # The rehearsal path (one seat, from the participant view the phone receives) and the
    # vectorised pilot are the same model fed the same draws: every ask must agree.
    seed, model = 13, make_model(name, study)
    run = run_pilot(study, groups=6, seed=seed, strategy=model)
    checked = 0
    for g in range(6):
        state, last = start_block(study, seed, g, 0), None
        for o in (o for o in run.outcomes if o.group == g):
            if o.block != state.block:
                state, last = next_block(study, seed, state), None
            for seat in range(study.seats):
                view = participant_view(study, state, seat, last, 0.0)
                assert choose_from_view(model, study, view, seed, g) == o.asked[seat]
                checked += 1
            state, last = resolve(study, state, list(o.asked), round_rng(seed, g, o.block, o.round))
    assert checked == sum(len(o.asked) for o in run.outcomes)


def test_the_rounded_normal_probabilities_match_scipys_normal():
    # Reference: scipy.stats.norm; P(h) = Phi(h + 1/2) - Phi(h - 1/2) inside, open at 0 and the cap.
    study = make_study(seats=4, max_harvest=10)
    model = make_model("conditional", study, {"start": 3.3, "noise": 1.7})
    obs = _observation(80, seats=11)
    h = np.arange(11)[None, :]
    got = np.exp(model.log_prob(obs, h))[0]
    norm = stats.norm(3.3, 1.7)
    edges = np.concatenate([[-np.inf], np.arange(10) + 0.5, [np.inf]])
    np.testing.assert_allclose(got, np.diff(norm.cdf(edges)), rtol=1e-10, atol=1e-15)
    assert got.sum() == pytest.approx(1.0)


@pytest.mark.parametrize(("name", "parameters"), [
    ("conditional", {"weight": 0.6, "noise": 2.0}),
    ("logit", {"precision": 0.25}),
    ("threshold-averse", {"margin": 10, "noise": 3.0}),
])
def test_draws_follow_the_models_own_probabilities(name, parameters):
    # Chi-square goodness of fit (scipy.stats.chisquare) of 40 000 draws against exp(log_prob):
    # sampling and likelihood must describe one distribution, or fitted parameters mean nothing.
    study = make_study(seats=4, max_harvest=10, treatment="exact")
    model = make_model(name, study, parameters)
    n = 40_000
    obs = _observation(60, kind="exact", own=4.0, total=20.0, level=30.0)
    many = Observation(np.full(n, 2), np.full(n, 60), np.full((n, 1), 4.0), np.full((n, 1), 20.0),
                       obs.danger.take(np.zeros(n, dtype=np.int64)))
    draws = model.ask(many, np.random.default_rng(3).random((n, 1)))[:, 0]
    expected = np.exp(model.log_prob(obs, np.arange(11)[None, :]))[0] * n
    keep = expected > 5  # the test's own rule of thumb for chi-square cells (common practice, no source)
    observed = np.bincount(draws, minlength=11)
    assert observed[~keep].sum() < 40
    scaled = expected[keep] * observed[keep].sum() / expected[keep].sum()
    assert stats.chisquare(observed[keep], scaled).pvalue > 0.001


def test_the_logit_choice_is_a_softmax_of_the_rounds_points():
    # McKelvey & Palfrey (1995): P(h) = exp(lambda u(h)) / sum_k exp(lambda u(k)); u(h) = points
    # per unit times h. Reference: scipy.special.softmax.
    from scipy.special import softmax
    study = make_study(seats=4, max_harvest=6)
    model = make_model("logit", study, {"precision": 0.7})
    got = np.exp(model.log_prob(_observation(50, seats=7), np.arange(7)[None, :]))[0]
    np.testing.assert_allclose(got, softmax(0.7 * np.arange(7)))


def test_the_threshold_averse_wish_follows_what_the_treatment_tells():
    # Hand computations from the model's definition (docs/behaviour-models.md), 4 seats, cap 10,
    # stock 80, margin 5, caution 0.5, and noise so small the wish is the ask.
    study = make_study(seats=4, max_harvest=10)
    model = make_model("threshold-averse", study, {"margin": 5, "caution": 0.5, "noise": 0.05})
    u = np.array([[0.5]])

    def ask(**kw):
        return int(model.ask(_observation(80, **kw), u)[0, 0])

    assert ask(kind="none") == 10  # nothing told: myopic
    assert ask(kind="exact", level=60.0) == 4  # (80 - 60 - 5) / 4 = 3.75 -> 4
    assert ask(kind="exact", level=20.0) == 10  # (80 - 25) / 4 = 13.75, clipped to the cap
    assert ask(kind="range", low=40.0, high=60.0) == 6  # target 50: (80 - 55) / 4 = 6.25 -> 6
    assert ask(kind="risk", level=60.0, flip_probability=0.5) == 7  # 0.5 * 3.75 + 0.5 * 10 = 6.875
    assert ask(kind="vague") == 10  # target 0.3 * 100 = 30: (80 - 35) / 4 = 11.25, capped at 10
    assert ask(kind="signal", band="alarm") == 2  # MSY r K / 4 = 12.5 -> share 3; 0.5 * 3 -> 2


def test_unknown_models_and_parameters_name_what_is_allowed():
    with pytest.raises(ValueError, match="allowed: selfish, sustainable, conditional, logit, threshold-a"):
        make_model("greedy", DEMO)
    with pytest.raises(ValueError, match="no parameter speed; allowed: precision"):
        make_model("logit", DEMO, {"speed": 1})
