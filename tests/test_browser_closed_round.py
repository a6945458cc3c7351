"""A phone whose round the facilitator closed before its choice arrived is told so, not "0"."""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, connect_phone

pytestmark = pytest.mark.browser

NO_CHOICE = {"en": "no choice reached the laptop in time",
             "es": "ninguna elección llegó a tiempo al portátil"}


@pytest.mark.parametrize(("lang", "height"), [("en", 740), ("es", 640)])
def test_closed_round_tells_the_phone_no_choice_reached_the_laptop(start_server, demo_study, browser, lang,
                                                                   height):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    other = connect_phone(server.url, server.key(0, 1).secret, device="device-other")
    context = browser.new_context(viewport={"width": 360, "height": height}, device_scale_factor=2,
                                  is_mobile=True, has_touch=True)
    try:
        page = context.new_page()
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={lang}")
        page.locator("#status").wait_for()
        console.act("console_start")
        page.locator("#chooser").wait_for(state="visible")
        assert other.harvest("other-seat-closed", 1, 1, 5)["ok"]
        assert console.act("console_close_round", {"group": 1})["ok"]
        page.locator("#result").wait_for(state="visible")
        result = page.locator("#result-list").inner_text()
        assert NO_CHOICE[lang] in result
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-closed-round-{lang}-{height}.png"), full_page=True)
    finally:
        context.close()
        other.close()
        console.close()
