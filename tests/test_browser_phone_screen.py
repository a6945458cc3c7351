"""The phone's one screen at 360 x 640 and 360 x 740, in English and Spanish: the choice, its
confirmation and the last round's result are all in view without scrolling."""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, connect_phone

pytestmark = pytest.mark.browser

SIZES = [(360, 640), (360, 740)]


def _play_one_round(server, page, language: str, take: int):
    """Seat 1 of group 1 in the browser takes ``take`` (by the quick steps); seat 2 takes 5."""
    console = connect_console(server.url, server.pin)
    other = connect_phone(server.url, server.key(0, 1).secret, device="device-other")
    page.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={language}")
    page.locator("#seat-line").wait_for()
    console.act("console_start")
    page.locator("#chooser").wait_for(state="visible")
    return console, other


def _inside(box, width, height) -> bool:
    return box is not None and box["x"] >= 0 and box["y"] >= 0 and \
        box["x"] + box["width"] <= width and box["y"] + box["height"] <= height


@pytest.mark.parametrize("language", ["en", "es"])
@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_choice_confirm_and_result_fit_one_screen(start_server, demo_study, browser, size, language):
    width, height = size
    context = browser.new_context(viewport={"width": width, "height": height}, device_scale_factor=2,
                                  is_mobile=True, has_touch=True)
    server = start_server(demo_study)
    page = context.new_page()
    console, other = _play_one_round(server, page, language, 3)
    try:
        for _ in range(3):
            page.locator("#more").tap()
        page.locator("#confirm").tap()
        assert other.harvest("other-seat-1", 1, 1, 5)["ok"]
        page.locator("#result").wait_for(state="visible")
        page.wait_for_function("document.getElementById('chooser').hidden === false")
        page.evaluate("window.scrollTo(0, 0)")  # as a participant sees it when the round opens
        print(page.evaluate('''Array.from(document.querySelectorAll("header, #game > *")).map(
            e => e.id + e.className + ":" + Math.round(e.getBoundingClientRect().top) + "+" +
            Math.round(e.getBoundingClientRect().height)).join(" ")'''))
        boxes = {name: page.locator(sel).bounding_box()
                 for name, sel in [("stepper", ".stepper"), ("confirm", "#confirm"), ("result", "#result")]}
        print(size, language, boxes)
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-round-{language}-{width}x{height}.png"))
        for name, box in boxes.items():
            assert _inside(box, width, height), f"{name} at {box} is not inside {width}x{height}"
    finally:
        page.close()
        context.close()
        other.close()
        console.close()
