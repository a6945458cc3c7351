"""Every treatment's phone screen in headless Chromium at 360 x 740, then the debrief and its reveal.

One server plays one scenario for the whole module (one group per treatment, then a
talk block with others' harvests shown), so the screens cost one session, not six.
Screenshots go to ``test-artifacts/``. Each test reads what the scenario captured.
"""

from __future__ import annotations

import re
import threading

import pytest
from conftest import ARTIFACTS, connect_console, connect_phone, wait_until
from studies import TREATMENTS, teach_study

from ebbtide.server import create_app
from ebbtide.server.serving import build_server

pytestmark = pytest.mark.browser

LEVEL_SHOWN = "37.9"  # the threshold as exact/risk show it (one decimal)
HIDDEN_TEXTS = ("37.91", "52.9")
SHOT_LANGUAGES = ("en", "es", "fr")  # the full threshold and the recovery level: never before the reveal
PHONE = {"viewport": {"width": 360, "height": 740}, "device_scale_factor": 2, "is_mobile": True,
         "has_touch": True}


def _shot(page, name: str) -> None:
    ARTIFACTS.mkdir(exist_ok=True)
    page.screenshot(path=str(ARTIFACTS / name), full_page=True)


def _countdown_seconds(page) -> int:
    minutes, seconds = page.locator("#talk-countdown").inner_text().split(":")
    return int(minutes) * 60 + int(seconds)


def _open_in(page, url: str, lang: str) -> None:
    page.goto(f"{url}/play?lang={lang}")
    wait_until(lambda: page.evaluate("document.documentElement.lang") == lang, f"the {lang} page")
    page.locator("#gauge svg").wait_for()
    page.locator("#chooser").wait_for(state="visible")


def _shoot_languages(page, url: str, treatment: str) -> dict[str, tuple[str, str]]:
    """Screenshots at 360 x 640 and 360 x 740 in en, es and fr, then back in English.

    Returns, per language, the page's heading and block label as the phone shows them.
    """
    seen = {}
    ARTIFACTS.mkdir(exist_ok=True)
    for lang in SHOT_LANGUAGES:
        _open_in(page, url, lang)
        seen[lang] = (page.locator("h1").inner_text(), page.locator("#block-label").inner_text())
        for height in (640, 740):
            page.set_viewport_size({"width": 360, "height": height})
            page.screenshot(path=str(ARTIFACTS / f"phone-{treatment}-{lang}-360x{height}.png"))
        _shot(page, f"phone-{treatment}-{lang}-full.png")
    _open_in(page, url, "en")  # the seat's language follows its phone: back to what the tests read
    page.set_viewport_size(PHONE["viewport"])
    return seen


class Scenario(dict):
    """What the module's one session showed: screens, captured traffic, pages."""


