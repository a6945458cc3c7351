"""A second phone scanning a seat card already in use: told plainly, asked, then it takes over.

From a trial run: both phones acted for the seat and one saw the other's choice appear.
Phone sizes 360 x 640 and 360 x 740, in English, Spanish and French (screenshots saved).
"""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, wait_until

pytestmark = pytest.mark.browser

IN_USE = {
    "en": "This seat is already in use on another phone.",
    "es": "Este puesto ya se está usando en otro teléfono.",
    "fr": "Cette place est déjà utilisée sur un autre téléphone.",
}
TAKE_OVER = {"en": "Take over this seat", "es": "Tomar este puesto", "fr": "Reprendre cette place"}
TAKEN = {
    "en": "This seat was taken over on another phone.",
    "es": "Otro teléfono ha tomado este puesto.",
    "fr": "Cette place a été reprise sur un autre téléphone.",
}


def _phone(browser, height):
    # A separate browser context is a separate phone: its own storage, its own device id.
    return browser.new_context(viewport={"width": 360, "height": height}, device_scale_factor=2,
                               is_mobile=True, has_touch=True)


@pytest.mark.parametrize(("lang", "height"), [("en", 740), ("es", 640), ("fr", 740), ("en", 640)])
def test_second_phone_is_asked_before_taking_over_and_the_first_is_told(start_server, demo_study, browser,
                                                                         lang, height):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    first_phone, second_phone = _phone(browser, height), _phone(browser, height)
    try:
        first = first_phone.new_page()
        first.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={lang}")
        wait_until(lambda: server.live.state.devices.get((0, 0)), "the first phone to hold the seat")
        second = second_phone.new_page()
        second.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={lang}")
        second.get_by_text(IN_USE[lang], exact=False).wait_for()
        button = second.get_by_role("button", name=TAKE_OVER[lang])
        box = button.bounding_box()
        assert box["y"] + box["height"] <= height  # the question and its answer on the first screen
        assert len(server.live.state.devices[(0, 0)]) == 1  # asking changed nothing
        ARTIFACTS.mkdir(exist_ok=True)
        second.screenshot(path=str(ARTIFACTS / f"phone-seat-in-use-{lang}-{height}.png"))
        button.tap()
        first.get_by_text(TAKEN[lang], exact=False).wait_for()
        first.screenshot(path=str(ARTIFACTS / f"phone-seat-taken-{lang}-{height}.png"))
        assert second.locator("#take-over").is_hidden()
        def seat_of_two():
            seat = console.states[-1]["groups"][0]["seats"][0] if console.states else None
            return seat if seat and seat["devices"] == 2 else None

        seat = wait_until(seat_of_two, "the console to see two phones")
        assert seat["online"] == 1
        # The console's main table shows it beside the seat, not only the fall-back table.
        desk = browser.new_context(viewport={"width": 1280, "height": 800})
        try:
            laptop = desk.new_page()
            laptop.goto(f"{server.url}/console/login")
            laptop.locator("#pin").fill(server.pin)
            laptop.locator("button[type=submit]").first.click()
            laptop.locator("#group-1 .seat-many-word", has_text="on 2 devices").wait_for()
            assert laptop.locator('#overview-grid .tile[data-group="1"] .seat-many').count() == 1
        finally:
            desk.close()
    finally:
        first_phone.close()
        second_phone.close()
        console.close()
