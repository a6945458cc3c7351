"""One error vocabulary: each rule is checked once in the core and answers with one code everywhere.

Expected ranges come from the study file (examples/brackwater-demo.toml: 2 groups
of 2 seats, max_harvest = 15), read here as text, not from the code under test.
"""

from __future__ import annotations

import re

import pytest
from conftest import DEMO, connect_console, connect_phone

from ebbtide.game_logic.errors import (
    EbbtideError,
    InvalidHarvest,
    Refused,
    RoundClosed,
    UnknownGroup,
)
from ebbtide.game_logic.rounds import check_harvests, resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.session_fold import SessionState
from ebbtide.game_logic.study import load_study

STUDY = load_study(DEMO)
DEMO_TEXT = DEMO.read_text(encoding="utf-8")
MAX_HARVEST = int(re.search(r"^max_harvest = (\d+)$", DEMO_TEXT, re.M).group(1))
GROUPS = int(re.search(r"^\[groups\]\ncount = (\d+)$", DEMO_TEXT, re.M).group(1))


def running_state() -> SessionState:
    state = SessionState.new(STUDY, 5, "vocabulary")
    state.apply("session_started", {}, None, 1)
    return state


def harvest_body(harvest, seat: int = 0, group: int = 0, round_number: int = 1) -> dict:
    return {"group": group, "seat": seat, "block": 1, "round": round_number, "harvest": harvest,
            "source": "phone"}


@pytest.mark.parametrize("bad", [-1, MAX_HARVEST + 1, 2.5, True, "3", None])
def test_the_harvest_rule_gives_one_error_from_the_fold_and_from_resolve(bad):
    with pytest.raises(InvalidHarvest) as from_fold:
        running_state().check("harvest_submitted", harvest_body(bad))
    with pytest.raises(InvalidHarvest) as from_resolve:
        resolve(STUDY, start_block(STUDY, 5, 0, 0), [bad, 0], round_rng(5, 0, 0, 1))
    assert from_fold.value.code == from_resolve.value.code == "invalid_harvest"
    assert from_fold.value.message == from_resolve.value.message
    assert f"from 0 to {MAX_HARVEST}" in from_fold.value.message


def test_the_harvest_rule_accepts_both_ends_of_the_range():
    assert check_harvests(STUDY, [0, MAX_HARVEST]) == (0, MAX_HARVEST)
    running_state().check("harvest_submitted", harvest_body(MAX_HARVEST))


@pytest.mark.parametrize(("events", "code"), [
    ([], "not_started"),
    ([("session_started", {}), ("session_ended", {})], "session_over"),
])
def test_a_closed_round_has_one_named_error(events, code):
    state = SessionState.new(STUDY, 5, "closed")
    for seq, (kind, body) in enumerate(events, start=1):
        state.apply(kind, body, None, seq)
    with pytest.raises(RoundClosed) as closed:
        state.check("harvest_submitted", harvest_body(3))
    assert closed.value.code == code
    assert not state.round_is_open(0)


def test_rounds_already_played_or_not_yet_open_are_told_apart():
    state = running_state()
    with pytest.raises(RoundClosed) as ahead:
        state.check("harvest_submitted", harvest_body(3, round_number=2))
    assert ahead.value.code == "wrong_round"
    for seat in range(STUDY.seats):
        state.apply("harvest_submitted", harvest_body(1, seat=seat), f"d{seat}", 2 + seat)
    with pytest.raises(RoundClosed) as behind:
        state.check("harvest_submitted", harvest_body(3))
    assert behind.value.code == "round_resolved"


def test_every_named_error_is_a_refusal_with_a_stable_code():
    for error in (InvalidHarvest("x"), RoundClosed("block_over", "x"), UnknownGroup("x")):
        assert isinstance(error, Refused) and isinstance(error, EbbtideError)
        assert error.as_event("harvest")["code"] == error.code and error.code != "error"
    with pytest.raises(UnknownGroup):
        running_state().group(GROUPS)


# The group range is checked once (SessionState.group); each console event that names a
# group must answer exactly the same refusal for a group the study does not have.
GROUP_EVENTS = [
    ("console_close_round", {}),
    ("console_open_block", {}),
    ("console_talk_extend", {}),
    ("console_pause_group", {}),
    ("console_release_seat", {"seat": 1}),
    ("console_enter", {"decision_id": "enter-nowhere", "seat": 1, "block": 1, "round": 1, "harvest": 1}),
]


def test_every_console_event_answers_an_unknown_group_the_same_way(start_server, demo_study):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    try:
        console.act("console_start")
        answers = [console.act(event, {"group": GROUPS + 1, **extra}) for event, extra in GROUP_EVENTS]
        assert {a["code"] for a in answers} == {"unknown_group"}
        assert {a["message"] for a in answers} == {f"group {GROUPS + 1} does not exist; allowed: 1..{GROUPS}"}
        assert len(server.live.state.groups) == GROUPS
    finally:
        console.close()


def test_a_phone_and_the_core_get_the_same_words_for_a_bad_harvest(start_server, demo_study):
    server = start_server(demo_study)
    console = connect_console(server.url, server.pin)
    phone = connect_phone(server.url, server.key(0, 0).secret)
    try:
        console.act("console_start")
        answer = phone.harvest("too-many-units", 1, 1, MAX_HARVEST + 1)
        with pytest.raises(InvalidHarvest) as core:
            running_state().check("harvest_submitted", harvest_body(MAX_HARVEST + 1))
        assert answer == core.value.as_event("harvest")
        assert console.act("console_close_round", {"group": 1})["ok"]  # the round was open, untouched
    finally:
        phone.close()
        console.close()
