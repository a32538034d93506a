"""Reading tables (CSV or XLSX) for the imports: cells, money, dates, column mapping.

Shared by the cost-history import (``core.history.importing``) and the asset-list
import (``core.workbook.assetlist``): a table is read as text with spreadsheet
row numbers (header = row 1), money cells are read with a decimal mark that is
detected from the column or given, and a mapping says which column holds which
field (guessed from the header names, overridden by ``COLUMN=FIELD`` pairs).
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from core.errors import StudyError


@dataclass(frozen=True)
class RejectedRow:
    """A data row that was not imported: its row number, the reason and the raw values."""

    row: int
    reason: str
    values: tuple[str, ...] = ()

    def __str__(self) -> str:
        return f"row {self.row}: {self.reason}"


def read_table(path: str | Path, sheet: str | int | None = None) -> pd.DataFrame:
    """Read a CSV (UTF-8, comma/semicolon/tab) or XLSX sheet as strings and cells.

    Column names are stripped; the frame index is the spreadsheet row number
    (header = row 1). Raises ``StudyError`` for a missing or unreadable file.
    """
    path = Path(path)
    if not path.exists():
        raise StudyError(str(path), "no such file")
    suffix = path.suffix.lower()
    try:
        if suffix in (".xlsx", ".xlsm"):
            frame = pd.read_excel(path, sheet_name=0 if sheet is None else sheet, dtype=object,
                                  engine="openpyxl")
        elif suffix in (".csv", ".txt", ".tsv"):
            frame = pd.read_csv(path, dtype=str, keep_default_na=False, sep=None,
                                engine="python", encoding="utf-8-sig")
        else:
            raise StudyError(str(path), f"cannot import '{suffix or path.name}' files "
                                        "(use .csv or .xlsx)")
    except StudyError:
        raise
    except (ValueError, KeyError, OSError, UnicodeDecodeError, pd.errors.ParserError) as exc:
        raise StudyError(str(path), f"cannot read the table ({exc})") from None
    except Exception as exc:  # openpyxl raises its own errors for damaged files
        raise StudyError(str(path), f"cannot read the table ({type(exc).__name__}: {exc})") \
            from None
    frame.columns = [str(c).strip() for c in frame.columns]
    frame.index = np.arange(2, len(frame) + 2)
    return frame


def blank(v: Any) -> bool:
    """True for an empty cell (None, NaN or only spaces).

    >>> blank(" "), blank(float("nan")), blank("0")
    (True, True, False)
    """
    if v is None:
        return True
    if isinstance(v, float) and math.isnan(v):
        return True
    return isinstance(v, str) and not v.strip()


_CURRENCY = re.compile(r"^[£$€]|^[A-Z]{3}\s*|\s*[A-Z]{3}$|[£$€]$")
_GROUP = "[ \u00a0\u202f']"  # spaces (also no-break and narrow no-break) and apostrophes
#: A number with its decimal mark: digits in thousands groups (or none), then decimals.
_NUMBER = {
    ".": re.compile(rf"^(\d{{1,3}}((,|{_GROUP})\d{{3}})+|\d+)(\.\d+)?$|^\.\d+$"),
    ",": re.compile(rf"^(\d{{1,3}}((\.|{_GROUP})\d{{3}})+|\d+)(,\d+)?$|^,\d+$"),
}
DECIMAL_MARKS = ("auto", ".", ",")


def _money_text(v: Any) -> tuple[str, bool]:
    """A money cell's text without currency signs, and whether it is negative."""
    s = _CURRENCY.sub("", str(v).strip()).strip()
    if s.startswith("-") and s[1:2] in "£$€":
        s = "-" + s[2:]
    negative = False
    if s.startswith("(") and s.endswith(")"):
        s, negative = s[1:-1].strip(), True
    if s.startswith("-"):
        s, negative = s[1:].strip(), not negative
    return s, negative


def parse_amount(v: Any, decimal: str = ".") -> float:
    """A money cell to a number, with ``decimal`` ("." or ",") as the decimal mark.

    Thousands may be grouped with the other mark, spaces or apostrophes, in groups of
    three; anything else (such as '1.234,50' read with a decimal point) is refused
    rather than misread.  Brackets mean negative.

    >>> parse_amount("£1,234.50"), parse_amount("(250)"), parse_amount(12)
    (1234.5, -250.0, 12.0)
    >>> parse_amount("1.234,50 EUR", decimal=","), parse_amount("12 500,5", decimal=",")
    (1234.5, 12500.5)
    """
    if decimal not in _NUMBER:
        raise ValueError(f"decimal mark must be '.' or ',', not {decimal!r}")
    if isinstance(v, bool):
        raise ValueError("not a number")
    if isinstance(v, (int, float, np.integer, np.floating)):
        x = float(v)
    else:
        s, negative = _money_text(v)
        if not _NUMBER[decimal].match(s):
            raise ValueError("not a number")
        whole, _, frac = s.rpartition(decimal) if decimal in s else (s, "", "")
        digits = re.sub(r"\D", "", whole)
        x = float(f"{digits or '0'}.{frac or '0'}")
        x = -x if negative else x
    if not math.isfinite(x):
        raise ValueError("not a finite number")
    return x


