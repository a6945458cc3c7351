"""The console at 1280 x 800: a whole session at a glance, in every catalogue language.

From a trial run (issue: "the facilitator's console"): with 24 seats the page was 3,410 px
tall with no summary, offline phones showed only in the fall-back table, results were
clipped, messages went stale and there was no language switch.
"""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, connect_phone, study_with, wait_until

pytestmark = pytest.mark.browser

LAPTOP = {"width": 1280, "height": 800}
SUMMARY = {  # the catalogue's wording of "n of N joined, m decided, k offline"
    "en": "39 of 40 joined, 1 decided, 1 offline",
    "es": "39 de 40 conectados, 1 han decidido, 1 sin conexión",
    "fr": "39 sur 40 connectés, 1 ont choisi, 1 hors ligne",
}


def _login(browser, server, lang="en"):
    context = browser.new_context(viewport=LAPTOP)
    page = context.new_page()
    page.on("dialog", lambda dialog: dialog.accept())
    page.goto(f"{server.url}/console/login?lang={lang}")
    page.locator("#pin").fill(server.pin)
    page.locator("button[type=submit]").first.click()
    page.locator("#overview-grid .tile").first.wait_for()
    return context, page


@pytest.fixture
def twenty_groups(start_server):
    """20 groups of 2 (the study's maximum), seat G01-2 never joined, G02-1 offline, G03 half decided."""
    server = start_server(study_with(**{"count = 2": "count = 20"}))
    phones = {(k.group, k.seat): connect_phone(server.url, k.secret, device=f"device-{k.group}-{k.seat}")
              for k in server.keys if (k.group, k.seat) != (0, 1)}
    console = connect_console(server.url, server.pin)
    yield server, phones, console
    for phone in phones.values():
        phone.close()
    console.close()


def test_twenty_groups_fit_one_laptop_screen_with_a_summary_in_every_language(twenty_groups, browser):
    server, phones, console = twenty_groups
    assert console.act("console_start")["ok"]
    phones.pop((1, 0)).close()  # joined, then its battery died
    for seat in (0, 1):
        assert phones[(3, seat)].harvest(f"overview-g4-{seat}", 1, 1, 3)["ok"]  # round resolves
    assert phones[(2, 0)].harvest("overview-g3-0", 1, 1, 3)["ok"]  # G03 waits for seat 2
    wait_until(lambda: server.live.state.groups[3].outcomes, "G04's round")
    for lang in ("en", "es", "fr"):
        context, page = _login(browser, server, lang)
        try:
            page.locator("#summary", has_text=SUMMARY[lang]).wait_for()
            tiles = page.locator("#overview-grid .tile")
            assert tiles.count() == 20
            # Every tile, G20 included, lies within the first 800 px: no scrolling for a glance.
            assert tiles.nth(19).bounding_box()["y"] + tiles.nth(19).bounding_box()["height"] <= 800
            assert tiles.nth(0).locator(".seat-none").count() == 1
            assert tiles.nth(1).locator(".seat-offline").count() == 1
            assert tiles.nth(2).locator(".seat-decided").count() == 1
            assert tiles.nth(2).locator(".seat-stuck").count() == 1
            # The main table says offline too, not only the fall-back table.
            assert page.locator("#group-2 .seat-word.seat-offline").count() == 1
            # No results table is clipped: each fits its card at 1280 px.
            for wrap in page.locator(".group .table-wrap").all():
                assert wrap.evaluate("w => w.scrollWidth <= w.clientWidth + 1")
            # A visible language switch naming the others in their own words.
            assert page.locator(".console-langs a.lang").count() == 2
            assert page.locator(".console-langs .lang-current").is_visible()
            # After the start the cautions fold away below everything else.
            assert page.locator("details#setup").evaluate("d => !d.open")
            assert page.locator("details#setup").evaluate("d => d.previousElementSibling !== null "
                                                          "&& d.parentNode.lastElementChild === d")
            ARTIFACTS.mkdir(exist_ok=True)
            page.screenshot(path=str(ARTIFACTS / f"console-overview-{lang}.png"))
        finally:
            context.close()


def test_before_the_start_groups_read_not_started_and_stale_messages_clear(start_server, demo_study,
                                                                            browser):
    server = start_server(demo_study)
    context, page = _login(browser, server)
    try:
        assert page.locator("details#setup").evaluate("d => d.open")
        line = page.locator('section.group[data-group="1"] .state-line').first
        assert "Not started" in line.inner_text() and "Playing" not in line.inner_text()
        assert page.locator("#overview-grid .tile").first.inner_text().count("Not started") == 1
        page.locator("#cautions-read").check()
        page.locator("#start").click()
        page.locator("#status-word", has_text="Running").wait_for()
        page.locator("#fallback-by").fill("MK")
        row = page.locator("#fallback-seats tr", has=page.locator("td", has_text="G01-2"))
        row.locator("input").fill("3")
        row.get_by_role("button", name="Enter for this seat").click()
        page.locator("#fallback-done", has_text="Stored: G01-2 = 3").wait_for()
        phone = connect_phone(server.url, server.key(0, 0).secret, device="device-g1s1")
        try:
            assert phone.harvest("phone-g1s1-r1", 1, 1, 2)["ok"]  # the round resolves
            page.get_by_text("Open round: block 1, round 2").wait_for()
            # Round 2 does not carry round 1's message.
            wait_until(lambda: page.locator("#fallback-done").is_hidden(), "the stale message to clear")
        finally:
            phone.close()
    finally:
        context.close()


def test_each_seat_opens_in_a_new_tab_for_trying_the_game_on_one_laptop(start_server, demo_study, browser):
    server = start_server(demo_study)
    context, page = _login(browser, server)
    try:
        link = page.locator('section.group[data-group="2"] a.try-seat').nth(1)
        assert link.get_attribute("target") == "_blank"
        with context.expect_page() as opened:
            link.click()
        tab = opened.value
        tab.get_by_text("Seat 2 of 2", exact=False).wait_for()
        wait_until(lambda: server.live.state.devices.get((1, 1)), "G02-2 to be claimed by the tab")
        missing = context.request.get(f"{server.url}/console/seat/3/1")
        assert missing.status == 404 and "groups run from 1 to 2" in missing.text()
    finally:
        context.close()
