"""How Tenure writes numbers for people: money, years, rates and percentages, with the currency.

The one text module: the CLI, the memo, the window and the export all format here.
Money is rounded to whole currency units with thousands separators; the currency (a
symbol or code the user chose) is optional.

>>> money(-12345.6), money(12345.6, "EUR"), rate(0.1), years(1)
('-12,346', 'EUR 12,346', '10.00%', '1 year')
"""

from __future__ import annotations

import math

#: Separator between a site and an asset name in a study title (register, workbook, memo).
SITE_SEPARATOR = " \u2014 "


def money(x: float | None, currency: str = "", decimals: int | None = 0, *,
          missing: str = "-", not_finite: str | None = None) -> str:
    """An amount for a sentence or table: thousands separators, ``decimals`` places (None:
    none for a whole amount, else two), the minus sign kept but never on a zero, the
    currency after the sign (a word or code with a space).

    ``missing`` stands for None, ``not_finite`` (default: ``missing``) for NaN or infinity.

    >>> money(-12345.6), money(0.4), money(-0.2), money(1234.5, "$", 2), money(None)
    ('-12,346', '0', '0', '$1,234.50', '-')
    >>> money(-23903.4, "\u00a3"), money(-5.0, "EUR"), money(1234.5, decimals=None)
    ('-\u00a323,903', '-EUR 5', '1,234.50')
    >>> money(float("nan"), not_finite="n/a"), money(None, missing="")
    ('n/a', '')
    """
    if x is None:
        return missing
    value = float(x)
    if not math.isfinite(value):
        return missing if not_finite is None else not_finite
    places = (0 if value.is_integer() else 2) if decimals is None else decimals
    rounded = round(value, places)
    digits = f"{abs(rounded):,.{places}f}"
    sign = "-" if rounded < 0 and digits.strip("0.,") else ""
    space = " " if currency and currency[-1].isalnum() else ""
    return f"{sign}{currency}{space}{digits}"


def years(n: int) -> str:
    """'1 year', '3 years'.

    >>> years(1), years(4)
    ('1 year', '4 years')
    """
    return f"{n} year" if n == 1 else f"{n} years"


def rate(x: float, digits: int = 2) -> str:
    """An interest or tax rate as a percentage: ``rate(0.0825) == '8.25%'``.

    >>> rate(0.0825), rate(-0.03, 1)
    ('8.25%', '-3.0%')
    """
    return f"{x:.{digits}%}"


def percent(x: float, digits: int = 1) -> str:
    """A share as a percentage (``percent(0.123) == '12.3%'``).

    >>> percent(0.123), percent(1.0, 0)
    ('12.3%', '100%')
    """
    return f"{x:.{digits}%}"


def number(x: float | None, digits: int = 4) -> str:
    """A plain input value: money-like amounts as money, small fractions with decimals.

    >>> number(0.25), number(60000.0), number(3.0)
    ('0.2500', '60,000', '3')
    """
    if x is None or not math.isfinite(x):
        return "-"
    if abs(x) < 5 and x != int(x):
        return f"{x:.{digits}f}"
    return money(x)
