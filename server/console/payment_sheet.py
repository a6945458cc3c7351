"""The payment sheet: each seat's points and cash, per group and in total, and the notes to bring.

Points and cash are ``game_logic.money.earnings`` of the whole units each seat took
in the replayed state (the same rule as ``seats.csv`` and the phones); the packing
list is ``denominations_needed`` over every amount.
"""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from decimal import Decimal

from ebbtide.exports.tables import group_code, seat_code
from ebbtide.game_logic.money import (
    decimal_text,
    denominations_needed,
    earnings,
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
    cash: Decimal


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
        paid = [earnings(units, spec) for units in progress.units]
        seats = tuple(
            SeatPay(group_code(g), seat_code(g, s), codes.get((g, s), ""), p.points, p.cash)
            for s, p in enumerate(paid)
        )
        groups.append(GroupPay(group_code(g), seats))
    amounts = [seat.cash for group in groups for seat in group.seats]
    needed = denominations_needed(amounts, packing_denominations(spec))
    notes = tuple((value, count) for value, count in needed.items() if count)
    return PaymentSheet(spec.currency, state.status, tuple(groups), notes)


def sheet_csv(sheet: PaymentSheet) -> str:
    """One row per seat, then one total per group and for the session."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["group_id", "seat_id", "card_code", "points_total", "payment", "currency"])
    for group in sheet.groups:
        for seat in group.seats:
            writer.writerow([group.group_id, seat.seat_id, seat.card_code, decimal_text(seat.points),
                             money(seat.cash), sheet.currency])
    for group in sheet.groups:
        writer.writerow([group.group_id, "total", "", decimal_text(group.points), money(group.cash),
                         sheet.currency])
    writer.writerow(["all", "total", "", decimal_text(sheet.points), money(sheet.cash), sheet.currency])
    return out.getvalue()
