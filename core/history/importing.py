"""Importing cost history (work orders, yearly maintenance cost, resale quotes).

A table (CSV or XLSX) is read as text, a :class:`ColumnMapping` says which
column holds what, and :func:`import_history` turns every data row into a
``core.workbook.HistoryRow`` or a :class:`RejectedRow` with its row number
(as a spreadsheet shows it: the header is row 1) and the reason. Nothing is
dropped silently: ``len(accepted) + len(rejected) + len(left_out)`` is the number of
data rows, where ``left_out`` are the flagged rows (exact duplicates, dated after today)
that were not kept.

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
from core.tables import (
    DECIMAL_MARKS,
    RejectedRow,
    blank,
    detect_decimal,
    guess_columns,
    parse_amount,
    parse_date,
    read_table,
)
from core.workbook.model import HistoryRow

_blank = blank

#: Header words that suggest each field of a cost-history table.
HISTORY_HINTS: dict[str, tuple[str, ...]] = {
    "tag": ("asset", "tag", "machine", "equipment", "unit", "plant no", "serial"),
    "date": ("date", "closed", "completed", "posted", "when", "day"),
    "year": ("year", "fy", "period"),
    "age": ("age",),
    "amount": ("amount", "cost", "quote", "value", "total", "spend", "price", "eur", "gbp"),
    "kind": ("kind", "type", "category", "class"),
}


def guess_history_columns(columns: list[str]) -> dict[str, str | None]:
    """Guess which header names hold which field (tag, date, year, age, amount, kind).

    >>> g = guess_history_columns(["Asset", "Closed", "Type", "Cost (EUR)", "Notes"])
    >>> g["tag"], g["date"], g["kind"], g["amount"], g["year"]
    ('Asset', 'Closed', 'Type', 'Cost (EUR)', None)
    """
    out = guess_columns(columns, HISTORY_HINTS, ("age", "tag", "date", "year", "kind", "amount"))
    if out["age"] is not None and "stage" in out["age"].lower():
        out["age"] = None
    if out["date"] is not None and out["year"] is not None:
        out["year"] = None  # a date column already places the rows in time
    return out

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
class FlaggedRow:
    """A usable row that looks wrong (an exact duplicate, or dated after today).

    ``kept`` says whether it was imported anyway (the caller asked to keep such rows)
    or left out (the default).
    """

    row: int
    reason: str
    values: tuple[str, ...] = ()
    kept: bool = False

    def __str__(self) -> str:
        return f"row {self.row}: {self.reason} ({'kept' if self.kept else 'left out'})"


@dataclass(frozen=True)
class ImportReport:
    """What an import accepted, what it rejected (with reasons) and what it flagged.

    ``flagged`` rows are warnings: exact duplicates and rows dated after today, left out
    unless the import was asked to keep them (then they are in ``accepted`` too).
    """

    source: str
    accepted: tuple[HistoryRow, ...]
    rejected: tuple[RejectedRow, ...]
    decimal: str = "."
    decimal_settled: bool = True
    flagged: tuple[FlaggedRow, ...] = ()

    @property
    def left_out(self) -> tuple[FlaggedRow, ...]:
        """The flagged rows that were not imported."""
        return tuple(f for f in self.flagged if not f.kept)

    @property
    def rows(self) -> int:
        return len(self.accepted) + len(self.rejected) + len(self.left_out)

    def summary(self) -> str:
        text = (f"{self.source}: {len(self.accepted)} of {self.rows} rows imported, "
                f"{len(self.rejected)} rejected")
        if self.flagged:
            text += (f", {len(self.flagged)} flagged ({len(self.left_out)} left out, "
                     f"{len(self.flagged) - len(self.left_out)} kept)")
        return text

    def warning_lines(self) -> list[str]:
        """One line per flagged row, ``<source>: warning: row N: <reason> (left out|kept)``."""
        return [f"{self.source}: warning: {f}" for f in self.flagged]

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
                   in_service: Mapping[str, _dt.date | None], source: str = "", *,
                   keep_duplicates: bool = False, keep_future: bool = False,
                   today: _dt.date | None = None) -> ImportReport:
    """Turn the rows of ``table`` into history rows, rejecting (with reasons) what cannot be used.

    ``in_service`` maps every known asset tag to its in-service date (None if
    unknown); a tag not in it is rejected as unknown. Raises ``StudyError``
    when a mapped column is missing from the table.

    Usable rows that look wrong are flagged (see :func:`flag_rows`): a row whose cells
    all repeat an earlier row (an exact duplicate would inflate that year's cost) and a
    row dated after ``today`` (default: the computer's date). They are left out unless
    ``keep_duplicates`` / ``keep_future`` say to keep them.

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
    whole_rows: list[tuple[str, ...]] = []
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
        whole_rows.append(tuple("" if _blank(v) else str(v).strip() for v in row.tolist()))
    kept, flagged = flag_rows(accepted, whole_rows, in_service,
                              _dt.date.today() if today is None else today,
                              calendar_years=mapping.year is not None,
                              keep_duplicates=keep_duplicates, keep_future=keep_future)
    return ImportReport(source, kept, tuple(rejected), decimal, settled, flagged)


def _anniversary(start: _dt.date, years: int) -> _dt.date:
    try:
        return start.replace(year=start.year + years)
    except ValueError:  # 29 February
        return start.replace(year=start.year + years, day=28)


def flag_rows(rows: list[HistoryRow], cells: list[tuple[str, ...]],
              in_service: Mapping[str, _dt.date | None], today: _dt.date, *,
              calendar_years: bool = False, keep_duplicates: bool = False,
              keep_future: bool = False) -> tuple[tuple[HistoryRow, ...], tuple[FlaggedRow, ...]]:
    """Split usable rows into those imported and those flagged (with the reason).

    ``cells[i]`` is every cell of ``rows[i]``'s table row. A row is an exact duplicate
    when all its cells repeat an earlier row's (the first stays). A row is after today
    when its date is; for a calendar-year column when the year is after today's; for a
    year-of-age column when that year of age (a resale quote's age) begins after today.

    >>> rows = [HistoryRow("A", 1, 5.0, "operating", "2020-02-01", "f", 2),
    ...         HistoryRow("A", 1, 5.0, "operating", "2020-02-01", "f", 3),
    ...         HistoryRow("A", 3, 9.0, "operating", "2031-01-01", "f", 4)]
    >>> kept, flagged = flag_rows(rows, [("a",), ("a",), ("b",)], {"A": None},
    ...                           _dt.date(2026, 1, 1))
    >>> [r.source_row for r in kept]
    [2]
    >>> [str(f) for f in flagged]  # doctest: +NORMALIZE_WHITESPACE
    ['row 3: exact duplicate of row 2 (left out)',
     'row 4: dated 2031-01-01, after today (2026-01-01) (left out)']
    """
    first: dict[tuple[str, ...], int] = {}
    kept: list[HistoryRow] = []
    flagged: list[FlaggedRow] = []
    for h, key in zip(rows, cells, strict=True):
        where = h.source_row or 0
        reason, keep = "", True
        if key in first:
            reason, keep = f"exact duplicate of row {first[key]}", keep_duplicates
        else:
            first[key] = where
            if h.date is not None:
                if _dt.date.fromisoformat(h.date) > today:
                    reason = f"dated {h.date}, after today ({today.isoformat()})"
            elif in_service.get(h.tag) is not None:
                start = in_service[h.tag]
                assert start is not None
                if calendar_years:
                    year = start.year + h.age - (0 if h.kind == "resale" else 1)
                    if year > today.year:
                        reason = f"year {year} is after this year ({today.year})"
                else:
                    begins = _anniversary(start, h.age - (0 if h.kind == "resale" else 1))
                    if begins > today:
                        reason = (f"year of age {h.age} begins {begins.isoformat()}, "
                                  f"after today ({today.isoformat()})")
            keep = keep_future if reason else True
        if reason:
            flagged.append(FlaggedRow(where, reason, key, keep))
        if keep:
            kept.append(h)
    return tuple(kept), tuple(flagged)


def import_file(path: str | Path, mapping: ColumnMapping,
                in_service: Mapping[str, _dt.date | None], sheet: str | int | None = None,
                **checks: Any) -> ImportReport:
    """:func:`read_table` then :func:`import_history` (``checks``: ``keep_duplicates``,
    ``keep_future``, ``today``), with the file name as the source."""
    path = Path(path)
    return import_history(read_table(path, sheet), mapping, in_service, path.name, **checks)


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
