"""The stock gauge: what each treatment's picture shows, and what it must not."""

import re
import xml.etree.ElementTree as ET

import pytest

from ebbtide.game_logic.rounds import start_block
from ebbtide.game_logic.study import parse_study
from ebbtide.game_logic.treatments import participant_view
from ebbtide.server.pictures.gauge import DEFAULT_LABELS, stock_gauge_svg

DANGERS = {
    "none": {"kind": "none"},
    "vague": {"kind": "vague"},
    "range": {"kind": "range", "low": 25, "high": 45},
    "exact": {"kind": "exact", "level": 36.7},
    "risk": {"kind": "risk", "level": 36.7, "flip_probability": 0.35},
    "signal": {"kind": "signal", "band": "watch", "trend": "falling"},
}


def view(kind, stock=62, capacity=100):
    return {"stock": stock, "capacity": capacity, "unit": "baskets", "danger": DANGERS[kind]}


def words(svg):
    """Every piece of text a person (or a screen reader) gets from the picture."""
    root = ET.fromstring(svg)
    texts = ["".join(el.itertext()) for el in root.iter() if el.tag in ("text", "title")]
    return " ".join(texts + [root.get("aria-label")])


def numbers(svg):
    return set(re.findall(r"\d+(?:\.\d+)?", words(svg)))


@pytest.mark.parametrize("kind", sorted(DANGERS))
def test_gauge_parses_as_xml_and_scales_to_width(kind):
    root = ET.fromstring(stock_gauge_svg(view(kind)))
    assert root.tag == "svg"
    assert root.get("width") == "100%"
    assert root.get("viewBox") == "0 0 360 266"


@pytest.mark.parametrize("kind", sorted(DANGERS))
def test_gauge_shows_stock_and_capacity(kind):
    assert {"62", "100"} <= numbers(stock_gauge_svg(view(kind)))


@pytest.mark.parametrize("kind", ["none", "vague", "signal"])
def test_gauge_without_a_level_shows_no_number_beyond_stock_and_scale(kind):
    # Only the stock, the capacity and the scale's zero.
    assert numbers(stock_gauge_svg(view(kind))) == {"62", "100", "0"}


def test_range_gauge_shows_interval_ends_and_no_level():
    svg = stock_gauge_svg(view("range"))
    assert numbers(svg) == {"62", "100", "0", "25", "45"}
    assert "hatch" in svg  # the interval is patterned, not only tinted


def test_exact_gauge_shows_the_level_with_its_number():
    svg = stock_gauge_svg(view("exact"))
    assert "Danger level 36.7" in words(svg)
    assert "%" not in words(svg)


def test_risk_gauge_shows_the_level_and_the_chance():
    text = words(stock_gauge_svg(view("risk")))
    assert "Danger level 36.7" in text
    assert "35% chance" in text


def test_signal_gauge_names_band_and_trend_in_words():
    text = words(stock_gauge_svg(view("signal")))
    assert "Watch" in text and "falling" in text
    assert "Danger level" not in text


def test_vague_band_is_the_same_for_every_group():
    # The band depends on nothing but the picture's own scale: two groups with
    # different stocks get the same band markup.
    band = re.compile(r'<g mask="url\(#gauge-fade-mask\)">.*?</g>')
    a = band.search(stock_gauge_svg(view("vague", stock=20))).group()
    b = band.search(stock_gauge_svg(view("vague", stock=90))).group()
    assert a == b


def test_none_gauge_draws_no_danger_mark():
    svg = stock_gauge_svg(view("none"))
    assert "url(#gauge-hatch)" not in svg
    assert "Danger" not in words(svg)


def test_gauge_escapes_translated_words():
    svg = stock_gauge_svg(view("vague"), labels={"danger_vague": "Peligro <abajo> & \"cerca\""})
    assert "Peligro <abajo> & \"cerca\"" in words(svg)
    assert "<abajo>" not in svg


def test_gauge_escapes_the_unit():
    svg = stock_gauge_svg({**view("none"), "unit": "<script>"})
    assert "<script>" not in svg
    assert "&lt;script&gt;" in svg


def test_gauge_loads_nothing_from_outside():
    for kind in DANGERS:
        svg = stock_gauge_svg(view(kind))
        assert "http" not in svg and "href" not in svg


def test_gauge_draws_the_view_the_information_gate_builds():
    study = parse_study(
        '[session]\nid = "fennick-test"\ntitle = "Fennick (test)"\n'
        "[groups]\ncount = 1\nseats_per_group = 2\n"
        '[[blocks]]\nname = "told-range"\ntreatment = "range"\n'
    )
    state = start_block(study, 7, 0, 0)
    live = participant_view(study, state, 0, None, 0.0)
    assert numbers(stock_gauge_svg(live)) == {"80", "100", "0", "25", "45"}


def test_gauge_rejects_unknown_danger_kind():
    with pytest.raises(ValueError, match=r"allowed: \['none', 'vague', 'range', 'exact', 'risk', 'signal'\]"):
        stock_gauge_svg({"stock": 5, "capacity": 10, "danger": {"kind": "secret"}})


def test_gauge_rejects_stock_above_capacity():
    with pytest.raises(ValueError, match="allowed: a number from 0 to 100"):
        stock_gauge_svg({**view("none"), "stock": 101})


def test_gauge_rejects_unknown_label_key():
    with pytest.raises(ValueError, match="unknown label keys"):
        stock_gauge_svg(view("none"), labels={"treshold": "x"})


def test_gauge_rejects_label_with_foreign_field():
    with pytest.raises(ValueError, match="may use only the fields"):
        stock_gauge_svg(view("exact"), labels={"danger_level": "Danger {threshold}"})


def test_default_labels_cover_every_band_and_trend():
    assert {"calm", "watch", "alarm", "falling", "steady", "rising"} <= set(DEFAULT_LABELS)


def test_gauge_module_imports_only_the_standard_library():
    # Pure by construction: no Flask, no database, no game state (house rule).
    import ast
    import sys
    from pathlib import Path

    import ebbtide.server.pictures.gauge as gauge_module

    tree = ast.parse(Path(gauge_module.__file__).read_text(encoding="utf-8"))
    imported = {alias.name.split(".")[0] for node in ast.walk(tree) if isinstance(node, ast.Import)
                for alias in node.names}
    imported |= {node.module.split(".")[0] for node in ast.walk(tree)
                 if isinstance(node, ast.ImportFrom) and node.module}
    assert imported <= set(sys.stdlib_module_names) | {"__future__"}


def test_narrow_range_at_the_edge_gets_one_joined_label():
    svg = stock_gauge_svg({**view("range"), "danger": {"kind": "range", "low": 2, "high": 9}})
    assert "2 \u2013 9" in words(svg)
    assert numbers(svg) == {"62", "100", "0", "2", "9"}


def test_long_translated_caption_wraps_without_losing_words():
    long = "Si on passe en dessous : {chance} de risque d'effondrement durable du stock"
    text = words(stock_gauge_svg(view("risk"), labels={"chance": long}))
    assert "effondrement durable du stock" in text
