"""Parsing what a user types into a field, with messages that name the field.

Every parser raises :class:`FieldError` whose text reads
"<Field label>: <what is wrong>", e.g. "Max life: must be a whole number of years ≥ 1".
The window shows it and keeps the field's last good value.
"""

from __future__ import annotations

import math
import re

from core.errors import StudyError
from core.text import money


class FieldError(ValueError):
    def __init__(self, label: str, message: str) -> None:
        super().__init__(f"{label}: {message}")
        self.label = label
        self.message = message


_CLEAN = re.compile(r"[\s,_]")


def _number_text(text: str, currency: str = "") -> str:
    t = text.strip()
    if currency:
        t = t.replace(currency, "")
    t = t.replace("€", "").replace("$", "").replace("£", "")
    return _CLEAN.sub("", t).replace("−", "-")


def parse_number(text: str, label: str, *, low: float | None = None,
                 low_open: bool = False, currency: str = "") -> float:
    """A plain number; thousands separators and a currency sign are allowed.

    >>> parse_number("12,500", "Price")
    12500.0
    >>> parse_number("abc", "Price")
    Traceback (most recent call last):
    ...
    desktop_app.validation.FieldError: Price: must be a number
    """
    t = _number_text(text, currency)
    try:
        value = float(t)
    except ValueError:
        raise FieldError(label, "must be a number") from None
    if not math.isfinite(value):
        raise FieldError(label, "must be a finite number")
    if low is not None and (value < low or (low_open and value == low)):
        sign = ">" if low_open else "≥"
        raise FieldError(label, f"must be {sign} {low:g}")
    return value


def parse_money(text: str, label: str, currency: str = "", *, allow_negative: bool = True
                ) -> float:
    value = parse_number(text, label, currency=currency)
    if not allow_negative and value < 0:
        raise FieldError(label, "must be 0 or more")
    return value


def parse_years(text: str, label: str, low: int = 1, high: int = 100) -> int:
    """A whole number of years in [low, high].

    >>> parse_years("7", "Max life")
    7
    >>> parse_years("2.5", "Max life")
    Traceback (most recent call last):
    ...
    desktop_app.validation.FieldError: Max life: must be a whole number of years ≥ 1
    """
    t = _number_text(text)
    try:
        value = float(t)
    except ValueError:
        value = math.nan
    if not math.isfinite(value) or value != int(value) or value < low:
        raise FieldError(label, f"must be a whole number of years ≥ {low}")
    if value > high:
        raise FieldError(label, f"must be at most {high} years")
    return int(value)


def parse_percent(text: str, label: str, *, low: float | None = -100.0,
                  low_open: bool = True, high: float | None = None) -> float:
    """A percentage as typed ("9", "9%", "9.5 %") returned as a decimal (0.09).

    >>> parse_percent("9 %", "MARR")
    0.09
    >>> parse_percent("-100", "MARR")
    Traceback (most recent call last):
    ...
    desktop_app.validation.FieldError: MARR: must be > -100 %
    """
    t = _number_text(text).rstrip("%")
    try:
        value = float(t)
    except ValueError:
        raise FieldError(label, "must be a percentage, e.g. 9 or 9.5") from None
    if not math.isfinite(value):
        raise FieldError(label, "must be a finite percentage")
    if low is not None and (value < low or (low_open and value == low)):
        raise FieldError(label, f"must be {'>' if low_open else '≥'} {low:g} %")
    if high is not None and value > high:
        raise FieldError(label, f"must be at most {high:g} %")
    return round(value / 100.0, 12)


def parse_text(text: str, label: str) -> str:
    t = text.strip()
    if not t:
        raise FieldError(label, "must not be empty")
    return t


def fmt_money(x: float | None) -> str:
    """An amount as an edit field shows it: cents only when it has them."""
    return money(x, decimals=None, missing="")


def fmt_percent(x: float | None) -> str:
    if x is None:
        return ""
    return f"{x * 100:.6g}"


# Labels for the JSON paths core reports (the last key of the path).
PATH_LABELS = {
    "title": "Title", "marr": "MARR", "study_period": "Study period", "name": "Name",
    "market_value": "Market value today", "first_cost": "First cost", "max_life": "Max life",
    "decline_rate": "Decline rate", "values": "Year-by-year values", "first": "First-year cost",
    "gradient": "Gradient", "growth": "Growth", "extra_costs": "Extra costs", "year": "Year",
    "amount": "Amount", "label": "Label", "depreciation": "Depreciation", "basis": "Tax basis",
    "years": "Recovery years", "age": "Age", "class": "MACRS class", "rate": "Rate",
    "after_tax_marr": "After-tax MARR", "tax": "Tax", "inflation": "Inflation",
    "challengers": "Challengers", "salvage": "Tax salvage",
}


def friendly(error: StudyError) -> str:
    """'$.defender.max_life: must be ...' → 'Max life (defender): must be ...'."""
    path = error.path
    parts = re.split(r"[.\[\]]+", path.strip("$."))
    parts = [p for p in parts if p]
    if not parts:
        return str(error)
    key = parts[-1]
    if key.isdigit() and len(parts) > 1:
        key = parts[-2]
    label = PATH_LABELS.get(key, key)
    where = ""
    if "defender" in parts:
        where = " (defender)"
    elif "challengers" in parts and key != "challengers":
        idx = next((p for p in parts[parts.index("challengers") + 1:] if p.isdigit()), None)
        where = f" (challenger {int(idx) + 1})" if idx is not None else ""
    return f"{label}{where}: {error.message}"
