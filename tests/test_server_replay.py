"""Replaying the event log: pacing rules and refusals, without any server or database."""

from __future__ import annotations

import pytest

from ebbtide.exports.tables import decision_rows
from ebbtide.game_logic.errors import Refused
from ebbtide.game_logic.phone_snapshot import phone_snapshot
from ebbtide.game_logic.rounds import resolve, start_block
from ebbtide.game_logic.seeding import round_rng
from ebbtide.game_logic.session_fold import SessionState

SEED = 11


def harvest(group, seat, h, block=1, round_number=1, source="phone"):
    return {"group": group, "seat": seat, "block": block, "round": round_number, "harvest": h,
            "source": source}


class Log:
    """Checks and applies events the way LiveSession does, numbering them."""

    def __init__(self, study):
        self.state = SessionState.new(study, SEED, "test-session")
        self.seq = 0

    def __call__(self, kind, body=None, decision_id=None):
        body = body or {}
        self.state.check(kind, body)
        self.seq += 1
        return self.state.apply(kind, body, decision_id, self.seq)


@pytest.fixture
def log(demo_study):
    return Log(demo_study)


def test_round_resolves_when_every_seat_decided_exactly_as_resolve_does(log, demo_study):
    log("session_started")
    assert log("harvest_submitted", harvest(0, 0, 7)) == []
    (outcome,) = log("harvest_submitted", harvest(0, 1, 4))
    _, expected = resolve(demo_study, start_block(demo_study, SEED, 0, 0), [7, 4], round_rng(SEED, 0, 0, 1))
    assert outcome == expected


@pytest.mark.parametrize(
    ("setup", "body", "code"),
    [
        ([], harvest(0, 0, 3), "not_started"),
        (["session_started", "session_paused"], harvest(0, 0, 3), "paused"),
        (["session_started", "session_ended"], harvest(0, 0, 3), "session_over"),
        (["session_started"], harvest(0, 0, 16), "invalid_harvest"),
        (["session_started"], harvest(0, 0, -1), "invalid_harvest"),
        (["session_started"], harvest(0, 0, 3, round_number=2), "wrong_round"),
        (["session_started"], harvest(5, 0, 3), "unknown_group"),
        (["session_started"], harvest(0, 2, 3), "unknown_seat"),
    ],
)
def test_refused_harvest_changes_nothing(log, setup, body, code):
    for kind in setup:
        log(kind)
    before = (log.state.seq, log.state.status, dict(log.state.groups[0].pending))
    with pytest.raises(Refused) as refusal:
        log.state.check("harvest_submitted", body)
    assert refusal.value.code == code and len(refusal.value.message) > 20
    assert (log.state.seq, log.state.status, dict(log.state.groups[0].pending)) == before


def test_second_decision_of_a_seat_in_one_round_is_refused(log):
    log("session_started")
    log("harvest_submitted", harvest(0, 0, 3))
    with pytest.raises(Refused, match="already decided"):
        log.state.check("harvest_submitted", harvest(0, 0, 5))


def test_closed_round_records_missing_seats_as_no_decision_not_a_console_zero(log, demo_study):
    log("session_started")
    log("harvest_submitted", harvest(1, 1, 6))
    (outcome,) = log("round_closed", {"group": 1, "block": 1, "round": 1})
    assert outcome.asked == (0, 6)  # the seat takes nothing...
    assert log.state.groups[1].sources == [("closed", "phone")]  # ...but nobody typed a 0
    rows = decision_rows(demo_study, "s", outcome, log.state.groups[1].sources[0])
    assert [(r["harvest_asked"], r["source"]) for r in rows] == [("", "closed"), (6, "phone")]
    from test_phone_snapshot import EnglishPainter

    def snapshot(seat):
        return phone_snapshot(log.state, 1, seat, language="en", talk_remaining=None,
                              painter=EnglishPainter())

    assert snapshot(0).missed_last_round is True
    assert snapshot(1).missed_last_round is False


def test_block_waits_for_the_facilitator_then_opens(log, demo_study):
    log("session_started")
    for k in range(1, demo_study.blocks[0].rounds + 1):
        log("harvest_submitted", harvest(0, 0, 2, round_number=k))
        log("harvest_submitted", harvest(0, 1, 2, round_number=k))
    group = log.state.groups[0]
    assert group.waiting and log.state.groups[1].state.round == 0  # the other group is untouched
    with pytest.raises(Refused, match="block 1 is over"):
        log.state.check("harvest_submitted", harvest(0, 0, 2, round_number=6))
    log("block_opened", {"group": 0})
    assert group.state.block == 1 and not group.waiting
    with pytest.raises(Refused, match="still playing"):
        log.state.check("block_opened", {"group": 0})


def test_session_ends_by_itself_after_every_group_played_the_last_block(log, demo_study):
    log("session_started")
    for g in range(2):
        for b in range(len(demo_study.blocks)):
            if b:
                log("block_opened", {"group": g})
            for k in range(1, demo_study.blocks[b].rounds + 1):
                log("round_closed", {"group": g, "block": b + 1, "round": k})
    assert log.state.status == "ended"
