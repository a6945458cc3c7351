"""The phone page in headless Chromium at 360 x 740: join, choose, confirm, see the result."""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, connect_phone

pytestmark = pytest.mark.browser


def test_phone_joins_by_card_submits_a_harvest_and_sees_the_result(start_server, demo_study, phone_page):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    other = connect_phone(server.url, server.key(0, 1).secret, device="device-other")
    page = phone_page.new_page()
    requested, frames = [], []
    page.on("request", lambda r: requested.append(r.url))
    page.on("websocket", lambda ws: ws.on("framereceived", lambda payload: frames.append(str(payload))))
    try:
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}")
        page.get_by_text("Please wait: the facilitator will start the game soon.").wait_for()
        assert page.url.endswith("/play")  # the secret leaves the address bar at once
        console.act("console_start")
        page.locator("#chooser").wait_for(state="visible")
        for _ in range(4):
            page.locator("#more").tap()
        assert page.locator("#choice").inner_text() == "4"
        page.locator("#less").tap()
        page.locator("#confirm").tap()
        page.get_by_text("Your choice is recorded: 3 baskets. Waiting for the others.").wait_for()
        assert other.harvest("other-seat-1", 1, 1, 5)["ok"]
        page.locator("#result").wait_for(state="visible")
        assert "Result of round 1" in page.locator("#result-title").inner_text()
        assert page.locator("#points").inner_text() == "3"
        assert page.evaluate("document.documentElement.scrollWidth") <= 360  # nothing sticks out sideways
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / "phone.png"), full_page=True)
        page.reload()
        page.locator("#result").wait_for(state="visible")  # the seat is remembered across a reload
    finally:
        page.close()
        other.close()
        console.close()
    assert all(url.startswith(server.url) for url in requested), requested
    threshold = server.live.state.groups[0].state.threshold
    wire = "".join(frames)
    assert "threshold" not in wire and "flip_draw" not in wire and f"{threshold:.3f}"[:5] not in wire


def test_phone_joins_by_typed_short_code(start_server, demo_study, phone_page):
    server = start_server(demo_study)
    page = phone_page.new_page()
    try:
        page.goto(f"{server.url}/play")
        code = server.key(1, 0).short_code
        page.locator("#code").fill(f"{code[:3].lower()} {code[3:]}")
        page.get_by_role("button", name="Join").tap()
        page.get_by_text("Seat 1 of 2").wait_for()
    finally:
        page.close()


def test_phone_with_a_wrong_short_code_is_told_what_a_code_looks_like(start_server, demo_study, phone_page):
    server = start_server(demo_study)
    page = phone_page.new_page()
    try:
        page.goto(f"{server.url}/play")
        page.locator("#code").fill("ZZZZZZ" if server.key(0, 0).short_code != "ZZZZZZ" else "YYYYYY")
        page.get_by_role("button", name="Join").tap()
        assert "no 0, O, 1 or I" in page.get_by_role("alert").inner_text()
    finally:
        page.close()
