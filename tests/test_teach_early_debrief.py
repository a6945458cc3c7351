"""The projector debrief and the handout before the session ends: hidden values stay hidden.

A debrief shown between blocks must not tell the room the danger level of a block still
to be played (issue: "the projector debrief and the handout open during play").
"""

from __future__ import annotations

import pytest
from conftest import ARTIFACTS, connect_console, console_login, study_with, wait_until
from studies import THRESHOLD, teach_study

from ebbtide.game_logic.early_debrief import safe_to_show, thresholds_still_to_play
from ebbtide.game_logic.rounds import group_threshold, start_block

LEVEL = f"{THRESHOLD:.1f}"
# The demo with a fresh danger level drawn for every block (invented design).
REDRAWN = {"flip_probability = 1.0": "flip_probability = 1.0\nredraw_each_block = true"}


def _close_rounds(console, times):
    for _ in range(times):
        assert console.act("console_close_round", {"group": None})["ok"]


def test_a_fixed_level_shared_by_every_block_is_never_shown_before_the_end(start_server):
    server = start_server(teach_study(), seed=11)
    console = connect_console(server.url, server.pin)
    try:
        console.act("console_start")
        _close_rounds(console, 2)  # block 1 over for every group; block 2 uses the same level
        wait_until(lambda: all(p.waiting for p in server.live.state.groups), "block 1 to end")
        http = console_login(server.url, server.pin)
        for path in ("/console/debrief", "/console/debrief?early=1", "/console/debrief/handout/4",
                     "/console/debrief/handout/4?early=1"):
            page = http.get(server.url + path, timeout=5).text
            assert LEVEL not in page, path
            assert "The session has not ended" in page or "held back until the session ends" in page, path
        first = http.get(server.url + "/console/debrief", timeout=5).text
        assert "No finished part can be shown yet" in first
        # After the end the same page shows the level without any confirmation.
        console.act("console_end")
        assert LEVEL in http.get(server.url + "/console/debrief", timeout=5).text
        assert LEVEL in http.get(server.url + "/console/debrief/handout/4", timeout=5).text
    finally:
        console.close()


def test_an_early_debrief_names_what_it_gives_away_and_shows_only_spent_levels(start_server):
    server = start_server(study_with(**REDRAWN), seed=5)
    console = connect_console(server.url, server.pin)
    try:
        console.act("console_start")
        _close_rounds(console, 5)
        wait_until(lambda: all(p.waiting for p in server.live.state.groups), "block 1 to end")
        live = server.live
        spent = [group_threshold(live.study, server.seed, g, 0) for g in range(2)]
        coming = [group_threshold(live.study, server.seed, g, 1) for g in range(2)]
        http = console_login(server.url, server.pin)
        warned = http.get(server.url + "/console/debrief", timeout=5).text
        assert not any(f"{t:.1f}" in warned for t in spent + coming)
        assert "G01 Part 1: first-season" in warned and "G02 Part 1: first-season" in warned
        assert 'name="early" value="1"' in warned
        shown = http.get(server.url + "/console/debrief?early=1", timeout=5).text
        assert all(f"{t:.1f}" in shown for t in spent)
        assert "/console/debrief/handout/1?early=1" in shown
        handout = http.get(server.url + "/console/debrief/handout/1?early=1", timeout=5).text
        assert f"{spent[0]:.1f}" in handout
    finally:
        console.close()


def test_the_rule_holds_back_a_level_any_group_still_plays_under(demo_study):
    # Fixed rule: one level for every group and block, so any block still open keeps it secret.
    fixed = study_with(**{"rule = \"uniform\"\nlow = 25\nhigh = 45":
                          "rule = \"fixed\"\nvalue = 30\nshown_range = [25, 45]"})
    states = [start_block(fixed, 1, 0, 0), start_block(fixed, 1, 1, 1)]
    assert not safe_to_show(30.0, thresholds_still_to_play(fixed, 1, states))
    # A drawn level kept across blocks: group 1's own block 2 still plays under it.
    level = group_threshold(demo_study, 1, 0, 0)
    still = thresholds_still_to_play(demo_study, 1, [start_block(demo_study, 1, 0, 1)])
    assert level in still and not safe_to_show(level, still)
    assert safe_to_show(None, still)  # a block without a danger level reveals none


@pytest.mark.parametrize("path", ["/console/debrief?early=1", "/console/debrief/handout/1?early=1"])
def test_early_pages_still_need_the_console_pin(start_server, demo_study, path):
    import requests

    server = start_server(demo_study)
    response = requests.get(server.url + path, allow_redirects=False, timeout=5)
    assert response.status_code == 302 and "/console/login" in response.headers["Location"]


CONFIRM = {"en": "Show these parts now", "es": "Mostrar estas partes ahora",
           "fr": "Montrer ces parties maintenant"}


@pytest.mark.browser
def test_the_early_debrief_warning_and_its_button_at_laptop_size(start_server, browser):
    server = start_server(study_with(**REDRAWN), seed=5)
    console = connect_console(server.url, server.pin)
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    try:
        console.act("console_start")
        _close_rounds(console, 5)
        wait_until(lambda: all(p.waiting for p in server.live.state.groups), "block 1 to end")
        spent = group_threshold(server.live.study, server.seed, 0, 0)
        page = context.new_page()
        page.goto(f"{server.url}/console/login")
        page.locator("#pin").fill(server.pin)
        page.locator("button[type=submit]").first.click()
        for lang in ("en", "es", "fr"):
            page.goto(f"{server.url}/console/debrief?lang={lang}")
            warning = page.locator(".early-warning")
            assert warning.is_visible() and "G01" in warning.inner_text()
            assert f"{spent:.1f}" not in page.locator("body").inner_text()
            ARTIFACTS.mkdir(exist_ok=True)
            page.screenshot(path=str(ARTIFACTS / f"debrief-early-warning-{lang}.png"))
            page.get_by_role("button", name=CONFIRM[lang]).click()
            page.locator(".debrief-block").first.wait_for()
            assert f"{spent:.1f}" in page.locator("body").inner_text()
            page.screenshot(path=str(ARTIFACTS / f"debrief-early-shown-{lang}.png"))
    finally:
        context.close()
        console.close()
