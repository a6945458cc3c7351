"""The console in headless Chromium: PIN login, cautions, start, seats deciding live."""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_phone

pytestmark = pytest.mark.browser


def test_console_logs_in_starts_and_sees_decisions_live(start_server, demo_study, browser):
    server = start_server(demo_study)
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    page = context.new_page()
    phone = connect_phone(server.url, server.key(1, 0).secret, device="device-g2s1")
    try:
        page.goto(f"{server.url}/console")
        page.locator("#pin").fill("0000" if server.pin != "0000" else "1111")
        page.get_by_role("button", name="Open the console").click()
        assert "Wrong PIN" in page.get_by_role("alert").inner_text()
        page.locator("#pin").fill(server.pin)
        page.get_by_role("button", name="Open the console").click()
        page.get_by_text("Before you start").wait_for()
        cautions = ("Informed consent.", "Ethics review.", "Anonymity.", "Real payments.", "Not a forecast.")
        for caution in cautions:
            assert page.get_by_text(caution).is_visible()
        assert page.locator("#start").is_disabled()  # cautions first
        page.locator("#cautions-read").check()
        page.locator("#start").click()
        page.locator("#status-word", has_text="Running").wait_for()
        assert phone.harvest("console-view-1", 1, 1, 5)["ok"]
        group_two = page.locator('section.group[data-group="2"]')
        group_two.get_by_text("yes (5)").wait_for()
        assert "Hidden from participants" in group_two.text_content()
        group_two.get_by_role("button", name="Close this round (missing seats take 0)").click()
        group_two.locator("table").nth(1).wait_for()
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "console.png"), full_page=True)
        cards = context.new_page()
        cards.goto(f"{server.url}/console/cards")
        assert cards.locator("article.seat-card svg").count() == 4
        cards.screenshot(path=str(ARTIFACTS / "cards.png"), full_page=True)
        cards.close()
    finally:
        phone.close()
        context.close()
    assert server.live.state.groups[1].outcomes[0].asked == (5, 0)
