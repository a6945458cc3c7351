"""Console fall-backs over real sockets: a dead phone, paper slips, a paused group, corrections."""

from __future__ import annotations

import csv
import io
import zipfile

import pytest
import requests
import socketio
from conftest import (
    WAIT_SECONDS,
    connect_console,
    connect_every_seat,
    connect_phone,
    console_login,
    wait_until,
)

from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng


@pytest.fixture
def session(start_server, demo_study):
    server = start_server(demo_study)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    assert console.act("console_start")["ok"]
    yield server, phones, console
    for phone in phones.values():
        phone.close()
    console.close()


def logged(server):
    return server.live.store.events(server.live.session_id)


def enter(console, group, seat, harvest, decision_id, block=1, round_number=1, by="AB"):
    return console.act("console_enter", {"decision_id": decision_id, "group": group, "seat": seat,
                                         "block": block, "round": round_number, "harvest": harvest, "by": by})


def test_console_entry_for_a_dead_phone_is_logged_with_who_and_when_and_exported_as_console(session):
    server, phones, console = session
    assert phones[(0, 0)].harvest("phone-entry-1", 1, 1, 6)["ok"]
    ack = enter(console, 1, 2, 4, "console-entry-1", by="MK")
    assert ack["ok"] and not ack["repeated"]
    event = [e for e in logged(server) if e.decision_id == "console-entry-1"][0]
    assert event.body["source"] == "console" and event.body["by"] == "MK" and event.created_at
    assert server.live.state.groups[0].outcomes[0].asked == (6, 4)
    with console_login(server.url, server.pin) as http:
        content = http.get(f"{server.url}/console/export.zip", timeout=10).content
    archive = zipfile.ZipFile(io.BytesIO(content))
    name = next(n for n in archive.namelist() if n.endswith("decisions.csv"))
    rows = list(csv.DictReader(io.StringIO(archive.read(name).decode("utf-8"))))
    sources = {(r["seat_id"], r["round"]): r["source"] for r in rows if r["group_id"] == "G01"}
    assert sources == {("G01-1", "1"): "phone", ("G01-2", "1"): "console"}


def test_console_entry_resent_with_the_same_id_is_counted_once(session):
    server, _phones, console = session
    assert enter(console, 2, 1, 3, "console-again-1")["ok"]
    again = enter(console, 2, 1, 3, "console-again-1")
    assert again["ok"] and again["repeated"]
    assert [e.decision_id for e in logged(server)].count("console-again-1") == 1


def test_paper_slips_enter_a_whole_group_round_at_once(session, demo_study):
    server, phones, console = session
    ack = console.act("console_slips", {"batch_id": "slips-round-1", "group": 2, "block": 1, "round": 1,
                                        "harvests": [7, 2], "by": "MK"})
    assert ack["ok"] and ack["entered"] == 2
    outcome = server.live.state.groups[1].outcomes[0]
    # Independent check straight from the core: same seed, same harvests.
    _, expected = resolve(demo_study, start_block(demo_study, server.seed, 1, 0), [7, 2],
                          round_rng(server.seed, 1, 0, 1))
    assert outcome == expected and server.live.state.groups[1].sources[0] == ("console", "console")
    snap = phones[(1, 0)].wait_for(lambda s: "last_round" in s["view"], "the round result on the phone")
    assert snap["view"]["last_round"]["asked"] == 7


def test_paper_slips_with_one_bad_value_store_nothing(session):
    server, phones, console = session
    assert phones[(1, 1)].harvest("decided-first", 1, 1, 5)["ok"]
    before = len(logged(server))
    ack = console.act("console_slips", {"batch_id": "slips-bad-01", "group": 2, "block": 1, "round": 1,
                                        "harvests": [3, 4], "by": "MK"})
    assert not ack["ok"] and ack["code"] == "already_decided" and "correction" in ack["message"]
    ack = console.act("console_slips", {"batch_id": "slips-bad-02", "group": 2, "block": 1, "round": 1,
                                        "harvests": [3, 99], "by": "MK"})
    assert not ack["ok"] and ack["code"] == "invalid_harvest" and "seat 2" in ack["message"]
    assert len(logged(server)) == before
    assert console.act("console_slips", {"batch_id": "slips-good-1", "group": 2, "block": 1, "round": 1,
                                         "harvests": [3, None], "by": "MK"})["ok"]
    assert server.live.state.groups[1].outcomes[0].asked == (3, 5)