@pytest.fixture(scope="module")
def scenario(browser, tmp_path_factory):
    db = tmp_path_factory.mktemp("teach") / "session.db"
    app = create_app({"EBBTIDE_DB": str(db), "EBBTIDE_STUDY": teach_study(talk_seconds=60),
                      "EBBTIDE_SEED": 7, "EBBTIDE_PIN": "2468"})
    server = build_server(app, "127.0.0.1", 0)
    thread = threading.Thread(target=server.serve_forever, kwargs={"poll_interval": 0.05}, daemon=True)
    thread.start()
    url = f"http://127.0.0.1:{server.server_port}"
    app.config["EBBTIDE_PUBLIC_URL"] = url
    live = app.extensions["ebbtide"].current
    key = {(k.group, k.seat): k for k in live.keys}
    out = Scenario(url=url, screens={}, frames={g: [] for g in range(6)}, requested=[], html={}, labels={})
    contexts, others = [], []
    console = connect_console(url, "2468")
    try:
        pages = []
        for g in range(6):
            context = browser.new_context(**PHONE)
            contexts.append(context)
            page = context.new_page()
            page.set_default_timeout(10_000)
            page.on("request", lambda r: out["requested"].append(r.url))
            page.on("websocket", lambda ws, g=g: ws.on(
                "framereceived", lambda payload, g=g: out["frames"][g].append(str(payload))))
            page.goto(f"{url}/s/{key[(g, 0)].secret}")
            page.get_by_text("Please wait: the facilitator will start the game soon.").wait_for()
            pages.append(page)
            others.append(connect_phone(url, key[(g, 1)].secret, device=f"other-seat-{g}"))
        console.act("console_start")

        # Block 1: one treatment per group, others' harvests hidden.
        for g, treatment in enumerate(TREATMENTS):
            page = pages[g]
            page.locator("#chooser").wait_for(state="visible")
            # 5 + 8 of 50 leaves 37, just under the danger level: the flip draw decides.
            for _ in range(5):
                page.locator("#more").tap()
            page.locator("#confirm").tap()
            assert others[g].harvest(f"other-{g}-b1-r1", 1, 1, 8)["ok"]
            page.locator("#result").wait_for(state="visible")
            page.locator("#chooser").wait_for(state="visible")
            out["screens"][treatment] = {
                "gauge": page.locator("#gauge").inner_html(),
                "text": page.locator("body").inner_text(),
                "danger_visible": page.locator("#danger").is_visible(),
            }
            _shot(page, f"treatment-{treatment}.png")

        # Every treatment's screen in every catalogue language at two phone heights (for people to look at).
        for g, treatment in enumerate(TREATMENTS):
            out["labels"][treatment] = _shoot_languages(pages[g], url, treatment)

        # Pictorial mode on the `exact` phone: choose by tapping unit icons; remembered on reload.
        page = pages[3]
        page.locator("#picture-toggle").tap()
        page.locator("#unit-picker").wait_for(state="visible")
        buttons = page.locator(".unit-button")
        out["pictorial_buttons"] = buttons.count()
        out["pictorial_sizes"] = [buttons.nth(i).bounding_box() for i in range(buttons.count())]
        page.locator('.unit-button[data-n="4"]').tap()
        out["pictorial_on"] = page.locator(".unit-button.on").count()
        out["pictorial_confirm"] = page.locator("#confirm").inner_text()
        out["pictorial_stepper_visible"] = page.locator("#more").is_visible()
        out["pictorial_result_pictures"] = page.locator("#result-pictures .picture-fact").count()
        _shot(page, "pictorial.png")
        page.reload()
        page.locator("#unit-picker").wait_for(state="visible")
        out["pictorial_after_reload"] = page.evaluate("document.body.classList.contains('pictorial')")

        # Spanish on the `range` phone, switched with the phone's own language links.
        page = pages[2]
        page.get_by_role("link", name="Español").tap()
        page.get_by_text("Parte 1 de 2", exact=False).wait_for()
        page.locator("#gauge svg").wait_for()
        wait_until(lambda: "Nivel de peligro" in page.locator("#gauge").inner_html(), "a Spanish gauge")
        out["spanish"] = {"text": page.locator("body").inner_text(),
                          "gauge": page.locator("#gauge").inner_html(),
                          "lang": page.evaluate("document.documentElement.lang")}
        _shot(page, "spanish-range.png")

        # Block 2: talk pauses (60 s) and others' harvests shown.
        console.act("console_close_round", {"group": None})
        console.act("console_open_block", {"group": None})
        page = pages[0]
        page.locator("#talk-box").wait_for(state="visible")
        out["talk"] = {
            "confirm_disabled": page.locator("#confirm").is_disabled(),
            "more_disabled": page.locator("#more").is_disabled(),
            "countdown": _countdown_seconds(page),
            "refused": others[0].harvest("other-0-b2-r1", 2, 1, 5),
        }
        _shot(page, "talk.png")
        page.wait_for_timeout(1500)
        page.reload()
        page.locator("#talk-box").wait_for(state="visible")
        out["talk"]["after_reload"] = _countdown_seconds(page)
        console.act("console_talk_extend", {"group": 1})
        wait_until(lambda: _countdown_seconds(page) > 60, "the extended countdown")
        out["talk"]["after_extend"] = _countdown_seconds(page)
        console.act("console_talk_end", {"group": 1})
        page.locator("#talk-box").wait_for(state="hidden")
        # Choosing opens when the pause ends; Confirm waits for a number chosen on purpose.
        out["talk"]["more_enabled_after_end"] = page.locator("#more").is_enabled()
        page.locator("#more").tap()
        page.locator("#more").tap()
        page.locator("#confirm").tap()
        assert others[0].harvest("other-0-b2-r1", 2, 1, 5)["ok"]
        page.get_by_text("Result of round 1").wait_for()
        out["show_others_text"] = page.locator("#result").inner_text()
        out["hide_others_text"] = out["screens"]["none"]["text"]
        _shot(page, "show-others.png")

        # Finish: the console closes the remaining rounds; the session ends by itself.
        console.act("console_close_round", {"group": None})
        console.act("console_close_round", {"group": None})
        wait_until(lambda: live.state.status == "ended", "the session to end")
        for g, page in enumerate(pages):
            page.get_by_text("The game is over", exact=False).or_(
                page.get_by_text("El juego ha terminado", exact=False)).wait_for()
            out["html"][g] = page.content()
        out["wire_before_reveal"] = {g: "".join(out["frames"][g]) + others[g].wire_text() for g in range(6)}
        response = pages[1].goto(f"{url}/console/debrief")
        out["phone_debrief_url"], out["phone_debrief_html"] = pages[1].url, pages[1].content()
        assert response is not None
        pages[1].goto(f"{url}/play")

        # The facilitator's laptop: console, debrief, handout, teaching view, then the reveal.
        laptop = browser.new_context(viewport={"width": 1280, "height": 900})
        contexts.append(laptop)
        desk = laptop.new_page()
        desk.set_default_timeout(10_000)
        desk.on("request", lambda r: out["requested"].append(r.url))
        desk.goto(f"{url}/console/login")
        desk.locator("#pin").fill("2468")
        desk.get_by_role("button", name="Open the console").click()
        desk.locator(".console-gauge svg").first.wait_for()
        out["console_gauges"] = desk.locator(".console-gauge svg").count()
        _shot(desk, "console-gauges.png")
        desk.goto(f"{url}/console/debrief")
        out["debrief_text"] = desk.locator("body").inner_text()
        out["debrief_charts"] = desk.locator(".debrief-chart svg").count()
        _shot(desk, "debrief.png")
        desk.goto(f"{url}/console/debrief/handout/1")
        desk.emulate_media(media="print")
        out["handout_text"] = desk.locator("body").inner_text()
        out["handout_pdf"] = desk.pdf(format="A4", print_background=True)
        (ARTIFACTS / "handout.pdf").write_bytes(out["handout_pdf"])
        desk.set_viewport_size({"width": 703, "height": 1032})  # A4 less 12 mm margins, at 96 dpi
        out["handout_height"] = desk.evaluate("document.documentElement.scrollHeight")
        _shot(desk, "handout.png")
        desk.emulate_media(media="screen")
        desk.goto(f"{url}/teach")
        out["teach_html"] = desk.content()
        out["teach_gauges"] = desk.locator(".teach-gauge svg").count()
        _shot(desk, "teaching-view.png")
        out["short_codes"] = [k.short_code for k in live.keys]
        desk.goto(f"{url}/console/debrief")
        desk.get_by_role("button", name="Reveal to participants").click()
        desk.get_by_text("Revealed to participants", exact=False).wait_for()
        page = pages[1]
        page.locator("#debrief").wait_for(state="visible")
        out["revealed_text"] = page.locator("#debrief").inner_text()
        _shot(page, "phone-debrief.png")
        yield out
    finally:
        for phone in others:
            phone.close()
        console.close()
        for context in contexts:
            context.close()
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)
        app.extensions["ebbtide"].store.close()


