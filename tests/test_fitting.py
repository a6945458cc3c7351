"""Maximum-likelihood fitting of behaviour models to export folders."""

import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from studies import make_study

from ebbtide.analysis.exports_reader import read_export
from ebbtide.analysis.fitting import fit_model, log_likelihood
from ebbtide.exports.build import tables_from_outcomes
from ebbtide.exports.writer import write_export
from ebbtide.game_logic.behaviour import Danger, Observation, load_model, make_model
from ebbtide.game_logic.pilot import run_pilot
from ebbtide.game_logic.study import load_study
from ebbtide.server.cli import main

ROOT = Path(__file__).parent.parent
BETWEEN = load_study(ROOT / "examples" / "between-groups.toml")


def _export(tmp_path, study, model, groups, seed=5):
    run = run_pilot(study, groups=groups, seed=seed, strategy=model)
    tables = tables_from_outcomes(study, "fit-test", run.outcomes, lambda o: ["pilot"] * len(o.asked),
                                  groups=groups)
    return write_export(tmp_path / f"{model.name}-{groups}", study, "fit-test", seed, "pilot", tables)


@pytest.mark.parametrize(("name", "truth"), [
    ("conditional", {"start": 4.0, "weight": 0.6, "noise": 1.5}),
    ("logit", {"precision": 0.3}),
    ("threshold-averse", {"margin": 8.0, "caution": 0.4, "noise": 2.0}),
])
def test_fitting_recovers_known_parameters_at_two_sample_sizes(tmp_path, name, truth):
    # Stated tolerance: each estimate within 3.5 standard errors of the truth (a normal-theory
    # interval, common practice, no source), and the standard error shrinks roughly as
    # 1 / sqrt(decisions) (asymptotic theory of maximum likelihood): 10 times the groups,
    # between 2 and 5 times smaller.
    model = make_model(name, BETWEEN, truth)
    errors = {}
    for groups in (24, 240):
        fit = fit_model(name, read_export(_export(tmp_path, BETWEEN, model, groups)))
        assert fit.converged, fit.message
        assert set(fit.estimates) == set(truth)
        for key, value in truth.items():
            se = fit.standard_errors[key]
            assert se > 0 and abs(fit.estimates[key] - value) < 3.5 * se, (groups, key, fit.estimates, se)
        errors[groups] = fit.standard_errors
    for key in truth:
        assert 2 < errors[24][key] / errors[240][key] < 5, (key, errors)


def test_the_logit_log_likelihood_matches_a_hand_computation():
    # McKelvey & Palfrey (1995) logit choice over h = 0, 1, 2 with u(h) = h points, precision 1:
    # P(h) = e^h / (1 + e + e^2). Asks 2, 0 and 1:
    #   log L = (2 + 0 + 1) - 3 log(1 + e + e^2)
    #         = 3 - 3 log(1 + 2.718281828 + 7.389056099) = 3 - 3 log(11.107337927)
    #         = 3 - 3 * 2.407605964 = -4.222817892
    study = make_study(seats=3, max_harvest=2)
    model = make_model("logit", study, {"precision": 1.0})
    obs = Observation(np.array([1]), np.array([80]), np.full((1, 3), np.nan), np.full((1, 1), np.nan),
                      Danger.from_infos([{"kind": "none"}]))
    assert log_likelihood(model, obs, np.array([[2, 0, 1]])) == pytest.approx(-4.222817892, abs=1e-8)
    assert math.isclose(3 - 3 * math.log(1 + math.e + math.e**2), -4.222817892, abs_tol=1e-8)


def test_models_without_parameters_are_refused_in_one_line(tmp_path):
    with pytest.raises(ValueError, match="nothing to estimate; allowed: conditional, logit"):
        fit_model("selfish", [])


def test_fit_writes_a_parameter_file_that_pilot_and_power_accept(tmp_path):
    folder = _export(tmp_path, BETWEEN, make_model("logit", BETWEEN, {"precision": 0.2}), 12)
    out = tmp_path / "logit.toml"
    runner = CliRunner()
    result = runner.invoke(main, ["fit", str(folder), "--model", "logit", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "precision = " in result.output and "McFadden" in result.output
    model = load_model(str(out), BETWEEN)
    assert model.name == "logit" and abs(model.parameters["precision"] - 0.2) < 0.1
    result = runner.invoke(main, ["pilot", str(ROOT / "examples" / "between-groups.toml"), "--groups", "3",
                                  "--model", str(out), "--out", str(tmp_path / "p")])
    assert result.exit_code == 0, result.output
    result = runner.invoke(main, ["fit", str(tmp_path / "nothing-here"), "--model", "logit",
                                  "--out", str(out)])
    assert result.exit_code == 2 and "Traceback" not in result.output
