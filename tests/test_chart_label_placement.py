"""Debrief chart labels stay in the picture and off the lines, in every catalogue language,
at phone and print size.

Widths are measured with FreeType (Pillow's ``ImageFont.getbbox``) on the DejaVu Sans
fonts the chart names first, so the check does not rely on the chart's own estimate.
"""

from __future__ import annotations

import re
from pathlib import Path
from xml.etree import ElementTree

import pytest
from flask_babel import force_locale

from ebbtide.server import create_app
from ebbtide.server.pictures.chart import PHONE, WIDE, stock_path_svg
from ebbtide.server.pictures.numbers import numbers_in
from ebbtide.server.teach.revealed import chart_labels

ImageFont = pytest.importorskip("PIL.ImageFont")
FONTS = Path("/usr/share/fonts/truetype/dejavu")
if not (FONTS / "DejaVuSans.ttf").exists():
    pytest.skip("DejaVu fonts are not installed (Debian: fonts-dejavu-core)", allow_module_level=True)

LANGUAGES = ["en", "es", "fr"]
BLOCKS = {  # invented paths that put the labels where lines are: high, low, crossing, with what-ifs
    "crossed-early": {"block": 0, "stock_path": [80, 62, 41, 30, 28, 27], "threshold": 40.4,
                      "recovery_level": 55.4, "crossed_round": 2,
                      "what_ifs": [{"less_by": 1, "stock_path": [80, 66, 50, 44, 41, 40]},
                                   {"less_by": 2, "stock_path": [80, 70, 58, 53, 51, 52]}]},
    "crossed-late": {"block": 1, "stock_path": [80, 78, 74, 70, 60, 44, 37, 33], "threshold": 37.9,
                     "recovery_level": 52.9, "crossed_round": 6, "what_ifs": []},
    "never": {"block": 2, "stock_path": [80, 85, 88, 90, 91, 92], "threshold": 29.6,
              "recovery_level": 44.6, "crossed_round": None, "what_ifs": []},
}


def _font(size: float, weight: str):
    name = "DejaVuSans-Bold.ttf" if weight == "bold" else "DejaVuSans.ttf"
    return ImageFont.truetype(str(FONTS / name), size=float(size))


def _text_boxes(svg: str):
    root = ElementTree.fromstring(svg)
    for el in root.iter("text"):
        size, weight = float(el.get("font-size")), el.get("font-weight", "normal")
        left, top, right, bottom = _font(size, weight).getbbox(el.text or "", anchor="ls")
        x, y = float(el.get("x")), float(el.get("y"))
        anchor = el.get("text-anchor", "start")
        shift = {"start": 0, "middle": -(right - left) / 2 - left, "end": -right}[anchor]
        yield el.text, (x + left + shift if shift else x + left, y + top, x + right + shift, y + bottom)


def _lines(svg: str):
    root = ElementTree.fromstring(svg)
    for el in root.iter("line"):
        yield [(float(el.get("x1")), float(el.get("y1"))), (float(el.get("x2")), float(el.get("y2")))]
    for el in root.iter("polyline"):
        yield [tuple(map(float, p.split(","))) for p in el.get("points").split()]
    for el in root.iter("path"):  # the crossing mark: "M x,y h18 l-9,14 z"
        m = re.match(r"M([\d.]+),([\d.]+) h([\d.]+) l(-?[\d.]+),([\d.]+) z", el.get("d"))
        x, y, h, dx, dy = map(float, m.groups())
        yield [(x, y), (x + h, y), (x + h + dx, y + dy), (x, y)]


def _crosses(box, line) -> bool:
    x0, y0, x1, y1 = box
    for (ax, ay), (bx, by) in zip(line, line[1:], strict=False):
        for i in range(201):  # sampled every half percent of the segment: enough at these sizes
            px, py = ax + (bx - ax) * i / 200, ay + (by - ay) * i / 200
            if x0 <= px <= x1 and y0 <= py <= y1:
                return True
    return False


@pytest.fixture(scope="module")
def labels_by_language():
    app = create_app({"EBBTIDE_DB": ":memory:", "TESTING": True})
    out = {}
    with app.test_request_context():
        for language in LANGUAGES:
            with force_locale(language):
                out[language] = chart_labels()
    assert out["es"]["danger_level"] != out["en"]["danger_level"]  # the catalogues really answered
    return out


@pytest.mark.parametrize("layout", [PHONE, WIDE], ids=["phone", "print"])
@pytest.mark.parametrize("language", LANGUAGES)
@pytest.mark.parametrize("case", sorted(BLOCKS))
def test_every_label_is_inside_the_picture_and_off_the_lines(labels_by_language, language, layout, case):
    block = dict(BLOCKS[case])
    if layout is PHONE:
        block["what_ifs"] = []  # as the phone draws it (server/phone/view.py): the sentence tells them
    with numbers_in(language):
        crossed = block["crossed_round"]  # degraded from the crossing on, as a flip at once would be
        degraded = tuple(range(crossed, len(block["stock_path"]))) if crossed else ()
        svg = stock_path_svg(block, 100, degraded,
                             labels=labels_by_language[language], layout=layout)
    width, height = map(float, re.search(r'viewBox="0 0 (\S+) (\S+)"', svg).groups())
    lines = list(_lines(svg))
    boxes = list(_text_boxes(svg))
    for i, (text, box) in enumerate(boxes):
        for other, seen in boxes[:i]:
            apart = box[2] <= seen[0] or seen[2] <= box[0] or box[3] <= seen[1] or seen[3] <= box[1]
            assert apart, f"{text!r} at {box} covers {other!r} at {seen}"
        assert box[0] >= 0 and box[2] <= width and box[1] >= 0 and box[3] <= height, \
            f"{text!r} at {box} leaves the {width:g}x{height:g} picture"
        crossed = [line for line in lines if _crosses(box, line)]
        assert not crossed, f"{text!r} at {box} covers a line"
