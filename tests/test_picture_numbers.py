"""Numbers in the gauge and the debrief chart follow the reader's language."""

from __future__ import annotations

import re

from babel.numbers import get_decimal_symbol

from ebbtide.server.pictures.chart import PHONE, stock_path_svg
from ebbtide.server.pictures.gauge import stock_gauge_svg
from ebbtide.server.pictures.numbers import numbers_in

VIEW = {"stock": 62, "capacity": 100, "unit": "cestas", "danger": {"kind": "exact", "level": 40.4}}


def test_a_spanish_gauge_writes_a_decimal_comma_and_an_english_one_a_point():
    # CLDR's decimal symbol per language, as Babel ships it: "," for es and fr, "." for en.
    for language in ("en", "es", "fr"):
        sign = get_decimal_symbol(language)
        with numbers_in(language):
            svg = stock_gauge_svg(VIEW)
        assert f"40{sign}4" in svg
        other = "," if sign == "." else "."
        assert f"40{other}4" not in re.sub(r'"[^"]*"', "", svg)  # attributes keep SVG's own decimal points


def test_the_chart_labels_follow_the_language_too():
    block = {"block": 0, "stock_path": [80, 60, 30], "threshold": 40.4, "recovery_level": 55.4,
             "crossed_round": 2}
    with numbers_in("es"):
        svg = stock_path_svg(block, 100, (2,), layout=PHONE)
    assert "40,4" in svg and "40.4" not in re.sub(r'"[^"]*"', "", svg)
