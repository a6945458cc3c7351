"""The field day in the core: study sections, the stage fold, practice, absent seats, money."""

from __future__ import annotations

import hashlib
from decimal import Decimal

import pytest
from scipy.stats import binomtest

from ebbtide.game_logic.errors import Refused, StudyError
from ebbtide.game_logic.field_day import seat_money, text_sha256
from ebbtide.game_logic.field_day_spec import missing_media
from ebbtide.game_logic.field_day_view import field_day_screen
from ebbtide.game_logic.session_fold import SessionState
from ebbtide.game_logic.study import load_study, parse_study
from ebbtide.server.resources import data_folder

EXAMPLE = data_folder("examples") / "saltmarsh-day"

DAY = """
[session]
id = "day-test"
title = "Test marsh"
languages = ["en", "fr"]

[groups]
count = 1
seats_per_group = 3

[threshold]
rule = "fixed"
value = 30

[[blocks]]
name = "only"
rounds = 2

[payment]
points_per_unit = 1
exchange_rate = 2
show_up_fee = 20
round_up_to = 5

[consent]
on_decline = "{on_decline}"
text = {{ en = "Agree?", fr = "D'accord ?" }}

[[instructions]]
text = {{ en = "Step one", fr = "Étape un" }}
sound = {{ en = "sounds/one-en.wav" }}

[[comprehension]]
id = "q1"
text = {{ en = "Two plus two?", fr = "Deux plus deux ?" }}
choices = [{{ en = "3", fr = "3" }}, {{ en = "4", fr = "4" }}]
answer = 2
feedback = {{ en = "Count again", fr = "Recomptez" }}

[practice]
rounds = {practice}

[[questionnaires]]
id = "after"
when = "after"
[[questionnaires.items]]
id = "years"
kind = "number"
min = 0
max = 80
text = {{ en = "Years?", fr = "Années ?" }}

[risk_task]
gambles = [[6, 6], [4, 12], [0, 18]]
text = {{ en = "Pick one", fr = "Choisissez" }}
"""


def day_study(on_decline: str = "absent", practice: int = 1):
    return parse_study(DAY.format(on_decline=on_decline, practice=practice))


def consent(state: SessionState, seat: int, agree: bool, language: str = "en") -> None:
    text = state.study.consent.text[language]
    body = {"group": 0, "seat": seat, "agree": agree, "language": language, "text_sha256": text_sha256(text)}
    state.check("consent_answered", body)
    state.apply("consent_answered", body, None, state.seq + 1)


def event(state: SessionState, kind: str, **body) -> None:
    state.check(kind, body)
    state.apply(kind, body, body.get("decision_id"), state.seq + 1)


def test_example_study_folder_is_valid_and_complete():
    study = load_study(EXAMPLE)
    assert study.consent is not None and study.risk_task is not None
    assert missing_media(study, study.folder) == []


def test_missing_language_is_one_clear_line():
    text = DAY.format(on_decline="absent", practice=1).replace(', fr = "Recomptez"', "")
    with pytest.raises(StudyError) as caught:
        parse_study(text)
    assert any("comprehension.q1.feedback: no text in fr" in p for p in caught.value.problems)


def test_unknown_key_in_a_section_is_refused():
    text = DAY.format(on_decline="absent", practice=1).replace("[practice]", "[practice]\nround = 2")
    with pytest.raises(StudyError) as caught:
        parse_study(text)
    assert any("practice.round: unknown key" in p for p in caught.value.problems)


def test_missing_sound_file_is_listed(tmp_path):
    (tmp_path / "study.toml").write_text(DAY.format(on_decline="absent", practice=1), encoding="utf-8")
    study = load_study(tmp_path)
    assert missing_media(study, study.folder) == ["sounds/one-en.wav"]
    (tmp_path / "sounds").mkdir()
    (tmp_path / "sounds" / "one-en.wav").write_bytes(b"RIFF")
    assert missing_media(study, study.folder) == []


