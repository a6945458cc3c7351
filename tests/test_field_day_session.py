"""A whole field day over real sockets: consent (one person declines), instructions,
comprehension, questionnaires, practice, both blocks, the risk task; then the export
(validated with the Frictionless library), the decision timing against the stored
event times, and each seat's cash on the phones, the payment sheet and seats.csv."""

from __future__ import annotations

import csv
import hashlib
import io
from datetime import datetime
from decimal import Decimal

import frictionless
from conftest import ROOT, connect_console, connect_every_seat, console_login, wait_until

from ebbtide.game_logic.session_fold import replay
from ebbtide.game_logic.study import load_study
from ebbtide.server.store.export import export_session

EXAMPLE = ROOT / "examples" / "saltmarsh-day"
TAKE = 2  # every present seat takes 2 bundles a round (invented; the stock never runs low)


def read_csv(path):
    with path.open(encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


def call(phone, event, body):
    ack = phone.client.call(event, body, timeout=20)
    assert ack["ok"], ack
    return ack


def stage(phone):
    return phone.latest()["field_day"]["stage"]


def through_the_start(phone, agree: bool, language: str, wrong_first: bool):
    shown = phone.wait_for(lambda s: s["field_day"]["consent"], "the consent screen")
    consent = shown["field_day"]["consent"]
    if language != consent["language"]:
        raise AssertionError("the consent text must come in the phone's language")
    call(phone, "consent", {"agree": agree, "language": language, "text_sha256": consent["text_sha256"]})
    if not agree:
        return
    for step in (1, 2, 3):
        call(phone, "instruction_step", {"step": step})
    if wrong_first:
        ack = call(phone, "comprehension_answer", {"question": "what-grows", "choice": 1})
        assert ack["right"] is False
        shown = phone.wait_for(lambda s: (s["field_day"]["question"] or {}).get("wrong_tries") == 1,
                               "feedback")
        assert shown["field_day"]["question"]["feedback"]
    assert call(phone, "comprehension_answer", {"question": "what-grows", "choice": 2})["right"] is True
    call(phone, "survey_answer", {"questionnaire": "before", "item": "years-cutting", "answer": 12})


def play_round(phones, present, block, round_number, practice):
    for (g, s) in present:
        ack = phones[(g, s)].client.call("harvest", {
            "decision_id": f"d-{g}-{s}-{block}-{round_number}-{int(practice)}", "block": block,
            "round": round_number, "harvest": TAKE, "practice": practice,
            "language": "fr" if (g, s) == (1, 0) else "en", "pictures": (g, s) == (1, 1)}, timeout=20)
        assert ack["ok"], ack


def cash_up_to_5(amount: int) -> int:
    return -(-amount // 5) * 5


def test_whole_field_day_exports_and_pays_the_same_everywhere(start_server, tmp_path):
    study = load_study(EXAMPLE)
    server = start_server(study, seed=99)
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    declining = (0, 2)
    present = [k for k in sorted(phones) if k != declining]
    for key, phone in phones.items():
        through_the_start(phone, key != declining, "en", wrong_first=key == (0, 0))
    assert stage(phones[declining]) == "declined"
    assert all(stage(phones[k]) == "game" for k in present)

    assert console.act("console_start")["ok"]
    wait_until(lambda: phones[(0, 0)].latest()["view"].get("practice"), "the practice round on the phone")
    play_round(phones, present, 1, 1, practice=True)
    wait_until(lambda: all(p.waiting for p in server.live.state.groups), "the practice round to end")
    assert server.live.state.groups[0].units == [0, 0, 0]  # practice pays nothing
    for block in (1, 2):
        assert console.act("console_open_block")["ok"]
        for round_number in range(1, 5):
            play_round(phones, present, block, round_number, practice=False)
    wait_until(lambda: server.live.state.status == "ended", "the session to end")

    for key in present:
        wait_until(lambda key=key: stage(phones[key]) == "risk", "the risk task")
        call(phones[key], "risk_choice", {"gamble": 2 if key == (0, 0) else 1})
        call(phones[key], "survey_answer", {"questionnaire": "after", "item": "fair-shares", "answer": 4})
        call(phones[key], "survey_answer",
             {"questionnaire": "after", "item": "talked-about", "answer": [3, 1]})
        call(phones[key], "survey_answer", {"questionnaire": "after", "item": "remarks", "answer": " fine "})
        wait_until(lambda key=key: stage(phones[key]) == "end", "the end screen")

    # -- cash: hand-computed (1 point a bundle, 2 marks a point, fee 20, rounded up to 5) --
    # 8 paid rounds x 2 bundles = 16 points -> 20 + 32 = 52 -> 55 marks for the game.
    # Gamble 1 is [10, 10]: 20 marks. Gamble 2 is [8, 14]: 16 -> 20 (low) or 28 -> 30 (high).
    outcome = server.live.state.day.seats[(0, 0)].risk[1]
    expected = {f"G0{g + 1}-{s + 1}": Decimal(55 + 20) for g, s in present}
    expected["G01-1"] = Decimal(55 + (30 if outcome == "high" else 20))
    expected["G01-3"] = Decimal(20)  # declined: the show-up fee only
    on_phones = {f"G0{g + 1}-{s + 1}": Decimal(p.latest()["field_day"]["end"]["total"])
                 for (g, s), p in phones.items()}
    http = console_login(server.url, server.pin)
    sheet = list(csv.DictReader(io.StringIO(http.get(f"{server.url}/console/payments.csv", timeout=5).text)))
    on_sheet = {r["seat_id"]: Decimal(r["payment"]) for r in sheet if r["seat_id"] != "total"}
    out = export_session(server.app.extensions["ebbtide"].store, server.live.session_id, tmp_path / "out")
    seats = read_csv(out / "seats.csv")
    in_seats = {r["seat_id"]: Decimal(r["total_payment"]) for r in seats}
    assert on_phones == on_sheet == in_seats == expected
    declined_row = next(r for r in seats if r["seat_id"] == "G01-3")
    assert (declined_row["consent"], declined_row["declined_payment"], declined_row["payment"]) == \
        ("declined", "20", "0")

    # -- every table validates against its Data Package descriptor (Frictionless library) --
    report = frictionless.validate(out / "datapackage.json")
    assert report.valid, report.flatten(["rowNumber", "fieldName", "type", "note"])
    assert {task.name for task in report.tasks} >= {"decisions", "seats", "surveys", "timeline"}

    # -- decision times against the stored event log ---------------------------------------
    events = server.app.extensions["ebbtide"].store.events(server.live.session_id)
    at = {e.id: datetime.fromisoformat(e.created_at) for e in events}
    harvest_events = {
        (e.body["group"], e.body["seat"], e.body["block"], e.body["round"], e.body["practice"]): e
        for e in events if e.kind == "harvest_submitted"
    }
    # A round opens with session_started, block_opened, or the event that resolved the round before.
    openers = {g: [e.id for e in events if e.kind in ("session_started", "block_opened")
                   and e.body.get("group", g) == g] for g in (0, 1)}
    for before, after in zip(events, events[1:], strict=False):
        if after.kind == "round_resolved":
            openers[after.body["group"]].append(before.id)
    decisions = read_csv(out / "decisions.csv")
    assert len(decisions) == 2 * 3 * 9  # 2 groups x 3 seats x (1 practice + 8 paid) rounds
    for row in decisions:
        g, s = int(row["group_id"][1:]) - 1, int(row["seat_id"][-1]) - 1
        if (g, s) == declining:
            assert (row["source"], row["harvest_asked"], row["points"]) == ("absent", "", "")
            continue
        practice = row["practice"] == "1"  # booleans are written 0/1 (exports/schema.py)
        event = harvest_events[(g, s, int(row["block"]), int(row["round"]), practice)]
        assert datetime.fromisoformat(row["stored_at"]) == at[event.id]
        opened = max(i for i in openers[g] if i < event.id)
        assert abs(float(row["seconds_from_open"]) - (at[event.id] - at[opened]).total_seconds()) < 0.0015
        assert row["language"] == ("fr" if (g, s) == (1, 0) else "en")
        assert row["pictures"] == ("1" if (g, s) == (1, 1) else "0")
    assert sum(r["practice"] == "1" for r in decisions) == 6

    # -- surveys: answers, attempts and consent, with their stored times ---------------------
    surveys = read_csv(out / "surveys.csv")
    times = {e.id: e.created_at for e in events}
    assert all(r["time"] == times[int(r["event_id"])] for r in surveys)
    tries = [(r["answer"], r["correct"]) for r in surveys
             if r["seat_id"] == "G01-1" and r["questionnaire"] == "comprehension"]
    assert tries == [("1", "0"), ("2", "1")]
    consent = next(r for r in surveys if r["seat_id"] == "G01-3" and r["questionnaire"] == "consent")
    assert consent["answer"] == "decline"
    assert consent["text_sha256"] == hashlib.sha256(study.consent.text["en"].encode("utf-8")).hexdigest()
    multiple = next(r for r in surveys if r["seat_id"] == "G02-1" and r["item"] == "talked-about")
    assert multiple["answer"] == "1;3"

    # -- the timeline is the stored log, in order, with nothing that names a device ---------
    timeline = read_csv(out / "timeline.csv")
    assert [int(r["event_id"]) for r in timeline] == [e.id for e in events]
    assert all(r["time"] == times[int(r["event_id"])] for r in timeline)
    text = (out / "timeline.csv").read_text(encoding="utf-8")
    assert "device-0-0" not in text and server.pin not in text
    # Crash recovery: replaying the stored log gives back the same day, seat by seat.
    again = replay(study, server.seed, server.live.session_id, events)
    assert again.day.seats == server.live.state.day.seats
    live_groups = server.live.state.groups
    assert [g.practice_outcomes for g in again.groups] == [g.practice_outcomes for g in live_groups]
    assert [g.units for g in again.groups] == [g.units for g in live_groups]
    for phone in phones.values():
        phone.close()
    console.close()
