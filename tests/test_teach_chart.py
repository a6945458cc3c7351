"""The debrief picture: threshold, recovery level, degraded rounds, crossing and what-ifs."""

from __future__ import annotations

import re

import pytest

from ebbtide.server.pictures.chart import PHONE, stock_path_svg

BLOCK = {
    "block": 0, "stock_path": [50, 37, 30, 34], "threshold": 37.913, "recovery_level": 52.913,
    "crossed_round": 1,
    "what_ifs": [{"less_by": 1, "stock_path": [50, 45, 52, 60]},
                 {"less_by": 2, "stock_path": [50, 48, 57, 66]}],
}


def _words(svg: str) -> str:
    """The picture's text as read aloud: a name set on two lines reads as one."""
    return " ".join(re.sub(r"<[^>]+>", " ", svg).split())


def test_chart_names_the_threshold_and_recovery_level_with_their_numbers():
    svg = _words(stock_path_svg(BLOCK, 100))
    assert "Danger level 37.9" in svg and "Recovery 52.9" in svg


def test_chart_hatches_each_degraded_round_and_marks_the_crossing():
    svg = stock_path_svg(BLOCK, 100, degraded_rounds=[1, 2, 3])
    assert svg.count('fill="url(#path-hatch)"') == 3
    assert "Crossed in round 1" in svg and "Degraded" in svg


def test_chart_draws_one_line_per_what_if_with_its_name():
    svg = stock_path_svg(BLOCK, 100)
    assert svg.count("<polyline") == 3  # the real path and two what-ifs
    assert "1 less each" in svg and "2 less each" in svg


def test_chart_without_a_crossing_has_no_crossing_mark():
    calm = {**BLOCK, "stock_path": [50, 55, 60], "crossed_round": None, "what_ifs": []}
    svg = stock_path_svg(calm, 100)
    assert "Crossed" not in svg and "Degraded" not in svg


def test_phone_chart_keeps_names_inside_its_narrow_picture():
    svg = stock_path_svg({**BLOCK, "what_ifs": []}, 100, layout=PHONE)
    assert 'viewBox="0 0 400 300"' in svg
    xs = [float(x) for x in re.findall(r'<text x="([\d.]+)"[^>]*text-anchor="end"', svg)]
    assert xs and max(xs) <= 400


def test_chart_words_come_translated_and_unknown_keys_are_refused():
    svg = _words(stock_path_svg(BLOCK, 100, labels={"danger_level": "Nivel de peligro {level}"}))
    assert "Nivel de peligro 37.9" in svg
    with pytest.raises(ValueError, match="unknown label keys"):
        stock_path_svg(BLOCK, 100, labels={"treshold": "x"})


def test_chart_refuses_a_path_too_short_to_draw():
    with pytest.raises(ValueError, match="at least two stocks"):
        stock_path_svg({**BLOCK, "stock_path": [50]}, 100)