def test_paused_group_refuses_phones_accepts_the_console_and_resumes(session):
    server, phones, console = session
    assert console.act("console_pause_group", {"group": 1, "by": "MK"})["ok"]
    snap = phones[(0, 0)].wait_for(lambda s: s["status"] == "paused", "the phone to show paused")
    assert snap["status"] == "paused"
    refused = phones[(0, 0)].harvest("while-paused", 1, 1, 4)
    assert refused["code"] == "group_paused" and "resumes" in refused["message"]
    assert phones[(1, 0)].harvest("other-group-ok", 1, 1, 4)["ok"]  # only group 1 waits
    assert enter(console, 1, 2, 3, "console-while-paused")["ok"]
    again = console.act("console_pause_group", {"group": 1})
    assert again["code"] == "already_paused"
    assert console.act("console_resume_group", {"group": 1})["ok"]
    assert phones[(0, 0)].harvest("after-resume", 1, 1, 4)["ok"]
    kinds = [e.kind for e in logged(server)]
    assert kinds.count("group_paused") == 1 and kinds.count("group_resumed") == 1


def test_correction_supersedes_the_entry_while_the_round_is_open(session):
    server, phones, console = session
    assert enter(console, 1, 1, 9, "typo-entry-1")["ok"]
    state = wait_until(lambda: console.states[-1]["groups"][0]["seats"][0]["decided"] and console.states[-1],
                       "the console to see the entry")
    entry = state["groups"][0]["seats"][0]["entry"]
    fixed = console.act("console_correct", {"decision_id": "fix-entry-1", "group": 1, "seat": 1, "block": 1,
                                            "round": 1, "harvest": 2, "supersedes": entry, "by": "MK"})
    assert fixed["ok"]
    stale = console.act("console_correct", {"decision_id": "fix-entry-2", "group": 1, "seat": 1, "block": 1,
                                            "round": 1, "harvest": 3, "supersedes": entry, "by": "MK"})
    assert stale["code"] == "stale_entry"
    assert phones[(0, 1)].harvest("other-seat", 1, 1, 5)["ok"]
    assert server.live.state.groups[0].outcomes[0].asked == (2, 5)
    events = logged(server)
    correction = next(e for e in events if e.kind == "harvest_corrected")
    assert correction.body["supersedes"] == entry and correction.body["by"] == "MK"
    assert any(e.decision_id == "typo-entry-1" for e in events)  # the old entry stays in the log


def test_correction_of_a_resolved_round_is_refused_as_immutable(session):
    server, phones, console = session
    assert phones[(0, 0)].harvest("resolved-a", 1, 1, 4)["ok"]
    assert phones[(0, 1)].harvest("resolved-b", 1, 1, 4)["ok"]
    entry = next(e.id for e in logged(server) if e.decision_id == "resolved-a")
    before = len(logged(server))
    ack = console.act("console_correct", {"decision_id": "too-late-1", "group": 1, "seat": 1, "block": 1,
                                          "round": 1, "harvest": 1, "supersedes": entry, "by": "MK"})
    assert ack["code"] == "round_resolved" and "cannot change" in ack["message"]
    assert len(logged(server)) == before


@pytest.mark.parametrize(
    ("block", "round_number", "group", "code"),
    [(1, 2, 1, "wrong_round"), (2, 1, 1, "wrong_round"), (1, 1, 3, "unknown_group")],
)
def test_console_entry_for_a_round_not_open_or_a_missing_group_is_refused(session, block, round_number,
                                                                         group, code):
    server, _phones, console = session
    before = len(logged(server))
    ack = enter(console, group, 1, 3, "not-open-entry", block=block, round_number=round_number)
    assert ack["code"] == code and ("allowed" in ack["message"] or "open round" in ack["message"])
    assert len(logged(server)) == before


