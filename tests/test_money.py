"""Exact money: points and cash from whole units, in decimals, and the notes and coins to bring.

Expected amounts are hand computations written beside each case; the change-making
cases are checked by hand and against an exhaustive search.
"""

from __future__ import annotations

import csv
import io
import itertools
from decimal import Decimal

import pytest
from conftest import connect_console, connect_every_seat, console_login, study_with

from ebbtide.exports.writer import _cell
from ebbtide.game_logic.errors import StudyError
from ebbtide.game_logic.money import (
    CannotPayExactly,
    decimal_text,
    denominations_needed,
    earnings,
    money_text,
)
from ebbtide.game_logic.study import PaymentSpec
from ebbtide.server.store.export import export_session

D = Decimal


def spec(**numbers: str) -> PaymentSpec:
    return PaymentSpec(**{key: D(value) for key, value in numbers.items()})


# -- points and cash, against hand computation ------------------------------------

@pytest.mark.parametrize(
    ("terms", "units", "points", "cash"),
    [
        # 3 x 0.1 = 0.3 points; 0 + 0.3 x 1 = 0.30, already a multiple of 0.01 -> 0.30.
        # (Summing binary floats gives 0.30000000000000004, rounded up to 0.31.)
        ({"points_per_unit": "0.1", "round_up_to": "0.01"}, 3, "0.3", "0.30"),
        # 14 x 0.1 = 1.4 points; 1.4 x 3 = 4.2, a multiple of 0.1 -> 4.2.
        # (Fourteen 0.1s summed as floats are 1.4000000000000001, which paid 4.3.)
        ({"points_per_unit": "0.1", "exchange_rate": "3", "round_up_to": "0.1"}, 14, "1.4", "4.2"),
        # 7 x 0.05 = 0.35 points -> cash 0.35, rounded up to a multiple of 0.5 -> 0.5.
        ({"points_per_unit": "0.05", "round_up_to": "0.5"}, 7, "0.35", "0.5"),
        # 10 x 0.05 = 0.50 points -> cash 0.50, already a multiple of 0.5: not raised.
        ({"points_per_unit": "0.05", "round_up_to": "0.5"}, 10, "0.5", "0.5"),
        # 11 x 0.05 = 0.55 -> up to the next multiple of 0.5 -> 1.0.
        ({"points_per_unit": "0.05", "round_up_to": "0.5"}, 11, "0.55", "1"),
        # Show-up fee 2.50, 9 units x 1 point x 0.125 = 1.125; 2.50 + 1.125 = 3.625 -> 3.63.
        ({"show_up_fee": "2.50", "exchange_rate": "0.125", "round_up_to": "0.01"}, 9, "9", "3.63"),
        # 13 x 0.1 = 1.3 points; 1.3 x 0.125 = 0.1625; 2.50 + 0.1625 = 2.6625;
        # 2.6625 / 0.05 = 53.25 -> 54 x 0.05 = 2.70.
        ({"points_per_unit": "0.1", "show_up_fee": "2.50", "exchange_rate": "0.125",
          "round_up_to": "0.05"}, 13, "1.3", "2.70"),
        # 8 x 0.125 = 1 point; 2.50 + 1 x 0.125 = 2.625 -> multiple of 0.125 already -> 2.625.
        ({"points_per_unit": "0.125", "show_up_fee": "2.50", "exchange_rate": "0.125",
          "round_up_to": "0.125"}, 8, "1", "2.625"),
        # Nothing taken: the show-up fee alone, 2.50 (a multiple of 0.5).
        ({"points_per_unit": "0.1", "show_up_fee": "2.50", "round_up_to": "0.5"}, 0, "0", "2.5"),
        # Fee 20, 11 points x 2 = 22; 42 rounds up to 45 (demo terms).
        ({"show_up_fee": "20", "exchange_rate": "2", "round_up_to": "5"}, 11, "11", "45"),
    ],
)
def test_points_and_cash_match_hand_computation(terms, units, points, cash):
    paid = earnings(units, spec(**terms))
    assert paid.points == D(points)
    assert paid.cash == D(cash)