def test_none_screen_shows_no_danger_marker(scenario):
    screen = scenario["screens"]["none"]
    assert "Danger" not in screen["gauge"]
    assert 'fill="url(#stock-hatch)"' not in screen["gauge"]  # no hatched danger zone
    assert not screen["danger_visible"]
    assert LEVEL_SHOWN not in screen["text"]


def test_vague_screen_warns_of_danger_without_a_number(scenario):
    screen = scenario["screens"]["vague"]
    assert "Danger somewhere low" in screen["gauge"]
    assert "There is a danger level" in screen["text"]
    numbers = set(re.findall(r">(\d+(?:\.\d+)?)<", screen["gauge"]))
    # The stock numeral and the scale ends (0, capacity) are the only numbers drawn.
    assert numbers <= {"0", "100", *re.findall(r'font-size="50" font-weight="bold">(\d+)<', screen["gauge"])}


def test_range_screen_shows_the_interval_and_not_the_threshold(scenario):
    screen = scenario["screens"]["range"]
    assert "Danger level somewhere in 25 to 50" in screen["gauge"]
    assert "between 25 and 50" in screen["text"]
    assert LEVEL_SHOWN not in screen["gauge"] + screen["text"]


def test_exact_screen_shows_the_level(scenario):
    screen = scenario["screens"]["exact"]
    assert f"Danger level {LEVEL_SHOWN}" in screen["gauge"]
    assert f"Below {LEVEL_SHOWN} the stock collapses" in screen["text"]


def test_risk_screen_shows_the_level_and_the_chance_of_collapse(scenario):
    screen = scenario["screens"]["risk"]
    assert f"Danger level {LEVEL_SHOWN}" in screen["gauge"]
    assert "75% chance of collapse" in screen["gauge"]


def test_signal_screen_shows_a_band_word_and_no_threshold_number(scenario):
    screen = scenario["screens"]["signal"]
    assert re.search(r">(Calm|Watch|Alarm)<", screen["gauge"])
    assert re.search(r">(falling|steady|rising)<", screen["gauge"])
    assert "not a danger line" in screen["text"]
    assert LEVEL_SHOWN not in screen["gauge"] + screen["text"] and "Danger level" not in screen["gauge"]


def test_show_others_lists_others_harvests_only_when_on(scenario):
    assert "The others took" not in scenario["hide_others_text"]
    assert "only the group's total" in scenario["hide_others_text"]
    shown = scenario["show_others_text"]
    assert re.search(r"The others took\s+5", shown), shown


