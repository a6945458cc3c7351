"""Points for units taken, and their conversion to the cash paid at the end.

Money is computed in ``Decimal`` so that a payment sheet adds up to the cent:
binary floats would turn 0.1 + 0.2 into 0.30000000000000004.
"""

from __future__ import annotations

from decimal import ROUND_CEILING, Decimal

from .study import PaymentSpec


def points(units_taken: int, spec: PaymentSpec) -> float:
    """Points earned for the units a seat took in one round."""
    return units_taken * spec.points_per_unit


def _dec(value: float) -> Decimal:
    # Through str() so that 0.1 in the study file stays exactly one tenth.
    return Decimal(str(value))


def payment(points_total: float, spec: PaymentSpec) -> Decimal:
    """Cash for a seat: show-up fee plus points times the exchange rate,
    rounded **up** to a multiple of the smallest note or coin in circulation,
    so nobody is paid less than they earned (common practice, no source).
    """
    if points_total < 0:
        raise ValueError(f"points_total must be non-negative, got {points_total}")
    raw = _dec(spec.show_up_fee) + _dec(points_total) * _dec(spec.exchange_rate)
    unit = _dec(spec.round_up_to)
    return (raw / unit).to_integral_value(rounding=ROUND_CEILING) * unit


def denominations_needed(amounts: list[Decimal], notes: list[float]) -> dict[Decimal, int]:
    """How many of each note or coin to bring to pay every amount exactly (greedy).

    Greedy change-making is optimal for the usual 1-2-5 note series; the payment
    sheet uses it only as a packing list.
    """
    values = sorted((_dec(n) for n in notes), reverse=True)
    counts = {v: 0 for v in values}
    for amount in amounts:
        left = amount
        for v in values:
            k = int(left // v)
            counts[v] += k
            left -= k * v
        if left != 0:
            raise ValueError(f"{amount} cannot be paid with notes {notes}")
    return counts
