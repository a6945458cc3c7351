"""Points and cash: rounding up to the smallest denomination, exact decimals."""

from decimal import Decimal

import pytest

from ebbtide.game_logic.payoffs import denominations_needed, payment, points
from ebbtide.game_logic.study import PaymentSpec


def test_points_scale_with_units_taken():
    assert points(7, PaymentSpec(points_per_unit=2)) == 14


@pytest.mark.parametrize(
    "total, expected",
    [
        (0, Decimal("20")),  # show-up fee only
        (10, Decimal("40")),  # 20 + 10 * 2 = 40, already a multiple of 5
        (11, Decimal("45")),  # 42 rounds up to 45: nobody is paid less than earned
        (12.5, Decimal("45")),
    ],
)
def test_payment_rounds_up_to_smallest_note(total, expected):
    spec = PaymentSpec(exchange_rate=2, show_up_fee=20, round_up_to=5)
    assert payment(total, spec) == expected


def test_payment_is_exact_in_decimals():
    # 0.1 + 0.2 in binary floats is 0.30000000000000004 (IEEE 754 double; common practice,
    # no source): decimal arithmetic keeps payments to the cent.
    spec = PaymentSpec(exchange_rate=0.1, show_up_fee=0.2, round_up_to=0.01)
    assert payment(1, spec) == Decimal("0.30")


def test_negative_points_are_refused():
    with pytest.raises(ValueError, match="non-negative"):
        payment(-1, PaymentSpec())


def test_denominations_cover_every_payment_exactly():
    counts = denominations_needed([Decimal("45"), Decimal("120")], [50, 20, 10, 5])
    assert counts == {Decimal(50): 2, Decimal(20): 3, Decimal(10): 0, Decimal(5): 1}
