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


@pytest.mark.parametrize("language", ["en", "es", "fr"])
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
        # "Recorded" comes from the acknowledgement, then from the seat's own snapshot.
        page.wait_for_function("document.getElementById('chooser').hidden === true && "
                               "/3/.test(document.getElementById('status').textContent)")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-recorded-{language}-{width}x{height}.png"))
        assert _inside(page.locator("#status").bounding_box(), width, height)
        assert other.harvest("other-seat-1", 1, 1, 5)["ok"]
        page.locator("#result").wait_for(state="visible")
        page.wait_for_function("document.getElementById('chooser').hidden === false")
        page.evaluate("window.scrollTo(0, 0)")  # as a participant sees it when the round opens
        boxes = {name: page.locator(sel).bounding_box()
                 for name, sel in [("stepper", ".stepper"), ("confirm", "#confirm"), ("result", "#result")]}
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-round-{language}-{width}x{height}.png"))
        for name, box in boxes.items():
            assert _inside(box, width, height), f"{name} at {box} is not inside {width}x{height}"
        assert page.evaluate("document.documentElement.scrollWidth") <= width  # nothing sticks out sideways
    finally:
        page.close()
        context.close()
        other.close()
        console.close()


def _phone(browser, width=360, height=640):
    return browser.new_context(viewport={"width": width, "height": height}, device_scale_factor=2,
                               is_mobile=True, has_touch=True)


WORDS = {  # what a participant must read, per language (the catalogues' texts, filled by hand)
    "en": {"none": "Choose how many first", "zero": "Confirm: take 0", "result": "Result of round 1",
           "got": "3 baskets = 1.5 points", "recorded": "Your choice is recorded: 3 baskets.",
           "cash": "Cash so far: 25 marks"},
    "es": {"none": "Primero elija cuántos", "zero": "Confirmar: tomar 0", "result": "Resultado de la ronda 1",
           "got": "3 cestas = 1,5 puntos", "recorded": "Su elección está registrada: 3 cestas.",
           "cash": "Dinero hasta ahora: 25 marks"},
}


@pytest.mark.parametrize("language", ["en", "es"])
@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_no_choice_until_chosen_quick_steps_and_the_result_in_words_with_units(start_server, browser,
                                                                              size, language):
    # Half a point per basket, so the points need a decimal separator: 1.5 in English, 1,5 in Spanish
    # (CLDR's decimal symbols as Babel ships them, checked below against babel.numbers).
    from babel.numbers import format_decimal
    from conftest import study_with

    study = study_with(**{"points_per_unit = 1": "points_per_unit = 0.5"})
    assert format_decimal(1.5, locale=language) in WORDS[language]["got"]
    words = WORDS[language]
    server = start_server(study)
    context = _phone(browser, *size)
    page = context.new_page()
    console, other = _play_one_round(server, page, language, 0)
    try:
        # Nothing chosen: no number, Confirm disabled; 0 is one deliberate step down.
        assert page.locator("#choice").inner_text() == "\u2013"
        assert page.locator("#confirm").is_disabled()
        assert page.locator("#confirm").inner_text() == words["none"]
        page.locator("#less").tap()
        assert page.locator("#choice").inner_text() == "0"
        assert page.locator("#confirm").is_enabled()
        assert page.locator("#confirm").inner_text() == words["zero"]
        # The most one may take (15) in three taps, not fifteen; then no step goes past it.
        for _ in range(3):
            page.locator("#more5").tap()
        assert page.locator("#choice").inner_text() == "15"
        assert page.locator("#more5").is_disabled() and page.locator("#more").is_disabled()
        page.locator("#less5").tap()
        page.locator("#less5").tap()
        page.locator("#less5").tap()
        page.locator("#more").tap()
        page.locator("#more").tap()
        page.locator("#more").tap()
        assert page.locator("#choice").inner_text() == "3"
        page.locator("#confirm").tap()
        page.get_by_text(words["recorded"], exact=False).wait_for()
        assert other.harvest("other-seat-1", 1, 1, 5)["ok"]
        page.locator("#result").wait_for(state="visible")
        assert page.locator("#result-title").inner_text() == words["result"]
        assert words["got"] in page.locator("#result-list").inner_text()
        # Cash by the study's rule, worked by hand: 20 show-up + 1.5 points x 2 = 23, rounded up to 25.
        assert page.locator("#cash").inner_text() == words["cash"]
        page.evaluate("window.scrollTo(0, 0)")
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-result-{language}-{size[0]}x{size[1]}.png"))
    finally:
        page.close()
        context.close()
        other.close()
        console.close()


def test_the_pictures_switch_names_the_mode_it_switches_to(start_server, demo_study, browser):
    server = start_server(demo_study)
    context = _phone(browser)
    page = context.new_page()
    try:
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}")
        toggle = page.locator("#picture-toggle")
        toggle.wait_for()
        assert toggle.inner_text() == "Show pictures" and toggle.get_attribute("aria-pressed") is None
        toggle.tap()
        assert page.evaluate("document.body.classList.contains('pictorial')")
        assert toggle.inner_text() == "Show words" and toggle.get_attribute("aria-pressed") is None
    finally:
        page.close()
        context.close()


def test_a_wrong_short_code_stays_in_the_box_to_correct(start_server, demo_study, browser):
    server = start_server(demo_study)
    context = _phone(browser)
    page = context.new_page()
    try:
        page.goto(f"{server.url}/play")
        wrong = "ZZZZZZ" if server.key(0, 0).short_code != "ZZZZZZ" else "YYYYYY"
        page.locator("#code").fill(wrong)
        page.get_by_role("button", name="Join").tap()
        page.get_by_role("alert").wait_for()
        assert page.locator("#code").input_value() == wrong
    finally:
        page.close()
        context.close()


def test_a_new_part_is_marked_on_the_phone(start_server, demo_study, browser):
    server = start_server(demo_study)
    context = _phone(browser)
    page = context.new_page()
    console, other = _play_one_round(server, page, "es", 0)
    try:
        assert page.locator("#block-news").is_hidden()  # the first part needs no mark
        for _ in range(5):  # the demo's first part has five rounds
            assert console.act("console_close_round", {"group": None})["ok"]
        assert console.act("console_open_block", {"group": None})["ok"]
        news = page.locator("#block-news")
        news.wait_for(state="visible")
        assert news.inner_text().startswith("Empieza la parte 2")
        assert "80 cestas" in news.inner_text()  # the study's initial_stock, in the seat's unit
        page.evaluate("window.scrollTo(0, 0)")
        page.screenshot(path=str(ARTIFACTS / "phone-new-part-es-360x640.png"))
    finally:
        page.close()
        context.close()
        other.close()
        console.close()


def test_a_part_that_ran_out_says_why(start_server, browser):
    from conftest import study_with

    # 20 in stock and both seats ask 15: rationed to 10 each, nothing left to grow back from.
    study = study_with(**{"initial_stock = 80": "initial_stock = 20"})
    server = start_server(study)
    context = _phone(browser)
    page = context.new_page()
    console, other = _play_one_round(server, page, "en", 0)
    try:
        for _ in range(3):
            page.locator("#more5").tap()
        page.locator("#confirm").tap()
        assert other.harvest("other-seat-1", 1, 1, 15)["ok"]
        news = page.locator("#block-news")
        news.wait_for(state="visible")
        assert news.inner_text() == "This part ended early: the stock ran out."
    finally:
        page.close()
        context.close()
        other.close()
        console.close()