def test_consent_hash_is_sha256():
    # FIPS 180-2, appendix B.1: SHA-256("abc").
    assert text_sha256("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert text_sha256("D'accord ?") == hashlib.sha256(b"D'accord ?").hexdigest()


def test_stages_in_order_with_a_second_try():
    state = SessionState.new(day_study(), 7, "s")
    assert state.seat_stage(0, 0) == "consent"
    with pytest.raises(Refused) as caught:
        event(state, "consent_answered", group=0, seat=0, agree=True, language="en", text_sha256="0" * 64)
    assert caught.value.code == "stale_text"
    consent(state, 0, True, "fr")
    assert state.day.seats[(0, 0)].consents[0]["text_sha256"] == text_sha256("D'accord ?")
    assert state.seat_stage(0, 0) == "instructions"
    event(state, "instruction_step", group=0, seat=0, step=1)
    assert state.seat_stage(0, 0) == "comprehension"
    event(state, "comprehension_answered", group=0, seat=0, question="q1", choice=1)
    screen = field_day_screen(state, 0, 0, "fr")
    assert screen.question.feedback == "Recomptez" and screen.question.wrong_tries == 1
    assert "answer" not in screen.question.model_dump()  # the right answer never reaches a phone
    event(state, "comprehension_answered", group=0, seat=0, question="q1", choice=2)
    assert state.seat_stage(0, 0) == "game"
    assert [right for _, right, _ in state.day.seats[(0, 0)].attempts["q1"]] == [False, True]


def test_a_forked_version_keeps_its_field_day_when_the_fork_moves_on():
    # Reference: the fold of exactly the events up to the version's seq (as tests/test_session_versions.py).
    version = SessionState.new(day_study(), 7, "s")
    consent(version, 0, True)
    draft = version.fork()
    consent(draft, 1, False)
    event(draft, "instruction_step", group=0, seat=0, step=1)
    event(draft, "instructions_led", group=0, step=1)
    reference = SessionState.new(day_study(), 7, "s")
    consent(reference, 0, True)
    assert version.day.seats == reference.day.seats and version.day.led_step == reference.day.led_step
    assert draft.day.seats[(0, 1)].consent == "declined" and draft.day.seats[(0, 0)].step == 1


def play_round(state: SessionState, practice: bool, block: int, round_number: int, harvests: dict[int, int]):
    for seat, harvest in harvests.items():
        event(state, "harvest_submitted", group=0, seat=seat, block=block, round=round_number,
              harvest=harvest, source="phone", practice=practice,
              decision_id=f"d{seat}-{practice}-{round_number}")


def test_absent_seat_plays_no_round_and_is_paid_the_show_up_fee():
    state = SessionState.new(day_study("absent"), 7, "s")
    consent(state, 0, True)
    consent(state, 1, True)
    consent(state, 2, False)
    assert state.seat_stage(0, 2) == "declined"
    event(state, "session_started")
    with pytest.raises(Refused) as caught:
        play_round(state, False, 1, 1, {0: 3})  # practice comes first
    assert caught.value.code == "wrong_round"
    play_round(state, True, 1, 1, {0: 9, 1: 9})  # the round resolves without seat 3
    progress = state.groups[0]
    assert progress.practice_sources[0] == ("phone", "phone", "absent")
    assert progress.units == [0, 0, 0]  # practice pays nothing
    assert progress.waiting
    event(state, "block_opened", group=0)
    assert progress.state.stock == state.study.resource.initial_stock  # own stock: the game's is untouched
    with pytest.raises(Refused) as caught:
        event(state, "harvest_submitted", group=0, seat=2, block=1, round=1, harvest=1, source="console")
    assert caught.value.code == "seat_absent"
    play_round(state, False, 1, 1, {0: 5, 1: 4})
    play_round(state, False, 1, 2, {0: 8, 1: 0})
    assert progress.sources[0] == ("phone", "phone", "absent")
    # Hand-computed (payment: 1 point a unit, 2 marks a point, fee 20, rounded up to 5):
    # seat 1 took 13 -> 20 + 26 = 46 -> 50; seat 3 declined -> the fee, 20, on its own line.
    money = [seat_money(state.study, progress.units[s], state.day.seats[(0, s)]) for s in range(3)]
    assert money[0].game.cash == Decimal(50)
    assert (money[2].game.cash, money[2].declined_cash, money[2].total) == (0, Decimal(20), Decimal(20))


def test_replacement_consents_afresh_and_both_are_paid():
    state = SessionState.new(day_study("replacement", practice=0), 7, "s")
    consent(state, 0, False)
    assert state.seat_stage(0, 0) == "replace"
    consent(state, 0, True, "fr")
    assert state.seat_stage(0, 0) == "instructions"
    money = seat_money(state.study, 0, state.day.seats[(0, 0)])
    # Hand-computed: the new person's fee 20 plus the first person's fee 20.
    assert (money.game.cash, money.declined_cash, money.total) == (Decimal(20), Decimal(20), Decimal(40))


def test_risk_task_pays_its_own_line():
    state = SessionState.new(day_study(practice=0), 7, "s")
    for seat in range(3):
        consent(state, seat, True)
        event(state, "instruction_step", group=0, seat=seat, step=1)
        event(state, "comprehension_answered", group=0, seat=seat, question="q1", choice=2)
    event(state, "session_ended")
    assert state.seat_stage(0, 0) == "risk"
    with pytest.raises(Refused) as caught:
        event(state, "risk_chosen", group=0, seat=0, gamble=4)
    assert caught.value.code == "invalid_choice"
    event(state, "risk_chosen", group=0, seat=0, gamble=2)
    gamble, outcome, _ = state.day.seats[(0, 0)].risk
    money = seat_money(state.study, 0, state.day.seats[(0, 0)])
    # Hand-computed: gamble 2 is [4, 12] points at 2 marks a point, rounded up to 5:
    # low 4 -> 8 -> 10, high 12 -> 24 -> 25; the game line is the fee, 20.
    assert money.risk_cash == (Decimal(25) if outcome == "high" else Decimal(10))
    assert money.total == Decimal(20) + money.risk_cash
    assert state.seat_stage(0, 0) == "survey_after"
    with pytest.raises(Refused) as caught:
        event(state, "survey_answered", group=0, seat=0, questionnaire="after", item="years", answer=81)
    assert caught.value.code == "invalid_answer" and "0 to 80" in caught.value.message
    event(state, "survey_answered", group=0, seat=0, questionnaire="after", item="years", answer=12)
    assert state.seat_stage(0, 0) == "end"
    screen = field_day_screen(state, 0, 0, "en").end
    assert [line.kind for line in screen.lines] == ["game", "risk"]


def test_risk_draw_is_a_fair_coin_across_seats():
    # Eckel & Grossman (2002): each gamble pays its low or high amount with probability 1/2.
    study = day_study(practice=0)
    highs = 0
    trials = 600
    for seed in range(trials):
        state = SessionState.new(study, seed, "s")
        consent(state, 0, True)
        event(state, "instruction_step", group=0, seat=0, step=1)
        event(state, "comprehension_answered", group=0, seat=0, question="q1", choice=2)
        event(state, "session_ended")
        event(state, "risk_chosen", group=0, seat=0, gamble=3)
        highs += state.day.seats[(0, 0)].risk[1] == "high"
    # scipy's exact binomial test: a fair coin is not rejected at the 0.1% level.
    assert binomtest(highs, trials, 0.5).pvalue > 0.001


def test_closing_a_practice_round_gives_missing_seats_nothing_and_pays_nothing():
    state = SessionState.new(day_study("absent", practice=2), 7, "s")
    for seat in range(3):
        consent(state, seat, True)
    event(state, "session_started")
    play_round(state, True, 1, 1, {0: 4})
    event(state, "round_closed", group=0, block=1, round=1)  # seats 2 and 3 take 0
    event(state, "round_closed", group=0, block=1, round=2)  # the second practice round
    progress = state.groups[0]
    assert [o.taken for o in progress.practice_outcomes] == [(4, 0, 0), (0, 0, 0)]
    # Seats that had not decided when the round was closed are recorded as closed (it took 0).
    assert progress.practice_sources[0] == ("phone", "closed", "closed")
    assert progress.waiting and progress.units == [0, 0, 0]
