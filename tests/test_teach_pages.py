"""Debrief, reveal, teaching view and talk pauses on a real server with real Socket.IO phones.

The hidden-information checks here capture everything the phones receive over their
sockets and the phone pages' HTML, for every treatment, before the reveal.
"""

from __future__ import annotations

import json

import pytest
import requests
from conftest import connect_console, connect_every_seat, console_login, wait_until
from studies import RECOVERY, THRESHOLD, TREATMENTS, teach_study

from ebbtide.game_logic.session_fold import replay

LEVEL_SHOWN = f"{THRESHOLD:.1f}"
HIDDEN = (f"{THRESHOLD:.2f}", f"{RECOVERY:.1f}")


@pytest.fixture
def session(start_server):
    server = start_server(teach_study(talk_seconds=30), seed=11)
    console = connect_console(server.url, server.pin)
    phones = connect_every_seat(server)
    yield server, console, phones
    for phone in phones.values():
        phone.close()
    console.close()


def _play_to_the_end(server, console, phones):
    console.act("console_start")
    for g in range(6):
        for s in range(2):
            assert phones[(g, s)].harvest(f"b1-r1-{g}-{s}", 1, 1, 6 + s)["ok"]
    console.act("console_close_round", {"group": None})
    console.act("console_open_block", {"group": None})
    console.act("console_close_round", {"group": None})  # allowed while the groups talk
    console.act("console_close_round", {"group": None})
    wait_until(lambda: server.live.state.status == "ended", "the session to end")


def test_phones_of_every_treatment_never_receive_the_threshold_before_the_reveal(session):
    server, console, phones = session
    _play_to_the_end(server, console, phones)
    pages = {g: requests.get(f"{server.url}/s/{server.key(g, 0).secret}", timeout=5).text for g in range(6)}
    for g, treatment in enumerate(TREATMENTS):
        received = phones[(g, 0)].wire_text() + phones[(g, 1)].wire_text() + pages[g]
        assert not any(hidden in received for hidden in HIDDEN), treatment
        assert '"debrief": null' in received  # the slot exists, empty until the reveal
        if treatment not in ("exact", "risk"):
            assert LEVEL_SHOWN not in received, treatment
    # Sanity check of the capture itself: the exact phones did receive the level.
    assert LEVEL_SHOWN in phones[(3, 0)].wire_text()


def test_signal_phones_get_words_and_the_console_gets_the_hidden_parts(session):
    server, console, phones = session
    console.act("console_start")
    danger = phones[(5, 0)].latest()["view"]["danger"]
    assert set(danger) == {"kind", "band", "trend", "reasons"}  # no score, no parts
    group = wait_until(lambda: console.states and console.states[-1]["groups"][5], "a console state")
    assert set(group["hidden"]["health"]) >= {"score", "level", "pace", "slowing"}


def reveal(server, http):
    """The debrief page's reveal button: a console form with its token."""
    return http.post(server.url + "/console/debrief/reveal", data={"form_token": http.form_token}, timeout=5)


def test_debrief_pages_need_the_console_pin(session):
    server, _, _ = session
    for path in ("/console/debrief", "/console/debrief/handout/1", "/teach"):
        response = requests.get(server.url + path, allow_redirects=False, timeout=5)
        assert response.status_code == 302 and "/console/login" in response.headers["Location"], path
    response = requests.post(server.url + "/console/debrief/reveal", allow_redirects=False, timeout=5)
    assert response.status_code == 302
    assert not server.live.state.debrief_revealed


def test_reveal_while_the_session_runs_is_refused_and_changes_nothing(session):
    server, console, phones = session
    console.act("console_start")
    http = console_login(server.url, server.pin)
    events_before = len(server.live.store.events(server.live.session_id))
    response = reveal(server, http)
    assert response.status_code == 409
    assert "only after the session has ended" in response.text
    assert len(server.live.store.events(server.live.session_id)) == events_before
    assert phones[(0, 0)].latest()["debrief"] is None


