"""Importing cost history (work orders, yearly maintenance cost, resale quotes).

A table (CSV or XLSX) is read as text, a :class:`ColumnMapping` says which
column holds what, and :func:`import_history` turns every data row into a
``core.workbook.HistoryRow`` or a :class:`RejectedRow` with its row number
(as a spreadsheet shows it: the header is row 1) and the reason. Nothing is
dropped silently: ``len(accepted) + len(rejected)`` is the number of data rows.

Dates become years of age from the asset's in-service date: year of age j
(j = 1, 2, ...) runs from ``in_service + (j-1)`` years up to ``in_service + j``
years. A calendar-year column counts the in-service year as year of age 1.
Resale quotes are placed at k = whole years in service, rounded to the
nearest year (k = 0 is new), for a fit of ``MV_k = P(1-d)^k``.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from core.errors import StudyError
from core.workbook.model import HistoryRow

KIND_WORDS = {
    "operating": "operating", "operating cost": "operating", "operation": "operating",
    "energy": "operating", "running": "operating", "labour": "operating", "labor": "operating",
    "maintenance": "maintenance", "repair": "maintenance", "work order": "maintenance",
    "workorder": "maintenance", "wo": "maintenance", "service": "maintenance",
    "overhaul": "maintenance", "parts": "maintenance",
    "resale": "resale", "quote": "resale", "resale quote": "resale", "market value": "resale",
    "trade-in": "resale", "trade in": "resale",
}


@dataclass(frozen=True)
class ColumnMapping:
    """Which column of the table holds what (column names as in the header row).

    Give ``tag`` (or a fixed ``default_tag`` for a one-asset sheet), ``amount``,
    and one of ``date`` (work-order or quote date), ``year`` (calendar year) or
    ``age`` (year of age already). ``kind`` is optional: without it every row
    is ``default_kind``.  ``decimal`` is the amounts' decimal mark: "." (1,234.50),
    "," (1.234,50) or "auto" (read from the amount column, see :func:`detect_decimal`).
    """

    amount: str
    tag: str | None = None
    date: str | None = None
    year: str | None = None
    age: str | None = None
    kind: str | None = None
    default_kind: str = "operating"
    default_tag: str | None = None
    dayfirst: bool = False
    decimal: str = "auto"

    def columns(self) -> list[str]:
        return [c for c in (self.tag, self.date, self.year, self.age, self.amount, self.kind)
                if c is not None]


@dataclass(frozen=True)
class RejectedRow:
    """A data row that was not imported: its row number, the reason and the raw values."""

    row: int
    reason: str
    values: tuple[str, ...] = ()

    def __str__(self) -> str:
        return f"row {self.row}: {self.reason}"


@dataclass(frozen=True)
class ImportReport:
    """What an import accepted and what it rejected (with reasons)."""

    source: str
    accepted: tuple[HistoryRow, ...]
    rejected: tuple[RejectedRow, ...]
    decimal: str = "."
    decimal_settled: bool = True

    @property
    def rows(self) -> int:
        return len(self.accepted) + len(self.rejected)

    def summary(self) -> str:
        return (f"{self.source}: {len(self.accepted)} of {self.rows} rows imported, "
                f"{len(self.rejected)} rejected")

    def decimal_note(self) -> str:
        """How the amounts were read, e.g. "amounts read with a decimal comma (1.234,50)"."""
        text = ("a decimal comma (1.234,50)" if self.decimal == ","
                else "a decimal point (1,234.50)")
        note = f"amounts read with {text}"
        if not self.decimal_settled:
            note += "; no cell settled it, so check the amounts (or choose the decimal mark)"
        return note

    def lines(self) -> list[str]:
        """One line per rejected row, ``<source>: row N: <reason>``."""
        return [f"{self.source}: {r}" for r in self.rejected]


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


def _blank(v: Any) -> bool:
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


def _whole(v: Any) -> int:
    x = parse_amount(v)
    if x != int(x):
        raise ValueError("not a whole number")
    return int(x)


def years_between(start: _dt.date, end: _dt.date) -> float:
    """Years from ``start`` to ``end`` as a decimal (whole years plus the day fraction).

    >>> years_between(_dt.date(2020, 7, 1), _dt.date(2023, 7, 1))
    3.0
    """
    whole = end.year - start.year - ((end.month, end.day) < (start.month, start.day))
    try:
        anniversary = start.replace(year=start.year + whole)
    except ValueError:  # 29 February
        anniversary = start.replace(year=start.year + whole, day=28)
    try:
        following = start.replace(year=start.year + whole + 1)
    except ValueError:
        following = start.replace(year=start.year + whole + 1, day=28)
    return whole + (end - anniversary).days / (following - anniversary).days


def import_history(table: pd.DataFrame, mapping: ColumnMapping,
                   in_service: Mapping[str, _dt.date | None], source: str = "") -> ImportReport:
    """Turn the rows of ``table`` into history rows, rejecting (with reasons) what cannot be used.

    ``in_service`` maps every known asset tag to its in-service date (None if
    unknown); a tag not in it is rejected as unknown. Raises ``StudyError``
    when a mapped column is missing from the table.

    >>> t = pd.DataFrame({"Tag": ["P-1", "P-1", "X"], "Date": ["2021-03-01", "bad", "2021-01-01"],
    ...                   "Cost": ["1,200", "50", "10"]}, index=[2, 3, 4])
    >>> r = import_history(t, ColumnMapping(amount="Cost", tag="Tag", date="Date"),
    ...                    {"P-1": _dt.date(2020, 1, 1)}, "wo.csv")
    >>> [(h.tag, h.age, h.amount) for h in r.accepted], [str(x) for x in r.rejected]
    ([('P-1', 2, 1200.0)], ["row 3: date 'bad' is not a date", "row 4: unknown asset tag 'X'"])
    """
    where = source or "table"
    if mapping.tag is None and mapping.default_tag is None:
        raise StudyError(where, "the mapping needs an asset tag column or a fixed asset tag")
    if sum(c is not None for c in (mapping.date, mapping.year, mapping.age)) != 1:
        raise StudyError(where, "the mapping needs exactly one of a date, year or age column")
    missing = [c for c in mapping.columns() if c not in table.columns]
    if missing:
        raise StudyError(where, f"no column {', '.join(repr(c) for c in missing)} "
                                f"(columns: {', '.join(map(str, table.columns))})")
    default_kind = KIND_WORDS.get(mapping.default_kind.strip().lower())
    if default_kind is None:
        raise StudyError(where, f"unknown default kind '{mapping.default_kind}'")
    if mapping.decimal not in DECIMAL_MARKS:
        raise StudyError(where, f"decimal mark must be 'auto', '.' or ',', "
                                f"not '{mapping.decimal}'")
    if mapping.decimal == "auto":
        decimal, settled = detect_decimal(table[mapping.amount].tolist())
    else:
        decimal, settled = mapping.decimal, True
    accepted: list[HistoryRow] = []
    rejected: list[RejectedRow] = []
    for rownum, row in table.iterrows():
        raw = tuple("" if _blank(row[c]) else str(row[c]) for c in mapping.columns())

        def reject(reason: str, rownum: Any = rownum, raw: tuple = raw) -> None:
            rejected.append(RejectedRow(int(rownum), reason, raw))

        if all(_blank(row[c]) for c in mapping.columns()):
            reject("empty row")
            continue
        tag = (mapping.default_tag if mapping.tag is None or _blank(row[mapping.tag])
               else str(row[mapping.tag]).strip())
        if not tag:
            reject("no asset tag")
            continue
        if tag not in in_service:
            reject(f"unknown asset tag '{tag}'")
            continue
        kind = default_kind
        if mapping.kind is not None and not _blank(row[mapping.kind]):
            word = str(row[mapping.kind]).strip()
            found = KIND_WORDS.get(word.lower())
            if found is None:
                reject(f"kind '{word}' is not operating, maintenance or resale")
                continue
            kind = found
        if _blank(row[mapping.amount]):
            reject("no amount")
            continue
        try:
            amount = parse_amount(row[mapping.amount], decimal)
        except ValueError:
            text = str(row[mapping.amount])
            mark = ("" if not re.search(r"\d", text) else
                    f" (read with a decimal {'comma' if decimal == ',' else 'point'})")
            reject(f"amount '{text}' is not a number{mark}")
            continue
        if amount < 0 and kind != "resale":
            reject(f"negative {kind} cost {amount:g} (a credit is not a cost)")
            continue
        date_text = None
        start = in_service.get(tag)
        try:
            if mapping.age is not None:
                if _blank(row[mapping.age]):
                    reject("no age")
                    continue
                age = _whole(row[mapping.age])
            elif mapping.year is not None:
                if _blank(row[mapping.year]):
                    reject("no year")
                    continue
                cal = _whole(row[mapping.year])
                if start is None:
                    reject(f"asset '{tag}' has no in-service date to turn years into age")
                    continue
                age = cal - start.year + (0 if kind == "resale" else 1)
            else:
                cell = row[mapping.date]
                if _blank(cell):
                    reject("no date")
                    continue
                try:
                    when = parse_date(cell, mapping.dayfirst)
                except ValueError:
                    reject(f"date '{cell}' is not a date")
                    continue
                if start is None:
                    reject(f"asset '{tag}' has no in-service date to turn dates into age")
                    continue
                if when < start:
                    reject(f"date {when.isoformat()} is before '{tag}' entered service "
                           f"({start.isoformat()})")
                    continue
                span = years_between(start, when)
                age = int(round(span)) if kind == "resale" else int(math.floor(span)) + 1
                date_text = when.isoformat()
        except ValueError:
            column = mapping.age if mapping.age is not None else mapping.year
            reject(f"{column} '{row[column]}' is not a whole number")
            continue
        low = 0 if kind == "resale" else 1
        if age < low:
            reject(f"year of age {age} is before the asset entered service")
            continue
        if age > 100:
            reject(f"year of age {age} is implausible (over 100 years)")
            continue
        accepted.append(HistoryRow(tag, age, amount, kind, date_text, source, int(rownum)))
    return ImportReport(source, tuple(accepted), tuple(rejected), decimal, settled)


def import_file(path: str | Path, mapping: ColumnMapping,
                in_service: Mapping[str, _dt.date | None], sheet: str | int | None = None
                ) -> ImportReport:
    """:func:`read_table` then :func:`import_history`, with the file name as the source."""
    path = Path(path)
    return import_history(read_table(path, sheet), mapping, in_service, path.name)


def yearly_totals(rows: list[HistoryRow] | tuple[HistoryRow, ...],
                  kinds: tuple[str, ...] = ("operating", "maintenance")
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Sum the cost rows of the given kinds per year of age: (ages, totals), ages ascending.

    Work orders of one year add up to that year's cost; a fit then uses one
    point per year of age. (For resale quotes use ``kinds=("resale",)``, which
    averages the quotes of one age instead of adding them.)

    >>> rows = [HistoryRow("A", 1, 10.0), HistoryRow("A", 1, 5.0), HistoryRow("A", 2, 20.0)]
    >>> [a.tolist() for a in yearly_totals(rows)]
    [[1, 2], [15.0, 20.0]]
    """
    chosen = [r for r in rows if r.kind in kinds]
    if not chosen:
        return np.zeros(0, dtype=int), np.zeros(0)
    ages = np.array([r.age for r in chosen], dtype=int)
    amounts = np.array([r.amount for r in chosen], dtype=float)
    uniq, inverse = np.unique(ages, return_inverse=True)
    totals = np.bincount(inverse, weights=amounts)
    if kinds == ("resale",):
        totals = totals / np.bincount(inverse).astype(float)
    return uniq, totals
