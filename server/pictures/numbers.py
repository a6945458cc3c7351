"""Numbers in the pictures as the reader's language writes them ("40,4" in Spanish, "40.4" in English).

The drawing functions stay plain functions of their data; the caller says once which
language the numbers are for (``numbers_in``), and ``number_text`` formats with Babel's
CLDR data: whole numbers without decimals, others to one decimal, no grouping (a scale
reads "2000", not "2,000" or "2.000").
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar
from decimal import Decimal

from babel.numbers import format_decimal

_LOCALE: ContextVar[str] = ContextVar("picture_number_locale", default="en")


@contextmanager
def numbers_in(locale: str) -> Iterator[None]:
    token = _LOCALE.set(locale)
    try:
        yield
    finally:
        _LOCALE.reset(token)


def number_text(value: float) -> str:
    value = float(value)
    if abs(value - round(value)) < 1e-9:
        return str(int(round(value)))
    return format_decimal(Decimal(f"{value:.1f}"), format="0.0", locale=_LOCALE.get())
