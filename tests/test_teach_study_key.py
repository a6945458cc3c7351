"""The teaching view's study key: off by default, strictly a boolean, warned about when on."""

from __future__ import annotations

import pytest
from studies import TEXT

from ebbtide.game_logic.design_review import design_warnings
from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.study import parse_study


def _study(value: str):
    return parse_study(TEXT.format(teaching_view=value, talk_seconds=30))


def test_teaching_view_is_off_unless_the_study_asks():
    text = TEXT.format(teaching_view="false", talk_seconds=30).replace("teaching_view = false\n", "")
    assert parse_study(text).session.teaching_view is False


def test_teaching_view_that_is_not_a_boolean_is_refused_with_what_is_allowed():
    with pytest.raises(StudyError, match=r"session.teaching_view: holds 'yes'; allowed: .*boolean"):
        _study('"yes"')


def test_teaching_view_on_is_warned_about_as_changing_the_treatment():
    assert any("changes the treatment" in w for w in design_warnings(_study("true")))
    assert not any("teaching_view" in w for w in design_warnings(_study("false")))
