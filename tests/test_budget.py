"""Cash to carry and the length of the day, from simulated sessions."""

from decimal import Decimal
from pathlib import Path

import numpy as np
from click.testing import CliRunner

from ebbtide.exports.build import tables_from_outcomes
from ebbtide.game_logic.behaviour import make_model
from ebbtide.game_logic.budget import cash_budget, day_minutes, seat_payments, simulate_sessions
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.study import load_study
from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
DEMO = load_study(ROOT / "examples" / "brackwater-demo.toml")
BETWEEN = load_study(ROOT / "examples" / "between-groups.toml")
WITHIN = load_study(ROOT / "examples" / "within-subject.toml")


def test_simulated_cash_agrees_with_the_payment_sheet_code_on_the_same_play():
    # The same play twice: the budget's session (live draws) and a pilot export's seats.csv rows.
    for name in ("conditional", "threshold-averse", "logit"):
        model = make_model(name, BETWEEN)
        played = simulate_sessions(BETWEEN, model, sessions=1, seed=9, live_draws=True)
        budget = [a for row in seat_payments(BETWEEN, played.units[0]) for a in row]
        run = run_pilot(BETWEEN, groups=BETWEEN.groups.count, seed=9, strategy=model)
        seats = tables_from_outcomes(BETWEEN, "s", run.outcomes, lambda o: ["pilot"] * len(o.asked))["seats"]
        assert [Decimal(str(r["payment"])) for r in seats] == budget
        assert sum(budget) == sum(Decimal(str(r["payment"])) for r in seats)


def test_a_sustainable_session_costs_what_a_hand_computation_says():
    # Demo: logistic r = 0.5, K = 100, MSY = r K / 4 = 12.5 (Schaefer 1954); 2 seats take
    # floor(12.5 / 2) = 6 each round, 10 rounds: 60 units = 60 points; cash 20 + 60 * 2 = 140
    # (a multiple of 5 already); 2 groups x 2 seats: 560 a session, paid 100 + 20 + 20 each.
    budget = cash_budget(DEMO, make_model("sustainable", DEMO), sessions=20, seed=1)
    assert budget.minimum == budget.expected == budget.high == budget.maximum == Decimal(560)
    assert budget.packing == {Decimal(100): 4, Decimal(20): 8}


def test_the_high_quantile_lies_between_the_mean_and_the_most_expensive_session():
    budget = cash_budget(BETWEEN, make_model("conditional", BETWEEN), sessions=200, seed=2)
    assert budget.minimum <= budget.expected <= budget.high <= budget.maximum
    below = sum(t <= budget.high for t in budget.totals)
    assert below >= 0.95 * 200  # definition of the 95 % quantile of the totals


def test_the_day_lasts_setup_rounds_talk_and_debrief():
    # within-subject.toml: setup 20 (default) + 20 rounds x 2.5 + 10 talk pauses x 2 min + debrief 15
    # (default) = 105 minutes when every round is played; 3 rounds fewer in block 1: 97.5.
    assert day_minutes(WITHIN, np.array([[10, 10], [7, 10]])).tolist() == [105.0, 97.5]


def test_preview_prints_cash_and_duration_under_each_model():
    result = CliRunner().invoke(main, ["preview", str(ROOT / "examples" / "brackwater-demo.toml"),
                                       "--sessions", "30"])
    assert result.exit_code == 0, result.output
    for name in ("selfish", "sustainable", "conditional", "logit", "threshold-averse"):
        assert f"cash under {name}:" in result.output
    assert "every session under sustainable: 560 marks" in result.output
    assert "duration:" in result.output
