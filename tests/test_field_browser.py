"""The field in headless Chromium: a phone that reloads or is reopened, the console's fall-backs,
a released seat, and the payment sheet (screenshots go to test-artifacts/)."""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_phone, wait_until

pytestmark = pytest.mark.browser


def open_console(browser, server):
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    page = context.new_page()
    page.on("dialog", lambda dialog: dialog.accept())  # the slips and release confirmations
    page.goto(f"{server.url}/console")
    page.locator("#pin").fill(server.pin)
    page.get_by_role("button", name="Open the console").click()
    page.locator("#cautions-read").check()
    return context, page


def seat_row(page, seat_id):
    return page.locator("#fallback-seats tr", has=page.locator("td", has_text=seat_id))


def test_phone_returns_to_its_seat_after_reload_and_after_being_closed(start_server, demo_study, phone_page):
    server = start_server(demo_study)
    other = connect_phone(server.url, server.key(0, 1).secret, device="device-other")
    page = phone_page.new_page()
    try:
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}")
        server.live.submit("session_started", {})
        page.reload()
        page.locator("#chooser").wait_for(state="visible")
        for _ in range(3):
            page.locator("#more").tap()
        page.locator("#confirm").tap()
        page.get_by_text("Your choice is recorded: 3 baskets. Waiting for the others.").wait_for()
        page.reload()  # a reload keeps the seat and its recorded choice
        page.get_by_text("Your choice is recorded: 3 baskets. Waiting for the others.").wait_for()
        page.close()
        assert other.harvest("other-seat-01", 1, 1, 2)["ok"]
        page = phone_page.new_page()  # closed and opened again, at the bare address
        page.goto(f"{server.url}/play")
        page.locator("#result").wait_for(state="visible")
        assert page.locator("#points").inner_text() == "3"
        assert "Seat 1 of 2" in page.locator("#seat-line").inner_text()
        assert "round 2" in page.locator("#seat-line").inner_text()
    finally:
        page.close()
        other.close()


def test_released_phone_forgets_its_seat_and_asks_for_the_card(start_server, demo_study, phone_page):
    server = start_server(demo_study)
    page = phone_page.new_page()
    try:
        page.goto(f"{server.url}/s/{server.key(1, 1).secret}")
        page.get_by_text("Please wait: the facilitator will start the game soon.").wait_for()
        wait_until(lambda: server.live.state.devices.get((1, 1)), "the seat to be claimed")
        console_context, console = open_console(page.context.browser, server)
        try:
            console.locator("#fallback-group").select_option("2")
            seat_row(console, "G02-2").get_by_role("button", name="Release this seat").click()
            page.get_by_text("The facilitator released this seat. If it is yours, scan your seat card again."
                             ).wait_for()
            assert page.locator("#join").is_visible()
            page.reload()  # the seat is forgotten: the page asks for a card or a code
            assert page.locator("#join").is_visible() and not page.locator("#game").is_visible()
            page.goto(f"{server.url}/s/{server.key(1, 1).secret}")  # scanning the card takes it back
            page.get_by_text("Please wait: the facilitator will start the game soon.").wait_for()
        finally:
            console_context.close()
    finally:
        page.close()
    assert [e.kind for e in server.live.store.events(server.live.session_id)].count("seat_released") == 1


def test_console_fall_backs_enter_correct_slips_and_pause(start_server, demo_study, browser):
    server = start_server(demo_study)
    phone = connect_phone(server.url, server.key(0, 0).secret, device="device-g1s1")
    context, page = open_console(browser, server)
    try:
        page.locator("#start").click()
        page.locator("#status-word", has_text="Running").wait_for()
        page.locator("#fallback-by").fill("MK")
        # A dead phone: seat G01-2's harvest typed at the console, mistyped, then corrected.
        row = seat_row(page, "G01-2")
        row.locator("input").fill("9")
        row.get_by_role("button", name="Enter for this seat").click()
        row.get_by_text("9 from the console").wait_for()
        row.locator("input").fill("4")
        row.get_by_role("button", name="Correct this entry").click()
        row.get_by_text("4 from the console").wait_for()
        # A bad entry is refused with what is allowed, and nothing changes.
        row.locator("input").fill("99")
        row.get_by_role("button", name="Correct this entry").click()
        page.locator("#fallback-problem", has_text="allowed: a whole number from 0 to 15").wait_for()
        assert page.locator("#console-problem").is_hidden()
        assert phone.harvest("phone-g1s1-01", 1, 1, 6)["ok"]
        wait_until(lambda: server.live.state.groups[0].outcomes, "group 1's round to resolve")
        assert server.live.state.groups[0].outcomes[0].asked == (6, 4)
        # A whole group on paper slips.
        page.locator("#fallback-group").select_option("2")
        seat_row(page, "G02-1").locator("input").fill("5")
        seat_row(page, "G02-2").locator("input").fill("7")
        page.get_by_role("button", name="Enter every slip").click()
        page.get_by_text("Open round: block 1, round 2").wait_for()
        assert server.live.state.groups[1].outcomes[0].asked == (5, 7)
        assert server.live.state.groups[1].sources[0] == ("console", "console")
        page.get_by_role("button", name="Pause this group").click()
        page.get_by_role("button", name="Resume this group").wait_for()
        assert server.live.state.groups[1].paused
        ARTIFACTS.mkdir(exist_ok=True)
        page.locator("#fallback").screenshot(path=str(ARTIFACTS / "console-fallback.png"))
        page.screenshot(path=str(ARTIFACTS / "console-with-fallback.png"), full_page=True)
        events = server.live.store.events(server.live.session_id)
        entries = [e for e in events if e.body.get("by") == "MK"]
        assert {e.kind for e in entries} == {"harvest_submitted", "harvest_corrected", "group_paused"}
        # The payment sheet, on screen and as printed.
        sheet = context.new_page()
        sheet.goto(f"{server.url}/console/payments")
        assert sheet.get_by_text("Pay in private, by seat code").is_visible()
        assert sheet.locator("section.pay-group").count() == 2
        assert sheet.evaluate("document.documentElement.scrollWidth") <= 1280
        sheet.screenshot(path=str(ARTIFACTS / "payment-sheet.png"), full_page=True)
        sheet.emulate_media(media="print")
        assert not sheet.locator("nav.links").is_visible()  # links stay off the paper
        sheet.screenshot(path=str(ARTIFACTS / "payment-sheet-print.png"), full_page=True)
        sheet.close()
    finally:
        phone.close()
        context.close()