def test_whole_units_are_required():
    with pytest.raises(ValueError, match="whole number of 0 or more"):
        earnings(-1, PaymentSpec())
    with pytest.raises(ValueError, match="whole number of 0 or more"):
        earnings(2.5, PaymentSpec())
    assert earnings(1, PaymentSpec()).units == 1  # remembered now; True must still be refused
    with pytest.raises(ValueError, match="whole number of 0 or more"):
        earnings(True, PaymentSpec())


def test_exact_text_never_shows_binary_float_noise():
    # Hand computation: 3 x 0.1 = 0.3; 4 x 0.5 = 2 (no trailing ".0"); 100 stays 100.
    assert decimal_text(earnings(3, spec(points_per_unit="0.1")).points) == "0.3"
    assert decimal_text(earnings(4, spec(points_per_unit="0.5")).points) == "2"
    assert decimal_text(D("1E+2")) == "100"
    assert _cell(D("0.30")) == "0.3"
    # The sheet prints cash with cents: 0.3 -> 0.30; 0.305 keeps its third place; 35 stays 35.
    assert [money_text(D(v)) for v in ("0.3", "0.305", "35", "35.0")] == ["0.30", "0.305", "35", "35"]


def test_study_money_numbers_are_read_from_the_file_digits():
    # TOML floats are IEEE 754 binary64 (TOML 1.0 spec); the payment table is read from
    # its own digits instead, so 19 significant digits survive (a float keeps about 17).
    study = study_with(**{"points_per_unit = 1": "points_per_unit = 0.1",
                          "exchange_rate = 2": "exchange_rate = 0.1234567890123456789"})
    assert study.payment.points_per_unit == D("0.1")
    assert study.payment.exchange_rate == D("0.1234567890123456789")
    # The rest of the study keeps ordinary floats.
    assert isinstance(study.resource.growth.r, float)


def test_bad_money_number_gets_one_plain_line():
    with pytest.raises(StudyError) as caught:
        study_with(**{"show_up_fee = 20": "show_up_fee = -2.5"})
    assert "payment.show_up_fee: holds -2.5; allowed: Input should be greater than or equal to 0" in str(
        caught.value)
    with pytest.raises(StudyError, match="finite number"):
        study_with(**{"exchange_rate = 2": "exchange_rate = inf"})


# -- the packing list: exact change-making ------------------------------------------

def test_only_fifties_and_twenties_pay_sixty_exactly():
    # Hand computation: 60 = 20 + 20 + 20. Greedy takes 50 and is left with 10, which
    # no note makes (the failure the issue reports).
    assert denominations_needed([D(60)], [50, 20]) == {D(50): 0, D(20): 3}
    # 110 = 50 + 20 + 20 + 20 (4 notes; 5 x 20 + 10 is impossible, 2 x 50 + 10 too).
    assert denominations_needed([D(110)], [50, 20]) == {D(50): 1, D(20): 3}


def test_non_canonical_coins_one_three_four():
    # {1, 3, 4} is a standard example of a coin system where greedy is not optimal
    # (from memory; cf. Cormen, Leiserson, Rivest and Stein, Introduction to Algorithms,
    # 3rd ed., problem 16-1(c)): 6 = 3 + 3, where greedy gives 4 + 1 + 1.
    assert denominations_needed([D(6)], [1, 3, 4]) == {D(4): 0, D(3): 2, D(1): 0}