def test_reveal_after_the_end_is_logged_and_shows_each_phone_its_own_group(session):
    server, console, phones = session
    _play_to_the_end(server, console, phones)
    http = console_login(server.url, server.pin)
    assert reveal(server, http).ok
    phone = phones[(2, 1)]
    debrief = phone.wait_for(lambda s: s["debrief"], "a revealed debrief")["debrief"]
    assert [b["threshold"] for b in debrief["blocks"]] == [round(THRESHOLD, 1)] * 2
    assert "teaching device" in debrief["caution"]
    mine = server.live.state.groups[2].outcomes
    assert str(sum(o.total_taken for o in mine if o.block == 0)) in debrief["blocks"][0]["sentence"]
    kinds = [e.kind for e in server.live.store.events(server.live.session_id)]
    assert kinds.count("debrief_revealed") == 1
    # A restart folds the same log: the reveal is remembered.
    live = server.live
    rebuilt = replay(live.study, live.record.seed, live.session_id, live.store.events(live.session_id))
    assert rebuilt.debrief_revealed
    again = reveal(server, http)
    assert again.status_code == 409 and "already been revealed" in again.text


def test_handout_for_an_unknown_group_says_which_groups_exist(session):
    server, _, _ = session
    http = console_login(server.url, server.pin)
    response = http.get(server.url + "/console/debrief/handout/9", timeout=5)
    assert response.status_code == 404 and "groups run from 1 to 6" in response.text


def test_teaching_view_is_refused_with_a_reason_when_the_study_leaves_it_off(start_server):
    server = start_server(teach_study(teaching_view=False))
    http = console_login(server.url, server.pin)
    response = http.get(server.url + "/teach", timeout=5)
    assert response.status_code == 403
    assert "session.teaching_view = true" in response.text and "changes the treatment" in response.text
    assert http.get(server.url + "/teach/gauges.json", timeout=5).status_code == 403
    assert 'href="/teach"' not in http.get(server.url + "/console", timeout=5).text


def test_teaching_view_gauges_carry_no_seat_codes_and_no_hidden_threshold(session):
    server, console, _ = session
    console.act("console_start")
    http = console_login(server.url, server.pin)
    assert 'href="/teach"' in http.get(server.url + "/console", timeout=5).text  # linked when on
    data = http.get(server.url + "/teach/gauges.json", timeout=5).json()
    text = json.dumps(data)
    assert len(data["groups"]) == 6
    assert not any(k.short_code in text or k.secret in text for k in server.keys)
    assert not any(hidden in text for hidden in HIDDEN)
    none_group = data["groups"][0]["svg"]
    assert LEVEL_SHOWN not in none_group


def test_harvest_during_a_talk_pause_is_refused_until_the_console_ends_it(session):
    server, console, phones = session
    console.act("console_start")
    console.act("console_close_round", {"group": None})
    console.act("console_close_round", {"group": None})
    console.act("console_open_block", {"group": None})
    snapshot = phones[(0, 0)].wait_for(lambda s: s["view"]["block"] == 2, "block 2")
    assert 0 < snapshot["talk_remaining"] <= 30
    refused = phones[(0, 0)].harvest("talk-early", 2, 1, 3)
    assert refused["code"] == "talking"
    assert console.act("console_talk_extend", {"group": 1})["remaining"] > 30
    assert console.act("console_talk_end", {"group": 1})["ok"]
    assert phones[(0, 0)].harvest("talk-later", 2, 1, 3)["ok"]
    # The refused attempt stored nothing: one decision for that seat in that round.
    harvests = [e for e in server.live.store.events(server.live.session_id)
                if e.kind == "harvest_submitted" and e.body["group"] == 0 and e.body["block"] == 2]
    assert len(harvests) == 1


def test_talk_controls_outside_a_talk_round_are_refused_with_a_reason(session):
    server, console, _ = session
    console.act("console_start")
    answer = console.act("console_talk_extend", {"group": 1})
    assert answer["ok"] is False and "not in a talk round" in answer["message"]
    assert console.act("console_talk_end", {})["code"] == "unknown_group"


def test_phone_page_speaks_the_language_it_is_asked_for(session):
    server, _, _ = session
    page = requests.get(f"{server.url}/play?lang=es", timeout=5)
    assert 'lang="es"' in page.text and "Entrar al juego" in page.text
    assert phone_strings(page.text)["how_many"] == "¿Cuántos va a tomar?"
    assert 'lang="fr"' in page.text  # the switcher offers the study's other languages
    ignored = requests.get(f"{server.url}/play?lang=de", timeout=5)
    assert phone_strings(ignored.text)["how_many"] == "How many will you take?"


def phone_strings(html: str) -> dict:
    start = html.index('id="phone-strings">') + len('id="phone-strings">')
    return json.loads(html[start:html.index("</script>", start)])
