"""The phone's snapshot model: the one gate refuses what it does not describe, and every treatment fits it.

The model's guarantees are pydantic's documented ones (pydantic docs, "Models": with
``extra="forbid"`` an unknown key is a validation error; with ``frozen=True`` assigning to
a field raises). These tests check that the gate really uses them, at every level, and
that what the builder makes for each treatment passes through them.
"""

from __future__ import annotations

import json

import pytest
from pydantic import ValidationError
from studies import BASE, make_study

from ebbtide.game_logic.phone_snapshot import DebriefFacts, PhoneSnapshot, PhoneView, phone_snapshot
from ebbtide.game_logic.session_fold import SessionState
from ebbtide.game_logic.study import TREATMENTS, parse_study
from ebbtide.server.pictures.chart import PHONE, stock_path_svg
from ebbtide.server.pictures.gauge import stock_gauge_svg

SEED = 11
THRESHOLD = 'rule = "fixed"\nvalue = 33.7\nrecovery_gap = 15\nflip_probability = 0.35\nshown_range = [20, 50]'


class EnglishPainter:
    """The shell's drawing without an app: the pure gauge and chart with their English defaults."""

    def gauge(self, view: PhoneView) -> str:
        return stock_gauge_svg(view.model_dump(mode="json"), id_prefix="stock")

    def debrief_sentence(self, facts: DebriefFacts, unit: str) -> str:
        return f"Part {facts.part}: {facts.total_taken} {unit} taken."

    def debrief_chart(self, facts: DebriefFacts, capacity: int) -> str:
        drawn = {"block": facts.part - 1, "stock_path": facts.stock_path, "threshold": facts.threshold,
                 "recovery_level": facts.recovery_level, "crossed_round": facts.crossed_round}
        return stock_path_svg(drawn, capacity, facts.degraded_rounds, id_prefix="mine", layout=PHONE)

    def caution(self) -> str:
        return "A teaching device, not a forecast."


def play(study, rounds: int, reveal: bool = False) -> SessionState:
    """Group 1 plays ``rounds`` rounds (invented harvests); optionally the debrief is revealed after."""
    state = SessionState.new(study, SEED, "snapshot-test")
    seq = iter(range(1, 1000))
    state.apply("session_started", {}, None, next(seq))
    for k in range(1, rounds + 1):
        for seat in range(study.seats):
            body = {"group": 0, "seat": seat, "block": 1, "round": k, "harvest": 3 + seat, "source": "phone"}
            state.check("harvest_submitted", body)
            state.apply("harvest_submitted", body, f"d-{k}-{seat}", next(seq))
    if reveal:
        state.apply("session_ended", {}, None, next(seq))
        state.apply("debrief_revealed", {}, None, next(seq))
    return state


def build(state, seat=1, language="en", talk=None) -> PhoneSnapshot:
    return phone_snapshot(state, 0, seat, language=language, talk_remaining=talk, painter=EnglishPainter())


@pytest.mark.parametrize("treatment", TREATMENTS)
@pytest.mark.parametrize("show_others", [False, True])
def test_builder_output_for_every_treatment_is_a_valid_snapshot(treatment, show_others):
    study = make_study(threshold=THRESHOLD, treatment=treatment, show_others=show_others, rounds=2)
    for state in (play(study, 0), play(study, 1), play(study, 2, reveal=True)):
        snapshot = build(state)
        payload = snapshot.payload()
        # Through JSON and back: the payload is exactly the model, no more and no less.
        again = PhoneSnapshot.model_validate(json.loads(json.dumps(payload)))
        assert again.payload() == payload
        assert snapshot.view.danger.kind == treatment
        last = payload["view"].get("last_round")
        assert last is None or ("others" in last) == show_others
        if state.debrief_revealed:
            assert [b.threshold for b in snapshot.debrief.blocks] == [33.7]  # the fixed threshold, revealed
        else:
            assert payload["debrief"] is None
            if treatment not in ("exact", "risk"):
                assert "33.7" not in json.dumps(payload)


def _payload_with(path: tuple, value) -> dict:
    study = make_study(threshold=THRESHOLD, treatment="signal", show_others=True, rounds=2)
    payload = build(play(study, 2, reveal=True)).payload()
    target = payload
    for key in path[:-1]:
        target = target[key]
    target[path[-1]] = value
    return payload


@pytest.mark.parametrize("path", [
    ("threshold",),  # top level
    ("view", "block_name"),  # the researcher's name, were it ever added back
    ("view", "treatment"),
    ("view", "danger", "score"),  # the signal's hidden score
    ("view", "last_round", "flip_draw"),
    ("debrief", "blocks", 0, "name"),
    ("debrief", "blocks", 0, "what_ifs", 0, "stock_path"),
])
def test_the_model_refuses_a_key_it_does_not_describe_at_every_level(path):
    with pytest.raises(ValidationError) as refused:
        PhoneSnapshot.model_validate(_payload_with(path, 1))
    assert refused.value.errors()[0]["type"] == "extra_forbidden"


def test_the_model_refuses_a_danger_kind_outside_the_treatments():
    with pytest.raises(ValidationError):
        PhoneSnapshot.model_validate(_payload_with(("view", "danger", "kind"), "hidden"))


def test_a_built_snapshot_cannot_be_changed():
    snapshot = build(play(make_study(treatment="exact", threshold=THRESHOLD), 1))
    with pytest.raises(ValidationError):
        snapshot.view.danger.level = 10.0
    with pytest.raises(ValidationError):
        snapshot.seq = 0


def test_snapshot_holds_no_hidden_values_and_the_talk_seconds_it_was_given():
    state = play(make_study(treatment="none", threshold=THRESHOLD), 1)
    snapshot = build(state, talk=12.34)
    text = json.dumps(snapshot.payload())
    for hidden in ("threshold", "flip", "regime", "seed", "33.7"):
        assert hidden not in text
    assert snapshot.talk_remaining == 12.3  # one decimal, counted down on the phone


LABELLED = BASE.replace('[groups]', '''languages = ["en", "es", "fr"]

[session.label]
en = "The shore game"
es = "El juego de la orilla"

[groups]''').replace(
    'name = "only"\n',
    'name = "low-threshold-arm"\nlabel = {{ en = "First season", fr = "Première saison" }}\n')


def _labelled(**fields):
    defaults = dict(groups=2, seats=2, initial=80, max_harvest=10, threshold=THRESHOLD, end='rule = "fixed"',
                    treatment="range", rounds=2, show_others="false")
    return parse_study(LABELLED.format(**{**defaults, **fields}))


def test_phones_see_the_block_label_in_their_language_and_never_the_researcher_name():
    study = _labelled()
    state = play(study, 2, reveal=True)
    labels = {lang: build(state, language=lang) for lang in ("en", "es", "fr")}
    assert labels["en"].view.block_label == "First season"
    assert labels["fr"].view.block_label == "Première saison"
    assert labels["es"].view.block_label == "First season"  # no Spanish text: the session's language
    assert labels["fr"].debrief.blocks[0].label == "Première saison"
    for snapshot in labels.values():
        assert "low-threshold-arm" not in json.dumps(snapshot.payload())
        assert "Test lagoon" not in json.dumps(snapshot.payload())  # the researcher's session.title


def test_without_a_label_the_phone_gets_none_rather_than_the_researcher_name():
    study = make_study(treatment="none", threshold=THRESHOLD, rounds=2)
    snapshot = build(play(study, 2, reveal=True))
    assert snapshot.view.block_label is None and snapshot.debrief.blocks[0].label is None
    assert '"only"' not in json.dumps(snapshot.payload())  # the block's researcher name