def test_talk_shows_a_countdown_and_disables_the_harvest_buttons(scenario):
    talk = scenario["talk"]
    assert talk["confirm_disabled"] and talk["more_disabled"]
    assert 50 <= talk["countdown"] <= 60
    # refused by code, in the phone's words (server/phone/refusals.py), not the log's English line
    assert talk["refused"]["code"] == "talking"
    assert talk["refused"]["message"] == "Choices open when the countdown ends."


def test_talk_countdown_survives_a_reload_and_follows_the_console(scenario):
    talk = scenario["talk"]
    assert talk["after_reload"] < talk["countdown"]  # the pause kept running; it did not restart
    assert talk["after_extend"] > 60  # +30 s from the console
    assert talk["more_enabled_after_end"]


def test_pictorial_mode_picks_by_tapping_unit_icons_and_is_remembered(scenario):
    assert scenario["pictorial_buttons"] == 8 + 1  # 0 .. max_harvest
    # 48 CSS px: the usual minimum touch target (common practice, no source).
    assert all(box["width"] >= 48 and box["height"] >= 48 for box in scenario["pictorial_sizes"])
    assert scenario["pictorial_on"] == 4 and scenario["pictorial_confirm"] == "\u2713 4"
    assert not scenario["pictorial_stepper_visible"]
    assert scenario["pictorial_result_pictures"] >= 4
    assert scenario["pictorial_after_reload"]


def test_spanish_phone_screen_is_translated(scenario):
    spanish = scenario["spanish"]
    assert spanish["lang"] == "es"
    assert "¿Cuántos va a tomar?" in spanish["text"] and "Sus puntos hasta ahora" in spanish["text"]
    assert "Nivel de peligro en algún punto entre 25 y 50" in spanish["gauge"]
    assert "How many" not in spanish["text"]


def test_phones_never_receive_the_threshold_before_the_reveal(scenario):
    for g, treatment in enumerate(TREATMENTS):
        received = scenario["wire_before_reveal"][g] + scenario["html"][g]
        assert all(hidden not in received for hidden in HIDDEN_TEXTS), treatment
        assert "debrief_revealed" not in received and '"debrief": {' not in received
        if treatment not in ("exact", "risk"):
            assert LEVEL_SHOWN not in received, treatment


def test_debrief_page_is_refused_to_a_phone_without_the_console_pin(scenario):
    assert scenario["phone_debrief_url"].endswith("/console/login")
    assert LEVEL_SHOWN not in scenario["phone_debrief_html"]


def test_debrief_reveals_each_group_threshold_path_and_what_if(scenario):
    text = scenario["debrief_text"]
    assert text.count(LEVEL_SHOWN) >= 6
    assert "1 less each round" in text and "2 less each round" in text
    assert scenario["debrief_charts"] == 6 * 2  # two finished parts per group
    assert "not a forecast for any real fishery" in text


def test_handout_prints_on_one_a4_page_with_the_caution(scenario):
    assert "This game is a teaching device" in scenario["handout_text"]
    pdf = scenario["handout_pdf"]
    assert pdf.startswith(b"%PDF")
    assert len(re.findall(rb"/Type\s*/Page[^s]", pdf)) == 1, scenario["handout_height"]


def test_reveal_shows_each_phone_its_own_group_threshold(scenario):
    text = scenario["revealed_text"]
    assert f"The danger level was {LEVEL_SHOWN}" in text
    assert "teaching device" in text


def test_teaching_view_shows_gauges_without_seat_codes(scenario):
    html = scenario["teach_html"]
    assert scenario["teach_gauges"] == 6
    assert "changes the treatment" in html
    assert not any(code in html for code in scenario["short_codes"])
    assert "G01-1" not in html


def test_console_shows_a_small_gauge_per_group(scenario):
    assert scenario["console_gauges"] == 6


def test_pages_load_nothing_from_elsewhere(scenario):
    assert scenario["requested"]
    assert all(url.startswith(scenario["url"]) for url in scenario["requested"])


def test_phones_show_the_participant_labels_in_their_language_never_the_researcher_names(scenario):
    # teach_study labels the session and block 1 in en, es and fr; "told" and the title are the researcher's.
    expected = {"en": ("The cockle flats", "First tides"),
                "es": ("Las marismas de berberechos", "Primeras mareas"),
                "fr": ("Les vasières à coques", "Premières marées")}
    for treatment in TREATMENTS:
        assert scenario["labels"][treatment] == expected, treatment
    for g in range(6):
        received = scenario["wire_before_reveal"][g] + scenario["html"][g]
        assert "Fennick cockle flats (test)" not in received and '"told"' not in received
        assert "talk-and-see" not in received