def _fewest_by_search(amount: int, coins: tuple[int, ...]) -> int | None:
    """Exhaustive search: the smallest k such that some k coins sum to ``amount``."""
    for k in range(amount // min(coins) + 1):
        if any(sum(c) == amount for c in itertools.combinations_with_replacement(coins, k)):
            return k
    return None


@pytest.mark.parametrize("coins", [(1, 3, 4), (1, 5, 6, 9), (20, 50), (2, 7)])
def test_fewest_notes_agree_with_exhaustive_search(coins):
    # Brute-force enumeration of every multiset of coins is the reference (independent of the DP).
    for amount in range(0, 31):
        expected = _fewest_by_search(amount, coins)
        if expected is None:
            with pytest.raises(CannotPayExactly):
                denominations_needed([D(amount)], coins)
            continue
        counts = denominations_needed([D(amount)], coins)
        assert sum(v * n for v, n in counts.items()) == amount
        assert sum(counts.values()) == expected, (coins, amount)


def test_amount_no_combination_makes_is_named_plainly():
    # 30 is not a sum of 50s and 20s (by hand: 20 + 10 needs a 10).
    with pytest.raises(CannotPayExactly, match=r"^30 cannot be paid exactly with notes and coins of 50, 20"):
        denominations_needed([D(60), D(30)], [50, 20])


def test_fractional_coins_are_packed_in_the_smallest_unit():
    # Hand computation: 2.60 = 2 + 0.5 + 0.1 (3 pieces); 0.70 = 0.5 + 0.2 (2 pieces).
    counts = denominations_needed([D("2.60"), D("0.70")], ["0.1", "0.2", "0.5", "2"])
    assert counts == {D(2): 1, D("0.5"): 2, D("0.2"): 1, D("0.1"): 1}


# -- one rule: the payment sheet, seats.csv and the phones agree -----------------------

FRACTIONAL = {
    "points_per_unit = 1": "points_per_unit = 0.1",
    "exchange_rate = 2": "exchange_rate = 3",
    "show_up_fee = 20": "show_up_fee = 2.50",
    "round_up_to = 5": "round_up_to = 0.1",
}
# Units each seat takes in each of three rounds (0-based group, seat).
TAKES = {(0, 0): 1, (0, 1): 2, (1, 0): 7, (1, 1): 0}
# Hand computation over three rounds, fee 2.50, 0.1 points a unit, 3 marks a point, up to 0.1:
#   G01-1: 3 units = 0.3 points; 2.50 + 0.9 = 3.40   (three 0.1s summed as floats paid 3.5)
#   G01-2: 6 units = 0.6 points; 2.50 + 1.8 = 4.30
#   G02-1: 21 units = 2.1 points; 2.50 + 6.3 = 8.80
#   G02-2: 0 units = 0 points; 2.50
HAND = {"G01-1": ("0.3", "3.40"), "G01-2": ("0.6", "4.30"), "G02-1": ("2.1", "8.80"), "G02-2": ("0", "2.50")}


def test_payment_sheet_seats_csv_and_phones_agree_on_a_played_session(start_server, tmp_path):
    server = start_server(study_with(**FRACTIONAL))
    phones = connect_every_seat(server)
    console = connect_console(server.url, server.pin)
    try:
        assert console.act("console_start")["ok"]
        for round_number in (1, 2, 3):
            for (g, s), take in TAKES.items():
                assert phones[(g, s)].harvest(f"money-{g}-{s}-{round_number}", 1, round_number, take)["ok"]
        # The phones' points so far, over the wire.
        for (g, s), phone in phones.items():
            seat_id = f"G0{g + 1}-{s + 1}"
            snap = phone.wait_for(lambda snap: snap["view"]["round"] == 4, "round 4 on the phone")
            assert snap["view"]["points_total"] == HAND[seat_id][0]
            # One round's points: 1 unit x 0.1 = 0.1 for G01-1, 7 x 0.1 = 0.7 for G02-1.
            assert D(snap["view"]["last_round"]["points"]) == D(TAKES[(g, s)]) * D("0.1")
        with console_login(server.url, server.pin) as http:
            sheet_text = http.get(f"{server.url}/console/payments.csv", timeout=10).text
            page = http.get(f"{server.url}/console/payments", timeout=10).text
    finally:
        for phone in phones.values():
            phone.close()
        console.close()
    sheet = {r["seat_id"]: (r["points_total"], r["payment"])
             for r in csv.DictReader(io.StringIO(sheet_text)) if r["seat_id"] != "total"}
    assert sheet == HAND
    # 3.40 + 4.30 + 8.80 + 2.50 = 19.00 by hand.
    assert 'id="total-cash">19<' in page
    folder = export_session(server.live.store, server.live.session_id, tmp_path / "export")
    with (folder / "seats.csv").open(encoding="utf-8") as handle:
        seats = {r["seat_id"]: (r["points_total"], r["payment"]) for r in csv.DictReader(handle)}
    assert {k: (p, D(c)) for k, (p, c) in seats.items()} == {k: (p, D(c)) for k, (p, c) in HAND.items()}
    with (folder / "decisions.csv").open(encoding="utf-8") as handle:
        per_round = {r["points"] for r in csv.DictReader(handle) if r["seat_id"] == "G01-1"}
    assert per_round == {"0.1"}  # never 0.30000000000000004-style noise