def test_phone_decision_for_a_past_round_is_refused_as_resolved(session):
    server, phones, _console = session
    phones[(0, 0)].harvest("past-round-a", 1, 1, 4)
    phones[(0, 1)].harvest("past-round-b", 1, 1, 4)
    ack = phones[(0, 0)].harvest("past-round-c", 1, 1, 4)
    assert ack["code"] == "round_resolved" and "the open round is block 1, round 2" in ack["message"]


def test_phone_naming_another_seat_is_refused(session):
    server, phones, _console = session
    ack = phones[(0, 0)].client.call("harvest", {"decision_id": "other-seat-1", "block": 1, "round": 1,
                                                 "harvest": 3, "group": 1, "seat": 2}, timeout=WAIT_SECONDS)
    assert ack["code"] == "not_your_seat"
    assert not any(e.decision_id == "other-seat-1" for e in logged(server))


def test_phone_cannot_use_any_console_fall_back(session):
    server, phones, _console = session
    before = len(logged(server))
    for event, body in [
        ("console_enter", {"decision_id": "sneaky-one", "group": 1, "seat": 2, "block": 1, "round": 1,
                           "harvest": 0}),
        ("console_slips", {"batch_id": "sneaky-two", "group": 1, "block": 1, "round": 1, "harvests": [0, 0]}),
        ("console_pause_group", {"group": 1}),
        ("console_release_seat", {"group": 1, "seat": 2}),
        ("console_close_round", {"group": 1}),
    ]:
        assert phones[(0, 0)].client.call(event, body, timeout=WAIT_SECONDS)["code"] == "not_allowed", event
    assert len(logged(server)) == before


def _raw_phone(url, secret, device, fresh, take_over=False):
    """A phone client that records connect errors, seat_released and seat_taken notices."""
    client = socketio.Client(reconnection=False)
    seen = {"errors": [], "released": [], "snapshots": [], "taken": []}
    client.on("connect_error", seen["errors"].append)
    client.on("seat_released", seen["released"].append)
    client.on("seat_taken", seen["taken"].append)
    client.on("snapshot", seen["snapshots"].append)
    client.connect(url, auth={"secret": secret, "device": device, "fresh": fresh, "take_over": take_over},
                   transports=["websocket"], wait_timeout=WAIT_SECONDS)
    return client, seen


def test_a_second_phone_on_a_held_seat_is_told_it_is_in_use_and_changes_nothing(session):
    server, phones, console = session
    before = len(logged(server))
    errors = []
    client = socketio.Client(reconnection=False)
    client.on("connect_error", errors.append)
    with pytest.raises(socketio.exceptions.ConnectionError):
        client.connect(server.url, auth={"secret": server.key(0, 0).secret, "device": "second-device-1",
                                         "fresh": True}, transports=["websocket"], wait_timeout=WAIT_SECONDS)
    assert errors[0]["data"]["code"] == "seat_in_use"
    assert "already in use on another phone" in errors[0]["message"]
    assert len(logged(server)) == before and phones[(0, 0)].client.connected
    # The same phone coming back (a reload while its old connection lingers) is not a second phone.
    again = connect_phone(server.url, server.key(0, 0).secret, device="device-0-0")
    again.close()


