"""The payment sheet: each seat's points and cash, per group and in total, and the notes to bring.

Points and cash are ``game_logic.money.earnings`` of the whole units each seat took
in the replayed state (the same rule as ``seats.csv`` and the phones), line by line
through ``field_day.seat_money``: the game (show-up fee included), the risk task, and
the show-up fee of each person who did not agree to take part. The packing list is
``denominations_needed`` over every amount handed to one person.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from decimal import Decimal

from ebbtide.exports.tables import group_code, seat_code
from ebbtide.game_logic.field_day import seat_money
from ebbtide.game_logic.money import (
    decimal_text,
    denominations_needed,
    money_text,
    packing_denominations,
)
from ebbtide.game_logic.session_fold import SessionState

from ..store import SeatKey

# Cash as the sheet prints it (the template receives it under this name).
money = money_text


@dataclass(frozen=True)
class SeatPay:
    group_id: str
    seat_id: str
    card_code: str
    points: Decimal
    cash: Decimal  # everything for this seat: game + risk task + people who declined
    game_cash: Decimal = Decimal(0)
    risk_cash: Decimal = Decimal(0)
    declined: int = 0
    declined_cash: Decimal = Decimal(0)

    def handed_out(self) -> list[Decimal]:
        """The amounts handed to people: the player's (game and risk), then each decliner's fee."""
        fee = [self.declined_cash / self.declined] * self.declined if self.declined else []
        player = self.game_cash + self.risk_cash
        return ([player] if player else []) + fee


@dataclass(frozen=True)
class GroupPay:
    group_id: str
    seats: tuple[SeatPay, ...]

    @property
    def points(self) -> Decimal:
        return sum((s.points for s in self.seats), Decimal(0))

    @property
    def cash(self) -> Decimal:
        return sum((s.cash for s in self.seats), Decimal(0))


@dataclass(frozen=True)
class PaymentSheet:
    currency: str
    status: str
    groups: tuple[GroupPay, ...]
    notes: tuple[tuple[Decimal, int], ...]  # (denomination, how many), largest first

    @property
    def cash(self) -> Decimal:
        return sum((g.cash for g in self.groups), Decimal(0))

    @property
    def points(self) -> Decimal:
        return sum((g.points for g in self.groups), Decimal(0))


def payment_sheet(state: SessionState, keys: list[SeatKey]) -> PaymentSheet:
    """Build the sheet from the replayed session (open rounds not yet counted)."""
    spec = state.study.payment
    codes = {(k.group, k.seat): k.short_code for k in keys}
    groups = []
    for g, progress in enumerate(state.groups):
        paid = [seat_money(state.study, units, state.day.seats[(g, s)])
                for s, units in enumerate(progress.units)]
        seats = tuple(
            SeatPay(group_code(g), seat_code(g, s), codes.get((g, s), ""), p.game.points, p.total,
                    p.game.cash, p.risk_cash, p.declined, p.declined_cash)
            for s, p in enumerate(paid)
        )
        groups.append(GroupPay(group_code(g), seats))
    amounts = [amount for group in groups for seat in group.seats for amount in seat.handed_out()]
    needed = denominations_needed(amounts, packing_denominations(spec))
    notes = tuple((value, count) for value, count in needed.items() if count)
    return PaymentSheet(spec.currency, state.status, tuple(groups), notes)


def sheet_csv(sheet: PaymentSheet) -> str:
    """One row per seat, then one total per group and for the session."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["group_id", "seat_id", "card_code", "points_total", "payment", "currency",
                     "game_payment", "risk_payment", "declined_payment"])
    for group in sheet.groups:
        for seat in group.seats:
            writer.writerow([group.group_id, seat.seat_id, seat.card_code, decimal_text(seat.points),
                             money(seat.cash), sheet.currency, money(seat.game_cash), money(seat.risk_cash),
                             money(seat.declined_cash)])
    for group in sheet.groups:
        writer.writerow([group.group_id, "total", "", decimal_text(group.points), money(group.cash),
                         sheet.currency])
    writer.writerow(["all", "total", "", decimal_text(sheet.points), money(sheet.cash), sheet.currency])
    return out.getvalue()