def detect_decimal(values: Any) -> tuple[str, bool]:
    """The decimal mark of a column of money cells, and whether the cells settle it.

    A cell settles it when only one reading fits: '1.234,50' or '12,5' (comma), '1,234.50'
    or '12.5' (point), '1.234.567' (comma: points group thousands).  Cells such as '1,234'
    fit both; a column of only those reads the point as the decimal mark (the usual
    spreadsheet default) and says it was not settled.  Numeric cells carry no mark.

    >>> detect_decimal(["1.234,50", "980"]), detect_decimal(["1,234", "2,000"])
    ((',', True), ('.', False))
    """
    votes = {".": 0, ",": 0}
    for v in values:
        if isinstance(v, str) and v.strip():
            s, _ = _money_text(v)
            fits = [m for m in (".", ",") if _NUMBER[m].match(s)]
            if len(fits) == 1:
                votes[fits[0]] += 1
    if votes[","] > votes["."]:
        return ",", True
    return ".", votes["."] > 0


def parse_date(v: Any, dayfirst: bool = False) -> _dt.date:
    """A date cell to a date: a spreadsheet date, ISO '2024-03-31', or '31/03/2024' with dayfirst.

    >>> parse_date("2024-03-31"), parse_date("31/03/2024", dayfirst=True)
    (datetime.date(2024, 3, 31), datetime.date(2024, 3, 31))
    """
    if isinstance(v, _dt.datetime):
        return v.date()
    if isinstance(v, _dt.date):
        return v
    if isinstance(v, pd.Timestamp):
        return v.date()
    s = str(v).strip()
    try:
        return _dt.date.fromisoformat(s[:10])
    except ValueError:
        pass
    m = re.match(r"^(\d{1,2})[/.-](\d{1,2})[/.-](\d{4})$", s)
    if m:
        a, b, y = int(m[1]), int(m[2]), int(m[3])
        day, month = (a, b) if dayfirst else (b, a)
        return _dt.date(y, month, day)
    raise ValueError("not a date")




def guess_columns(columns: Sequence[str], hints: Mapping[str, tuple[str, ...]],
                  order: Iterable[str] | None = None) -> dict[str, str | None]:
    """Guess which header name holds which field from ``hints`` (field -> words).

    Fields are tried in ``order`` (default: the hints' order); each column serves
    at most one field; an exact name beats a name that only contains the hint.

    >>> guess_columns(["Tag", "Cost (EUR)"], {"tag": ("tag",), "amount": ("cost",)})
    {'tag': 'Tag', 'amount': 'Cost (EUR)'}
    """
    out: dict[str, str | None] = dict.fromkeys(hints)
    used: set[str] = set()
    for field in (list(hints) if order is None else list(order)):
        words = hints[field]
        lowered = [(c, c.strip().lower()) for c in columns if c not in used]
        exact = [c for c, low in lowered if low in words]
        loose = [c for c, low in lowered
                 if any(h in low.replace("_", " ").split() or low.startswith(h) for h in words)]
        found = exact or loose
        pick = found[0] if found else None
        if pick is not None:
            used.add(pick)
        out[field] = pick
    return out


def parse_map(pairs: Iterable[str], fields: Iterable[str], where: str = "--map"
              ) -> dict[str, str | None]:
    """``COLUMN=FIELD`` pairs to {field: column}; ``=FIELD`` (empty column) unmaps a field.

    >>> parse_map(["Plant no=tag", "Kosten=original_cost"], ["tag", "original_cost"])
    {'tag': 'Plant no', 'original_cost': 'Kosten'}
    """
    known = list(fields)
    out: dict[str, str | None] = {}
    for pair in pairs:
        column, sep, field = pair.rpartition("=")
        field = field.strip().lower().replace("-", "_").replace(" ", "_")
        if not sep:
            raise StudyError(where, f"'{pair}' must be COLUMN=FIELD")
        if field not in known:
            raise StudyError(where, f"'{pair}': unknown field '{field}' (fields: "
                                    f"{', '.join(known)})")
        if field in out:
            raise StudyError(where, f"field '{field}' is mapped twice")
        column = column.strip()
        if column and column in out.values():
            raise StudyError(where, f"column '{column}' is mapped to two fields")
        out[field] = column or None
    return out


def check_columns(table: pd.DataFrame, columns: Iterable[str | None], where: str) -> None:
    """Refuse a mapping that names a column the table does not have."""
    missing = [c for c in columns if c is not None and c not in table.columns]
    if missing:
        raise StudyError(where, f"no column {', '.join(repr(c) for c in missing)} "
                                f"(columns: {', '.join(map(str, table.columns))})")
