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


def denominations_needed(amounts: list[Decimal], notes: list[float] | list[Decimal]) -> dict[Decimal, int]:
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


# The 1-2-5 series most currencies' notes and coins follow (common practice, no source).
_SERIES = (1, 2, 5)
_SERIES_SPAN = 200  # the default list stops at 200 times the smallest unit


def default_denominations(round_up_to: float) -> list[Decimal]:
    """Notes and coins assumed when the study lists none: ``round_up_to`` and the
    1-2-5 series values above it that are whole multiples of it, up to 200 times it.
    """
    unit = _dec(round_up_to)
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
    return sorted((Decimal(format(v, 'f')) for v in values), reverse=True)


def packing_denominations(spec: PaymentSpec) -> list[Decimal]:
    """The study's notes and coins, largest first, or the default series."""
    if spec.denominations is not None:
        return sorted((_dec(v) for v in spec.denominations), reverse=True)
    return default_denominations(spec.round_up_to)
