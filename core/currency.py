"""How amounts are shown: one currency per workbook or study, the same in every view.

The window, the CLI text, the export and the memo all show money with
:func:`format_money` (``core.text.money``, the one money format) and the symbol from :func:`currency_symbol`, so an amount reads
the same everywhere ("-£2,215"). A workbook keeps its currency in its ``currency``
meta entry (chosen once); a study file, or a workbook without one, uses
:data:`DEFAULT_CURRENCY`. Three-letter codes that have a common symbol are shown
as that symbol; any other code is shown as written ("CHF 1,250").
"""

from __future__ import annotations

from pathlib import Path

from core.text import money

DEFAULT_CURRENCY = "£"
SYMBOLS = {"GBP": "£", "USD": "$", "EUR": "€", "JPY": "¥", "INR": "₹", "KRW": "₩",
           "NGN": "₦", "PHP": "₱", "ILS": "₪", "VND": "₫", "UAH": "₴", "TRY": "₺"}


def currency_symbol(text: str | None) -> str:
    """The symbol an amount is shown with: a known code becomes its symbol.

    >>> currency_symbol("GBP"), currency_symbol(" eur "), currency_symbol("CHF"), \\
    ...     currency_symbol(None), currency_symbol("$")
    ('£', '€', 'CHF', '£', '$')
    """
    if text is None or not str(text).strip():
        return DEFAULT_CURRENCY
    t = str(text).strip()
    if len(t) == 3 and t.isalpha():  # an ISO 4217 code
        return SYMBOLS.get(t.upper(), t.upper())
    return t


def format_money(value: float | None, symbol: str = "", decimals: int = 0) -> str:
    """An amount with thousands separators and the currency after the sign.

    A one-character symbol is written against the digits ("-£2,215"); a code with a
    space ("CHF 1,250"). Never "-0"; blank for None; "n/a" for NaN or infinity.

    >>> format_money(-23903.4, "£"), format_money(1234.6), format_money(-0.2, "£")
    ('-£23,903', '1,235', '£0')
    >>> format_money(1250, "CHF"), format_money(None, "£"), format_money(12.345, "$", 2)
    ('CHF 1,250', '', '$12.35')
    """
    return money(value, symbol, decimals, missing="", not_finite="n/a")


def workbook_currency(path: str | Path | None, default: str = DEFAULT_CURRENCY) -> str:
    """The currency symbol a workbook keeps (its ``currency`` meta entry), else ``default``.

    A study file (or anything that is not a readable workbook) gives ``default``.
    """
    if path is None or Path(path).suffix.lower() != ".tenure":
        return currency_symbol(default)
    try:
        from core.workbook import Workbook

        with Workbook.open(path, write=False) as wb:
            kept = wb.meta().get("currency")
    except Exception:  # noqa: BLE001 - a display default, never a reason to fail
        kept = None
    return currency_symbol(kept or default)


def set_workbook_currency(workbook: object, text: str) -> str:
    """Keep the currency of an open, writable ``core.workbook.Workbook``; returns the symbol."""
    symbol = currency_symbol(text)
    workbook.set_meta("currency", symbol)  # type: ignore[attr-defined]
    return symbol
