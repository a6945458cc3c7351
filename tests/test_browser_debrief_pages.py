"""The debrief after a trial run: the what-if note, a six-part study's handout on one A4 page
per group, and the phone's revealed debrief one part a screen (360 x 640 and 360 x 740)."""

from __future__ import annotations

import re

import pytest
import requests
from conftest import ARTIFACTS, connect_console, connect_every_seat, console_login, study_with, wait_until

from ebbtide.game_logic.study import parse_study

pytestmark = pytest.mark.browser

# Six parts, one per treatment, in an invented estuary (numbers invented for the test).
SIX_PARTS = """
[session]
id = "saltmere-six"
title = "Saltmere estuary mussel beds (test)"
language = "en"
languages = ["en", "es", "fr"]

[groups]
count = 2
seats_per_group = 2

[resource]
unit = "baskets"
initial_stock = 60
max_harvest = 8

[threshold]
rule = "fixed"
value = 35.5
recovery_gap = 15
flip_probability = 0.8
shown_range = [25, 45]
""" + "".join(f"""
[[blocks]]
name = "part-{t}"
treatment = "{t}"
rounds = 2
""" for t in ("none", "vague", "range", "exact", "risk", "signal"))


PREVIOUS = {"en": "Previous part", "es": "Parte anterior", "fr": "Partie précédente"}


def _page_count(pdf: bytes) -> int:
    # Page objects in the PDF (ISO 32000-1, 7.7.3.3: /Type /Page; /Pages is the tree node).
    return len(re.findall(rb"/Type\s*/Page[^s]", pdf))


@pytest.fixture
def six_parts_played():
    return parse_study(SIX_PARTS)


def _play_six_parts(server):
    console = connect_console(server.url, server.pin)
    phones = connect_every_seat(server)
    try:
        console.act("console_start")
        for block in range(1, 7):
            for r in (1, 2):
                for (g, s), phone in phones.items():
                    assert phone.harvest(f"six-{g}-{s}-{block}-{r}", block, r, 6 + s + g)["ok"]
            if block < 6:
                wait_until(lambda: all(p.waiting for p in server.live.state.groups), f"part {block} to end")
                console.act("console_open_block", {"group": None})
        wait_until(lambda: server.live.state.status == "ended", "the session to end")
        http = console_login(server.url, server.pin)
        revealed = http.post(server.url + "/console/debrief/reveal",
                             data={"form_token": http.form_token}, timeout=5)
        assert revealed.ok
    finally:
        for phone in phones.values():
            phone.close()
        console.close()


def test_six_part_handout_prints_on_one_a4_page_per_group_in_every_language(start_server, six_parts_played,
                                                                           browser):
    server = start_server(six_parts_played)
    _play_six_parts(server)
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    try:
        page = context.new_page()
        page.goto(f"{server.url}/console/login")
        page.locator("#pin").fill(server.pin)
        page.locator("button[type=submit]").first.click()
        page.locator("#overview-grid .tile").first.wait_for()
        for lang in ("en", "es", "fr"):
            for group in (1, 2):
                page.emulate_media(media="screen")
                page.goto(f"{server.url}/console/debrief/handout/{group}?lang={lang}")
                assert page.locator(".debrief-block").count() == 6
                page.emulate_media(media="print")
                pdf = page.pdf(format="A4", print_background=True)
                ARTIFACTS.mkdir(exist_ok=True)
                if group == 1:
                    (ARTIFACTS / f"handout-six-parts-{lang}.pdf").write_bytes(pdf)
                    page.set_viewport_size({"width": 703, "height": 1032})  # A4 less 12 mm margins
                    page.screenshot(path=str(ARTIFACTS / f"handout-six-parts-{lang}.png"), full_page=True)
                    page.set_viewport_size({"width": 1280, "height": 800})
                assert _page_count(pdf) == 1, (lang, group)
    finally:
        context.close()


@pytest.mark.parametrize(("lang", "height"), [("en", 740), ("es", 640), ("fr", 740)])
def test_phone_debrief_shows_one_part_a_screen_with_buttons(start_server, six_parts_played, browser, lang,
                                                           height):
    server = start_server(six_parts_played)
    context = browser.new_context(viewport={"width": 360, "height": height}, device_scale_factor=2,
                                  is_mobile=True, has_touch=True)
    try:
        _play_six_parts(server)
        page = context.new_page()
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={lang}")
        page.locator("#debrief").wait_for(state="visible")
        assert page.locator("#debrief .debrief-chart").count() == 1  # one part on the screen
        assert page.locator(".pager-count").inner_text() == "1 / 6"
        assert page.locator("#debrief-previous").is_disabled()
        first = page.locator("#debrief h3").inner_text()
        page.locator("#debrief-next").tap()
        assert page.locator(".pager-count").inner_text() == "2 / 6"
        assert page.locator("#debrief h3").inner_text() != first
        # One part (its heading, picture and sentence) and its buttons fit one screen.
        top = page.locator(".debrief-pager").bounding_box()["y"]
        bottom = page.locator("#debrief-body .sentence").bounding_box()
        assert bottom["y"] + bottom["height"] - top <= height, (top, bottom)
        assert page.get_by_role("button", name=PREVIOUS[lang]).is_enabled()
        for _ in range(4):
            page.locator("#debrief-next").tap()
        assert page.locator(".pager-count").inner_text() == "6 / 6"
        assert page.locator("#debrief-next").is_disabled()
        page.locator("#debrief").scroll_into_view_if_needed()
        ARTIFACTS.mkdir(exist_ok=True)
        page.screenshot(path=str(ARTIFACTS / f"phone-debrief-paged-{lang}-{height}.png"))
    finally:
        context.close()


def test_what_if_table_says_why_taking_less_took_more(start_server):
    # A start of 34 with both seats asking 15 runs the stock out in round 2 (hand arithmetic:
    # 34 - 30 = 4 left; then 30 asked of about 4, all taken, nothing left), ending the part early.
    server = start_server(study_with(**{"initial_stock = 80": "initial_stock = 34"}), seed=7)
    console = connect_console(server.url, server.pin)
    phones = connect_every_seat(server)
    try:
        console.act("console_start")
        for r in (1, 2):
            for (g, s), phone in phones.items():
                phone.harvest(f"ran-out-{g}-{s}-{r}", 1, r, 15)
        wait_until(lambda: all(p.waiting for p in server.live.state.groups), "both groups to run out")
        assert server.live.state.groups[0].outcomes[-1].end_reason == "exhausted"
        console.act("console_end")
        http = console_login(server.url, server.pin)
        page = http.get(server.url + "/console/debrief", timeout=5).text
        played = [sum(o.total_taken for o in p.outcomes) for p in server.live.state.groups]
        more = re.findall(r'<tr class="takes-more"><td>(\d+) less each round</td><td>(\d+) \*', page)
        assert more and all(int(total) > min(played) for _, total in more)
        assert "the stock ran out in round 2, so the part ended early" in page
        plain = requests.get(server.url + "/console/debrief", timeout=5, allow_redirects=False)
        assert plain.status_code == 302  # still behind the PIN
    finally:
        for phone in phones.values():
            phone.close()
        console.close()
