"""Study files: the shipped examples validate; errors say key, value and what is allowed."""

from pathlib import Path

import pytest

from ebbtide.game_logic.design_review import design_summary, design_warnings, expected_minutes
from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.study import load_study, parse_study

EXAMPLES = sorted((Path(__file__).parent.parent / "examples").glob("*.toml"))
DEMO = Path(__file__).parent.parent / "examples" / "brackwater-demo.toml"


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_shipped_examples_are_valid_and_warning_free(path):
    study = load_study(path)
    assert study.total_rounds > 0
    assert design_warnings(study) == []


def _demo_with(old: str, new: str) -> str:
    text = DEMO.read_text(encoding="utf-8")
    assert old in text
    return text.replace(old, new, 1)


def _problems(text: str) -> list[str]:
    with pytest.raises(StudyError) as info:
        parse_study(text)
    return info.value.problems


def test_wrong_type_names_key_value_and_allowed():
    (problem,) = _problems(_demo_with("max_harvest = 15", 'max_harvest = "lots"'))
    assert problem.startswith("resource.max_harvest: holds 'lots'")
    assert "integer" in problem


def test_out_of_range_names_the_bound():
    (problem,) = _problems(_demo_with("r = 0.5", "r = 7"))
    assert "resource.growth.r: holds 7" in problem and "less than or equal to 4" in problem


def test_unknown_treatment_lists_the_allowed_ones():
    (problem,) = _problems(_demo_with('treatment = "range"', 'treatment = "hint"'))
    assert "blocks.1.treatment: holds 'hint'" in problem
    for key in ("none", "vague", "range", "exact", "risk", "signal"):
        assert key in problem


def test_misspelt_key_is_reported_as_unknown():
    (problem,) = _problems(_demo_with("max_harvest = 15", "max_harvst = 15"))
    assert problem == "resource.max_harvst: unknown key (holds 15); check the spelling"


def test_every_problem_is_reported_at_once():
    text = _demo_with("r = 0.5", "r = -1").replace("seats_per_group = 2", "seats_per_group = 0")
    problems = _problems(text)
    assert len(problems) == 2


def test_range_block_without_interval_is_refused():
    text = (
        _demo_with('rule = "uniform"\nlow = 25\nhigh = 45', 'rule = "fixed"\nvalue = 30')
    )
    (problem,) = _problems(text)
    assert "threshold.shown_range" in problem


def test_danger_treatments_need_a_threshold():
    text = _demo_with('rule = "uniform"\nlow = 25\nhigh = 45', 'rule = "none"')
    (problem,) = _problems(text)
    assert "threshold.rule is 'none'" in problem


def test_broken_toml_is_reported_not_raised():
    (problem,) = _problems("[session\nid = 1")
    assert problem.startswith("not valid TOML")


def test_missing_file_is_a_study_error(tmp_path):
    with pytest.raises(StudyError, match="cannot read"):
        load_study(tmp_path / "nope.toml")


def test_growth_rate_above_two_warns_of_oscillation():
    # May (1976), Nature 261:459: the discrete logistic map oscillates for r > 2.
    study = parse_study(_demo_with("r = 0.5", "r = 2.3"))
    assert any("oscillates" in w and "May 1976" in w for w in design_warnings(study))


def test_summary_reports_sustainable_yield_and_drain():
    study = load_study(DEMO)
    text = "\n".join(design_summary(study))
    assert "sustainable yield: 12.50 baskets a round at a stock of 50.0" in text
    assert "group harvest of 80 empties the initial stock" in text
    # 10 setup + 10 rounds * 1.5 + 10 debrief = 35 minutes.
    assert expected_minutes(study) == 35


def test_between_groups_treatments_rotate_over_groups():
    study = load_study(Path(__file__).parent.parent / "examples" / "between-groups.toml")
    block = study.blocks[0]
    assert [block.treatment_for(g) for g in range(6)] == ["none", "exact", "signal"] * 2


# -- participant-facing labels ------------------------------------------------
# Keeping the design from participants (they must not read which arm they are in) is
# common practice in experiments, no source; the checks below are the study file's rules.


def test_shipped_examples_label_the_session_and_every_block_in_every_offered_language():
    for path in EXAMPLES:
        study = load_study(path)
        for language in study.session.languages:
            assert study.session_label(language) not in (None, study.session.title), (path.name, language)
            for b, block in enumerate(study.blocks):
                assert study.block_label(b, language) not in (None, block.name), (path.name, language)


def test_a_label_in_a_language_the_session_does_not_offer_is_refused():
    text = _demo_with('name = "told-range"\nlabel = {', 'name = "told-range"\nlabel = { de = "Zweite",')
    (problem,) = _problems(text)
    assert problem.startswith("blocks.1.label has text in ['de']") and "session.languages" in problem


def test_a_label_keyed_by_something_else_than_a_language_code_is_refused():
    problems = _problems(_demo_with("[session.label]\n", "[session.label]\nsubtitle = \"x\"\n"))
    assert problems == ["session.label: 'subtitle' is not a language code; allowed: codes such as en, es, fr"]


def test_labels_that_name_a_treatment_or_a_researcher_block_name_are_warned_about():
    study = parse_study(_demo_with('fr = "Secondes marées"', 'fr = "Marées: exact"').replace(
        'es = "Primeras mareas"', 'es = "first-season"'))
    warnings = [w for w in design_warnings(study) if "label" in w]
    told = "blocks.1.label.fr = 'Marées: exact' names the treatment exact"
    assert any(w.startswith(told) for w in warnings)
    assert any("blocks.0.label.es" in w and "block name 'first-season'" in w for w in warnings)
    assert len(warnings) == 2


def test_a_label_missing_an_offered_language_is_warned_about_and_falls_back_to_the_session_language():
    study = parse_study(_demo_with(', fr = "Premières marées"', ""))
    assert design_warnings(study) == [
        "blocks.0.label has no text in ['fr']: phones in that language show the 'en' text"]
    assert study.block_label(0, "fr") == "First tides"


def test_without_a_session_label_there_is_no_participant_title():
    table = '[session.label]\nen = "The cockle beds of Brackwater"\nes = "Los berberechos de Brackwater"\n'
    study = parse_study(_demo_with(table + 'fr = "Les coques de Brackwater"\n', ""))
    assert study.session_label("en") is None and study.block_label(0, "en") == "First tides"
