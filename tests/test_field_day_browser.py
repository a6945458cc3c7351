"""The whole field day on a 360x740 phone in headless Chromium, consent,
instructions with a sound button (a WAV the test writes), a comprehension question answered
wrong then right, a practice round, the paid game, the after-game questionnaire and the end
screen (in en, es and fr); a second phone declines and the group plays on with that seat absent. Screenshots
of every screen at 360x640 and 360x740 in en, es and fr, and of the console at 1280x800,
go to test-artifacts/field-day/."""

from __future__ import annotations

import math
import shutil
import struct
import wave

import pytest
from conftest import ARTIFACTS, ROOT, connect_console, connect_phone, wait_until

from ebbtide.game_logic.field_day import text_sha256
from ebbtide.game_logic.study import load_study

pytestmark = pytest.mark.browser
SHOTS = ARTIFACTS / "field-day"
WORDS = {  # what the phone must say, per language (the catalogues' own words)
    "en": {"agree": "I agree", "listen": "Listen", "practice": "Practice round: it pays nothing",
           "over": "The game is over. Thank you for playing.", "next": "Next", "done": "Done"},
    "es": {"agree": "Acepto", "listen": "Escuchar", "practice": "Ronda de práctica: no paga nada",
           "over": None, "next": "Siguiente", "done": "Listo"},
    "fr": {"agree": "J'accepte", "listen": "Écouter", "practice": "Tour d'essai : il ne rapporte rien",
           "over": None, "next": "Suivant", "done": "Terminé"},
}