def test_second_device_takes_over_shows_on_the_console_and_release_leaves_only_the_card_holder(session):
    server, phones, console = session
    secret = server.key(0, 0).secret
    second, second_seen = _raw_phone(server.url, secret, "second-device-1", fresh=True, take_over=True)
    seat = wait_until(lambda: console.states[-1]["groups"][0]["seats"][0]["devices"] == 2
                      and console.states[-1]["groups"][0]["seats"][0]["online"] == 1
                      and console.states[-1]["groups"][0]["seats"][0], "the console to show two devices")
    assert seat["online"] == 1  # the first phone was let go of, and told why
    wait_until(lambda: not phones[(0, 0)].client.connected, "the first phone to be let go")
    assert any(name == "seat_taken" for name, _ in phones[(0, 0)].received)
    assert console.act("console_release_seat", {"group": 1, "seat": 1, "by": "MK"})["ok"]
    wait_until(lambda: not second.connected, "the second phone to be let go")
    assert second_seen["released"][0]["code"] == "seat_released"
    # The older device comes back from its storage: refused, and told why.
    with pytest.raises(socketio.exceptions.ConnectionError):
        _raw_phone(server.url, secret, "device-0-0", fresh=False)
    # The right phone scans the card again: it holds the seat, with its state.
    back, back_seen = _raw_phone(server.url, secret, "device-0-0", fresh=True)
    try:
        wait_until(lambda: back_seen["snapshots"], "a snapshot after taking the seat back")
        assert back.call("harvest", {"decision_id": "after-release", "block": 1, "round": 1, "harvest": 2},
                         timeout=WAIT_SECONDS)["ok"]
        # The console hears of the reconnect and of the harvest in two states: wait for the latter.
        seat = wait_until(lambda: console.states[-1]["groups"][0]["seats"][0]["devices"] == 1
                          and console.states[-1]["groups"][0]["seats"][0]["decided"]
                          and console.states[-1]["groups"][0]["seats"][0],
                          "one device, decided, after the release")
        assert seat["released"] and seat["decided"]
    finally:
        back.disconnect()
        second.disconnect()
    release = next(e for e in logged(server) if e.kind == "seat_released")
    assert release.body == {"group": 0, "seat": 0, "by": "MK"}


def test_released_device_that_was_offline_is_told_to_scan_the_card(session):
    server, phones, console = session
    phones[(1, 1)].close()
    assert console.act("console_release_seat", {"group": 2, "seat": 2})["ok"]
    client = socketio.Client(reconnection=False)
    errors = []
    client.on("connect_error", errors.append)
    with pytest.raises(socketio.exceptions.ConnectionError):
        client.connect(server.url, auth={"secret": server.key(1, 1).secret, "device": "device-1-1"},
                       transports=["websocket"], wait_timeout=WAIT_SECONDS)
    assert "scan your seat card again" in errors[0]["message"]
    assert errors[0]["data"]["code"] == "seat_released"


def test_release_of_a_seat_nobody_holds_is_refused(session):
    server, phones, console = session
    assert console.act("console_release_seat", {"group": 1, "seat": 1})["ok"]
    again = console.act("console_release_seat", {"group": 1, "seat": 1})
    assert again["code"] == "not_claimed"


def test_phone_http_client_gets_no_console_page_export_or_cards(session):
    server, _phones, _console = session
    for path in ("/console", "/console/cards", "/console/export.zip", "/console/payments",
                 "/console/payments.csv"):
        response = requests.get(f"{server.url}{path}", allow_redirects=False, timeout=5)
        assert response.status_code in (302, 303) and "/console/login" in response.headers["Location"], path
        assert server.keys[0].secret not in response.text


@pytest.mark.parametrize("by", ["", "   "])
def test_console_entries_without_initials_are_refused_and_store_nothing(session, by):
    server, _phones, console = session
    before = len(logged(server))
    for event, body in [
        ("console_enter", {"decision_id": "no-initials-1", "group": 1, "seat": 1, "block": 1, "round": 1,
                           "harvest": 3, "by": by}),
        ("console_slips", {"batch_id": "no-initials-2", "group": 1, "block": 1, "round": 1,
                           "harvests": [1, 2], "by": by}),
        ("console_correct", {"decision_id": "no-initials-3", "group": 1, "seat": 1, "block": 1, "round": 1,
                             "harvest": 3, "supersedes": 1, "by": by}),
    ]:
        ack = console.act(event, body)
        assert ack["code"] == "initials_needed" and "Your initials" in ack["message"], event
    assert len(logged(server)) == before
