"""Money: points and cash from the whole units a seat took, exact in ``Decimal``.

Whole units taken are the record. ``earnings`` is the one rule that turns them
into points and cash; the payment sheet, ``seats.csv``, the decision table and the
phones all call it, so they cannot disagree. The study's money numbers are read
from the file's own digits (``game_logic.study``), so 0.1 is exactly one tenth:
summing binary floats would pay three units at 0.1 points as 0.30000000000000004,
rounded up to 0.31.

The packing list of notes and coins is an exact change-making dynamic programme
(fewest notes and coins for each amount), not the greedy rule, which fails for sets
such as {50, 20} (60 = 20 + 20 + 20, while greedy takes 50 and is stuck at 10).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from decimal import Decimal, Inexact, localcontext
from functools import lru_cache

from .study import PaymentSpec


@dataclass(frozen=True)
class Earnings:
    """What a seat earned for ``units`` units taken: points, and the cash paid for them."""

    units: int
    points: Decimal
    cash: Decimal  # show-up fee included, rounded up to the rounding step


# Asked for every seat of every console state and phone snapshot; the answer never changes.
@lru_cache(maxsize=65536, typed=True)  # typed: True is refused, never served as 1
def earnings(units_taken: int, spec: PaymentSpec) -> Earnings:
    """Points and cash for ``units_taken`` whole units (one round's, or a whole session's).

    points = units x points_per_unit;
    cash = show_up_fee + points x exchange_rate, rounded **up** to a whole multiple of
    round_up_to, so nobody is paid less than they earned (common practice, no source).
    """
    if isinstance(units_taken, bool) or not isinstance(units_taken, int) or units_taken < 0:
        raise ValueError(f"units taken must be a whole number of 0 or more, got {units_taken!r}")
    with localcontext() as ctx:
        # Exact or loud: a result that needed rounding would raise instead of paying a wrong cent.
        ctx.prec = 60
        ctx.traps[Inexact] = True
        points = units_taken * spec.points_per_unit
        raw = spec.show_up_fee + points * spec.exchange_rate
        steps, left = divmod(raw, spec.round_up_to)
        cash = (steps + (1 if left else 0)) * spec.round_up_to
    return Earnings(units_taken, points, cash)


def decimal_text(value: Decimal) -> str:
    """Exact plain text of a decimal for files and phones: 0.3, 12, 2.5 (no exponent,
    no trailing zeros)."""
    text = format(value, "f")
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def money_text(amount: Decimal) -> str:
    """Cash as printed on the payment sheet: whole amounts plain, otherwise at least two
    decimals (0.30), more only when the amount has them (0.305)."""
    if amount == amount.to_integral_value():
        return f"{amount:.0f}"
    exact = decimal_text(amount)
    places = len(exact.partition(".")[2])
    return f"{amount:.{max(places, 2)}f}"


# -- the notes and coins to bring ------------------------------------------------


class CannotPayExactly(ValueError):
    """An amount that no combination of the given notes and coins makes."""


def _as_decimals(values: Iterable[Decimal | float | int]) -> list[Decimal]:
    # Through str() so that a float 0.1 stays exactly one tenth.
    return [v if isinstance(v, Decimal) else Decimal(str(v)) for v in values]


def _fewest_pieces(target: int, pieces: Sequence[int]) -> list[int | None]:
    """For every amount 0..target (in the smallest unit), the last piece of a change with
    the fewest pieces, or None where no change exists.

    The textbook change-making dynamic programme (Cormen, Leiserson, Rivest and Stein,
    *Introduction to Algorithms*, 3rd ed., problem 16-1): fewest(a) = 1 + min over pieces
    p <= a of fewest(a - p). Larger pieces are tried first, so among equally short
    changes the one with larger notes is kept.
    """
    unreachable = target + 1
    fewest = [0] + [unreachable] * target
    last: list[int | None] = [None] * (target + 1)
    for piece in sorted(pieces, reverse=True):
        for amount in range(piece, target + 1):
            if fewest[amount - piece] + 1 < fewest[amount]:
                fewest[amount] = fewest[amount - piece] + 1
                last[amount] = piece
    return last


def denominations_needed(
    amounts: Sequence[Decimal], notes: Sequence[Decimal | float | int]
) -> dict[Decimal, int]:
    """How many of each note or coin to bring to pay every amount exactly, each with the
    fewest notes and coins. Keys are every note given, largest first.

    Raises ``CannotPayExactly`` naming the amounts that no combination makes.
    """
    values = sorted(set(_as_decimals(notes)), reverse=True)
    wanted = _as_decimals(amounts)
    if not values or any(v <= 0 for v in values):
        raise ValueError(f"notes and coins must be positive values, got {list(notes)}")
    if any(a < 0 for a in wanted):
        raise ValueError(f"amounts to pay must be 0 or more, got {[str(a) for a in wanted]}")
    # Work in whole multiples of the finest digit any value has (0.05 and 2 -> hundredths).
    places = max(0, *(-v.normalize().as_tuple().exponent for v in [*values, *wanted]))
    pieces = [int(v.scaleb(places)) for v in values]
    targets = [int(a.scaleb(places)) for a in wanted]
    last = _fewest_pieces(max(targets, default=0), pieces)
    counts = {v: 0 for v in values}
    by_piece = dict(zip(pieces, values, strict=True))
    impossible = []
    for amount, target in zip(wanted, targets, strict=True):
        if target and last[target] is None:
            impossible.append(amount)
            continue
        while target:
            counts[by_piece[last[target]]] += 1
            target -= last[target]
    if impossible:
        raise CannotPayExactly(
            f"{', '.join(money_text(a) for a in impossible)} cannot be paid exactly with "
            f"notes and coins of {', '.join(decimal_text(v) for v in values)}; add a smaller "
            f"note or coin (every amount must be a sum of these values)"
        )
    return counts


# The 1-2-5 series most currencies' notes and coins follow (common practice, no source).
_SERIES = (1, 2, 5)
_SERIES_SPAN = 200  # the default list stops at 200 times the smallest unit


def default_denominations(round_up_to: Decimal | float) -> list[Decimal]:
    """Notes and coins assumed when the study lists none: ``round_up_to`` and the
    1-2-5 series values above it that are whole multiples of it, up to 200 times it.
    """
    (unit,) = _as_decimals([round_up_to])
    values = {unit}
    exponent = unit.adjusted() - 1
    while True:
        scale = Decimal(10) ** exponent
        candidates = [Decimal(k) * scale for k in _SERIES]
        if min(candidates) > unit * _SERIES_SPAN:
            break
        values.update(v for v in candidates if unit < v <= unit * _SERIES_SPAN and v % unit == 0)
        exponent += 1
    # Plain notation (10, not 1E+1): these values are printed on the payment sheet.
    return sorted((Decimal(format(v, "f")) for v in values), reverse=True)


def packing_denominations(spec: PaymentSpec) -> list[Decimal]:
    """The study's notes and coins, largest first, or the default series."""
    if spec.denominations is not None:
        return sorted(spec.denominations, reverse=True)
    return default_denominations(spec.round_up_to)

