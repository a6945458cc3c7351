"""Power by simulation, checked against closed-form power and against the report's own tests."""

from pathlib import Path

import numpy as np
import pytest
from statsmodels.stats.power import TTestIndPower

from ebbtide.analysis.comparisons import compare_paired, compare_two
from ebbtide.analysis.planned_tests import group_test_pvalues
from ebbtide.analysis.power import parse_group_counts, planned_hypotheses, power_curve, study_power
from ebbtide.game_logic.behaviour import make_model
from ebbtide.game_logic.study import load_study

ROOT = Path(__file__).parent.parent
BETWEEN = load_study(ROOT / "examples" / "between-groups.toml")
WITHIN = load_study(ROOT / "examples" / "within-subject.toml")
EFFECT = 0.8


def _normal_outcomes(groups: int, sims: range) -> np.ndarray:
    # Two arms of groups // 2 groups; the outcome is normal by construction, sd 1, means EFFECT and 0.
    rng = np.random.default_rng([11, groups, sims.start])
    half = groups // 2
    x = rng.normal(EFFECT, 1.0, (len(sims), half))
    y = rng.normal(0.0, 1.0, (len(sims), half))
    return group_test_pvalues(x, y, "t-test")[:, None]


def test_simulated_power_agrees_with_the_closed_form_t_test_power():
    # Reference: statsmodels.stats.power.TTestIndPower (noncentral t, two-sided, equal arms),
    # the textbook power of Student's two-sample t test (Cohen 1988, ch. 2).
    counts = [8, 16, 32, 56]
    curve = power_curve(_normal_outcomes, counts, sims=4000, levels=[0.05], labels=["normal"],
                        chunk_groups=8000, progress=False)
    for i, n in enumerate(counts):
        expected = TTestIndPower().power(effect_size=EFFECT, nobs1=n // 2, alpha=0.05, ratio=1.0)
        se = np.sqrt(expected * (1 - expected) / 4000)
        assert abs(curve.power[i, 0] - expected) < 3 * se, (n, curve.power[i, 0], expected)
    assert curve.groups_for(0.8) == [56]  # closed form: 0.59 at 32 groups, 0.84 at 56


def test_the_vectorised_tests_give_the_reports_p_values():
    # The report's functions (analysis.comparisons) are the reference, one sample at a time.
    rng = np.random.default_rng(4)
    x, y = rng.normal(0.5, 1, (5, 7)), rng.normal(0, 1, (5, 9))
    got = group_test_pvalues(x, y, "mann-whitney")
    want = [compare_two(a, b, np.random.default_rng(0), resamples=99).p_mann_whitney
            for a, b in zip(x, y, strict=True)]
    np.testing.assert_allclose(got, want)
    paired = rng.normal(0.3, 1, (5, 9))
    got = group_test_pvalues(paired, y, "wilcoxon")
    want = [compare_paired(a, b).p_value for a, b in zip(paired, y, strict=True)]
    np.testing.assert_allclose(got, want)
    # Whole-unit outcomes tie often; scipy then changes method, sample by sample in the report.
    x, y = rng.integers(0, 4, (6, 9)).astype(float), rng.integers(1, 5, (6, 9)).astype(float)
    x[0] = np.arange(9) + 0.5  # one row without ties among the tied ones
    want = [compare_two(a, b, np.random.default_rng(0), resamples=99).p_mann_whitney
            for a, b in zip(x, y, strict=True)]
    np.testing.assert_allclose(group_test_pvalues(x, y, "mann-whitney"), want)
    want = [compare_paired(a, b).p_value for a, b in zip(x, y, strict=True)]
    np.testing.assert_allclose(group_test_pvalues(x, y, "wilcoxon"), want)


def test_a_model_blind_to_the_treatment_rejects_at_most_at_the_level():
    # A level-0.05 test rejects a true null in at most 5 % of studies (definition of the level);
    # the conditional cooperator ignores what the treatment says, so the null holds.
    curve, hypotheses = study_power(BETWEEN, make_model("conditional", BETWEEN), [12, 24], sims=300,
                                    seed=2, progress=False)
    assert [h.test for h in hypotheses] == ["mann-whitney"] * 3
    upper = 0.05 + 3 * np.sqrt(0.05 * 0.95 / 300)
    assert np.all(curve.power <= upper), curve.power


def test_a_threshold_averse_model_gives_the_exact_treatment_power():
    # Told the level, threshold-averse seats restrain themselves; told nothing, they take the cap.
    model = make_model("threshold-averse", BETWEEN)
    curve, hypotheses = study_power(BETWEEN, model, [6, 12], sims=100, seed=3, progress=False)
    none_exact = [h.label for h in hypotheses].index("block 1: none vs exact "
                                                     "(group_harvest_per_round, mann-whitney)")
    assert curve.power[1, none_exact] > 0.9
    assert curve.power[0, none_exact] < curve.power[1, none_exact]


def test_within_subject_designs_plan_a_paired_block_comparison():
    hypotheses = planned_hypotheses(WITHIN)
    assert [(h.kind, h.x, h.y, h.test) for h in hypotheses] == [("within", "2", "1", "wilcoxon")]


@pytest.mark.parametrize(("text", "counts"), [
    ("4:40:4", [4, 8, 12, 16, 20, 24, 28, 32, 36, 40]),
    ("6,12,18", [6, 12, 18]),
    ("4:12", [4, 5, 6, 7, 8, 9, 10, 11, 12]),
])
def test_group_counts_are_read_as_ranges_or_lists(text, counts):
    assert parse_group_counts(text) == counts


@pytest.mark.parametrize("text", ["4:", "x", "12,6", "1:5", "4:40:0"])
def test_bad_group_counts_say_what_is_allowed(text):
    with pytest.raises(ValueError, match="allowed: START:STOP"):
        parse_group_counts(text)
