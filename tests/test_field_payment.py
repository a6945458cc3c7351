"""The payment sheet: cash per seat, per group and in total, the notes to bring, and its CSV."""

from __future__ import annotations

import csv
import io
import re
from decimal import Decimal

import pytest
from conftest import DEMO, study_with

from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.money import default_denominations, denominations_needed, packing_denominations
from ebbtide.game_logic.study import load_study
from ebbtide.server import create_app
from ebbtide.server.store.export import export_session

PIN = "8642"


@pytest.fixture
def app(tmp_path):
    app = create_app({"EBBTIDE_DB": str(tmp_path / "pay.db"), "EBBTIDE_STUDY": load_study(DEMO),
                      "EBBTIDE_SEED": 5, "EBBTIDE_PIN": PIN})
    yield app
    app.extensions["ebbtide"].store.close()


def play_one_round(live, harvests_by_group):
    live.submit("session_started", {})
    for g, harvests in enumerate(harvests_by_group):
        for s, h in enumerate(harvests):
            live.submit("harvest_submitted", {"group": g, "seat": s, "block": 1, "round": 1, "harvest": h,
                                              "source": "phone"}, decision_id=f"pay-{g}-{s}-0001")


def logged_in(app):
    client = app.test_client()
    assert client.post("/console/login", data={"pin": PIN}).status_code == 303
    return client


def test_default_denominations_follow_the_one_two_five_series_from_the_rounding_unit():
    # The 1-2-5 series of notes and coins: common practice, no source.
    assert default_denominations(5) == [Decimal(v) for v in (1000, 500, 200, 100, 50, 20, 10, 5)]
    assert default_denominations(0.5)[-3:] == [Decimal("2"), Decimal("1"), Decimal("0.5")]
    assert default_denominations(2) == [Decimal(v) for v in (200, 100, 50, 20, 10, 2)]


def test_study_denominations_are_used_largest_first():
    study = study_with(**{"round_up_to = 5": "round_up_to = 5\ndenominations = [5, 50, 10]"})
    assert packing_denominations(study.payment) == [Decimal(50), Decimal(10), Decimal(5)]


@pytest.mark.parametrize(
    ("line", "problem"),
    [
        ("denominations = [10, 20]", "must be a whole multiple of the smallest denomination"),
        ("denominations = [5, 5]", "lists a value twice"),
        ("denominations = [-5]", "greater than 0"),
    ],
)
def test_study_denominations_that_cannot_pay_every_amount_are_refused(line, problem):
    with pytest.raises(StudyError, match=problem):
        study_with(**{"round_up_to = 5": f"round_up_to = 5\n{line}"})


def test_payment_sheet_matches_hand_computation_and_the_export(app, tmp_path):
    live = app.extensions["ebbtide"].current
    play_one_round(live, [[7, 2], [15, 0]])
    client = logged_in(app)
    page = client.get("/console/payments")
    assert page.status_code == 200 and page.headers["Cache-Control"] == "no-store"
    text = page.get_data(as_text=True)
    # Hand computation with the demo's terms (fee 20, rate 2, rounded up to 5):
    # 7 points -> 20 + 14 = 34 -> 35.
    # Rationing does not bite: the stock (80) exceeds every group's total.
    expected = {"G01-1": 35, "G01-2": 25, "G02-1": 50, "G02-2": 20}
    rows = list(csv.DictReader(io.StringIO(client.get("/console/payments.csv").get_data(as_text=True))))
    seats = {r["seat_id"]: int(r["payment"]) for r in rows if r["seat_id"] != "total"}
    assert seats == expected
    totals = {r["group_id"]: int(r["payment"]) for r in rows if r["seat_id"] == "total"}
    assert totals == {"G01": 60, "G02": 70, "all": 130}
    folder = export_session(live.store, live.session_id, tmp_path / "export")
    with (folder / "seats.csv").open(encoding="utf-8") as handle:
        exported = {r["seat_id"]: int(float(r["payment"])) for r in csv.DictReader(handle)}
    assert exported == expected
    assert 'id="total-cash">130<' in text
    for key in live.keys:
        assert key.short_code in text  # the card code matches the card handed back


def test_payment_sheet_lists_the_notes_to_bring(app):
    live = app.extensions["ebbtide"].current
    play_one_round(live, [[7, 2], [15, 0]])
    # By hand: 35 = 20+10+5, 25 = 20+5, 50 = 50, 20 = 20.
    amounts = [Decimal(v) for v in (35, 25, 50, 20)]
    needed = denominations_needed(amounts, default_denominations(5))
    used = {v: n for v, n in needed.items() if n}
    assert used == {Decimal(50): 1, Decimal(20): 3, Decimal(10): 1, Decimal(5): 2}
    text = logged_in(app).get("/console/payments").get_data(as_text=True)
    notes = text[text.index('id="notes"'):text.index("</table>", text.index('id="notes"'))]
    cells = re.findall(r'<td class="num">([^<]*)</td>', notes)
    assert cells[:3] == ["50", "1", "50"] and cells[3:6] == ["20", "3", "60"]


def test_payment_sheet_carries_the_anonymity_caution_and_print_styles(app):
    text = logged_in(app).get("/console/payments").get_data(as_text=True)
    assert "seat codes, never names" in text and "Pay each person alone" in text
    assert "still running" in text
    response = app.test_client().get("/static/field.css")
    css = response.get_data(as_text=True)
    response.close()
    assert "@media print" in css and ".screen-only { display: none" in css


def test_payment_sheet_needs_the_console_login(app):
    client = app.test_client()
    for path in ("/console/payments", "/console/payments.csv"):
        assert client.get(path).headers["Location"].endswith("/console/login")