def write_tone(path, seconds=0.4, rate=8000):
    """A short 440 Hz tone as 16-bit mono PCM WAV (the stand-in for a recorded instruction)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    with wave.open(str(path), "wb") as out:
        out.setnchannels(1)
        out.setsampwidth(2)
        out.setframerate(rate)
        out.writeframes(b"".join(struct.pack("<h", int(8000 * math.sin(2 * math.pi * 440 * i / rate)))
                                 for i in range(int(seconds * rate))))


def small_day(tmp_path):
    """The saltmarsh example as one group of two, two short blocks, with a recorded first screen."""
    folder = tmp_path / "study"
    shutil.copytree(ROOT / "examples" / "saltmarsh-day", folder)
    write_tone(folder / "sounds" / "screen-1.wav")
    text = (folder / "study.toml").read_text(encoding="utf-8")
    text = text.replace("count = 2\nseats_per_group = 3", "count = 1\nseats_per_group = 2")
    text = text.replace("rounds = 4", "rounds = 2")
    text = text.replace('picture = "pictures/shared-bed.svg"', 'picture = "pictures/shared-bed.svg"\n'
                        'sound = { en = "sounds/screen-1.wav", es = "sounds/screen-1.wav", '
                        'fr = "sounds/screen-1.wav" }')
    (folder / "study.toml").write_text(text, encoding="utf-8")
    return load_study(folder)


def shot(page, name):
    """Screenshots at 360x740 and 360x640 (full page, so nothing below the fold is missed)."""
    SHOTS.mkdir(parents=True, exist_ok=True)
    for height in (740, 640):
        page.set_viewport_size({"width": 360, "height": height})
        page.screenshot(path=str(SHOTS / f"{name}-360x{height}.png"), full_page=True)
    page.set_viewport_size({"width": 360, "height": 740})


def tap_stage(page, stage):
    page.locator(f"#day[data-stage='{stage}']").wait_for(state="visible")


@pytest.mark.parametrize("lang", ["en", "es", "fr"])
def test_whole_field_day_on_a_phone(start_server, phone_page, tmp_path, lang):
    study = small_day(tmp_path)
    server = start_server(study)
    words = WORDS[lang]
    # The second seat's person does not agree: under on_decline = "absent" the group plays on.
    other = connect_phone(server.url, server.key(0, 1).secret, device="device-decliner")
    console = connect_console(server.url, server.pin)
    consent_text = study.consent.text["en"]
    assert other.client.call("consent", {"agree": False, "language": "en",
                                         "text_sha256": text_sha256(consent_text)}, timeout=20)["ok"]
    page = phone_page.new_page()
    try:
        page.goto(f"{server.url}/s/{server.key(0, 0).secret}?lang={lang}")
        tap_stage(page, "consent")
        assert study.consent.text[lang][:30] in page.locator(".consent-text").inner_text()
        shot(page, f"{lang}-1-consent")
        page.get_by_role("button", name="\u2713 " + words["agree"], exact=True).tap()

        tap_stage(page, "instructions")
        page.locator("img.day-picture").wait_for(state="visible")
        page.get_by_role("button", name=words["listen"]).tap()
        # The WAV came from the laptop and played: the browser decoded it and time has passed in it.
        wait_until(lambda: page.evaluate(
            "(() => { const a = document.getElementById('day-audio');"
            " return a.played.length > 0 && Math.abs(a.duration - 0.4) < 0.05; })()"), "the sound to play")
        shot(page, f"{lang}-2-instructions")
        for _ in range(2):
            page.locator("#instruction-next").tap()
            wait_until(lambda n=_ + 2: str(n) in page.locator("#day .label").inner_text(), "the next screen")
        page.locator("#instruction-next").tap()

        tap_stage(page, "comprehension")
        page.locator(".day-choice[data-choice='1']").tap()  # wrong
        page.locator(".day-send").tap()
        page.locator(".day-feedback").wait_for(state="visible")
        assert study.comprehension[0].feedback[lang] in page.locator(".day-feedback").inner_text()
        shot(page, f"{lang}-3-comprehension-feedback")
        page.locator(".day-choice[data-choice='2']").tap()  # right
        page.locator(".day-send").tap()

        tap_stage(page, "survey_before")
        page.locator(".day-number").fill("12")
        shot(page, f"{lang}-4-questionnaire-before")
        page.locator(".day-send").tap()
        page.locator("#day").wait_for(state="hidden")

        assert console.act("console_start")["ok"]
        page.get_by_text(words["practice"]).wait_for()
        page.locator("#chooser").wait_for(state="visible")
        shot(page, f"{lang}-5-practice")
        page.locator("#more").tap()
        page.locator("#confirm").tap()
        wait_until(lambda: server.live.state.groups[0].waiting, "the practice round to resolve alone")
        assert server.live.state.groups[0].practice_sources[0] == ("phone", "absent")
        for _ in range(2):  # two paid blocks of two rounds
            assert console.act("console_open_block", {"group": 1})["ok"]
            for round_number in (1, 2):
                wait_until(lambda n=round_number: f" {n} " in page.locator("#seat-line").inner_text()
                           and page.locator("#chooser").is_visible(), "the round's chooser")
                assert not page.get_by_text(words["practice"]).is_visible()
                for _ in range(3):
                    page.locator("#more").tap()
                page.locator("#confirm").tap()
                wait_until(lambda n=round_number: server.live.state.groups[0].outcomes
                           and server.live.state.groups[0].outcomes[-1].round == n
                           and not server.live.state.groups[0].pending, "the round to resolve")
        wait_until(lambda: server.live.state.status == "ended", "the session to end")

        tap_stage(page, "risk")
        shot(page, f"{lang}-6-risk")
        page.locator(".day-choice[data-choice='3']").tap()
        page.locator(".day-send").tap()

        tap_stage(page, "survey_after")
        page.locator(".day-choice[data-choice='4']").tap()
        shot(page, f"{lang}-7-scale")
        page.locator(".day-send").tap()
        wait_until(lambda: page.locator("#day .day-choice").count() == 3, "the multiple-choice item")
        page.locator(".day-choice[data-choice='1']").tap()
        page.locator(".day-choice[data-choice='3']").tap()
        page.locator(".day-send").tap()
        page.locator(".day-text-answer").wait_for(state="visible")
        page.locator(".day-text-answer").fill("ok")
        page.locator(".day-send").tap()

        tap_stage(page, "end")
        shot(page, f"{lang}-8-end")
        # Hand-computed: 4 paid rounds x 3 bundles = 12 points -> 20 + 24 = 44 -> 45 marks;
        # envelope 3 is [6, 18] points: 12 -> 15 (low) or 36 -> 40 (high) marks.
        outcome = server.live.state.day.seats[(0, 0)].risk[1]
        expected = 45 + (40 if outcome == "high" else 15)
        assert page.locator("#day-total").inner_text() == f"{expected} marks"
        if words["over"]:
            page.get_by_text(words["over"]).wait_for()
        assert other.latest()["field_day"]["stage"] == "declined"
        assert other.latest()["field_day"]["end"]["total"] == "20"
    finally:
        page.close()
        other.close()
        console.close()



@pytest.mark.parametrize("lang", ["en", "es", "fr"])
def test_console_shows_consent_stuck_seats_and_leads_the_instructions(start_server, browser, tmp_path, lang):
    study = small_day(tmp_path)
    server = start_server(study)
    agreeing = connect_phone(server.url, server.key(0, 0).secret, device="device-agrees")
    declining = connect_phone(server.url, server.key(0, 1).secret, device="device-declines")
    for phone, agree in ((agreeing, True), (declining, False)):
        assert phone.client.call("consent", {"agree": agree, "language": "en", "text_sha256":
                                             text_sha256(study.consent.text["en"])}, timeout=20)["ok"]
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    page = context.new_page()
    try:
        page.goto(f"{server.url}/console?lang={lang}")
        page.locator("#pin").fill(server.pin)
        page.locator("button[type=submit]").first.click()
        page.locator("#day-panel").wait_for(state="visible")
        lead = page.locator(".lead-next")
        lead.click()  # the facilitator shows screen 1, then screen 2, on every consenting phone
        wait_until(lambda: server.live.state.day.led_step.get(0) == 0, "the first led screen")
        lead.click()
        shown = agreeing.wait_for(lambda s: (s["field_day"]["instruction"] or {}).get("step") == 1,
                                  "screen 2 on the phone")
        assert shown["field_day"]["instruction"]["led"] is True
        assert agreeing.client.call("instruction_step", {"step": 3}, timeout=20)["ok"]
        assert agreeing.client.call("comprehension_answer", {"question": "what-grows", "choice": 1},
                                    timeout=20)["ok"]
        stuck = page.locator("#day-seats tr[data-seat='G01-1'] .stuck")
        stuck.wait_for(state="visible")
        assert "what-grows" in stuck.inner_text() and "1" in stuck.inner_text()
        declined = page.locator("#day-seats tr[data-seat='G01-2']").inner_text()
        words = {"en": "declined", "es": "rechazado", "fr": "refusé"}[lang]
        assert words in declined
        SHOTS.mkdir(parents=True, exist_ok=True)
        page.locator("#day-panel").evaluate("panel => panel.scrollIntoView()")
        page.screenshot(path=str(SHOTS / f"{lang}-console-day-1280x800.png"))
        page.locator("#cautions-read").check()
        page.locator("#start").click()
        practice = {"en": "Practice round: pays nothing", "es": "Ronda de práctica: no paga nada",
                    "fr": "Tour d'essai : ne rapporte rien"}[lang]
        page.locator("#groups .group .notice", has_text=practice).wait_for()
        page.locator("#groups").evaluate("groups => groups.scrollIntoView()")
        page.screenshot(path=str(SHOTS / f"{lang}-console-practice-1280x800.png"))
    finally:
        context.close()
        agreeing.close()
        declining.close()
