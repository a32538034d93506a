"""Importing a plant's equipment list (CSV or XLSX) into a workbook's register.

Fields: tag, description, site, asset class, in-service date, original cost and
tax depreciation (e.g. "MACRS 7", "straight line 10", "declining balance 8 25%").
The columns are guessed from the header names and may be set field by field
(:class:`AssetMapping`); money and dates are read with the cost-history
import's machinery (``core.tables``). Every data row ends as a new asset, an
unchanged one, a change to an existing asset (reported with what differs,
never merged unless asked), or a rejected row with its row number and reason.
:func:`plan_asset_import` writes nothing (the preview); :func:`apply_asset_import`
writes the plan in one transaction.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from core.errors import StudyError
from core.estimates import Depreciation
from core.tables import (
    DECIMAL_MARKS,
    RejectedRow,
    blank,
    check_columns,
    detect_decimal,
    guess_columns,
    parse_amount,
    parse_date,
    read_table,
)
from core.workbook.model import Asset, Workbook, _check_asset

#: The fields of an asset list, in the order a mapping lists them.
ASSET_FIELDS = ("tag", "description", "site", "asset_class", "in_service", "original_cost",
                "depreciation")

ASSET_HINTS: dict[str, tuple[str, ...]] = {
    "tag": ("tag", "asset", "asset no", "asset tag", "equipment no", "plant no", "id", "number"),
    "description": ("description", "name", "machine", "equipment", "desc"),
    "site": ("site", "plant", "location", "yard", "works"),
    "asset_class": ("class", "asset class", "kind", "type", "category"),
    "in_service": ("in service", "in-service", "commissioned", "installed", "in_service",
                   "service date", "date"),
    "original_cost": ("original cost", "cost", "price", "purchase", "acquisition", "basis"),
    "depreciation": ("depreciation", "tax depreciation", "tax", "method"),
}


@dataclass(frozen=True)
class AssetMapping:
    """Which column holds which field (``None``: not in the file). Tag and site are required."""

    tag: str | None = None
    site: str | None = None
    description: str | None = None
    asset_class: str | None = None
    in_service: str | None = None
    original_cost: str | None = None
    depreciation: str | None = None
    dayfirst: bool = False
    decimal: str = "auto"

    @classmethod
    def guess(cls, columns: Sequence[str], overrides: Mapping[str, str | None] | None = None,
              **options: Any) -> AssetMapping:
        """The mapping guessed from header names, with ``overrides`` (field -> column) on top.

        >>> AssetMapping.guess(["Tag", "Description", "Site", "Class", "In service",
        ...                     "Original cost", "Tax depreciation"]).depreciation
        'Tax depreciation'
        """
        order = ("tag", "site", "asset_class", "in_service", "original_cost", "depreciation",
                 "description")
        guess = guess_columns(list(columns), ASSET_HINTS, order)
        guess.update(overrides or {})
        fields: dict[str, Any] = {f: guess.get(f) for f in ASSET_FIELDS}
        return cls(**fields, **options)

    def columns(self) -> list[str]:
        return [c for c in (getattr(self, f) for f in ASSET_FIELDS) if c is not None]


_DEP = re.compile(r"^(?P<method>macrs|gds|straight[ -]?line|sl|declining[ -]?balance|db|"
                  r"reducing balance)\s*(class\s*)?(?P<n>\d+)?\s*(years?|y|yr)?\s*"
                  r"(?P<rate>\d+(\.\d+)?\s*%?)?$")


def parse_depreciation_text(text: str) -> Depreciation | None:
    """A tax-depreciation cell: "MACRS 7", "SL 10", "straight line 10 years", "DB 8 25%", "none".

    >>> parse_depreciation_text("MACRS 7").macrs_class, parse_depreciation_text("SL 10").years
    (7, 10)
    >>> parse_depreciation_text("declining balance 8 25%").rate
    0.25
    """
    s = " ".join(str(text).strip().lower().replace(",", " ").split())
    if s in ("", "none", "no", "-", "n/a"):
        return None
    m = _DEP.match(s)
    if m is None or m["n"] is None:
        raise ValueError(f"'{text}' is not a tax depreciation (say MACRS 7, SL 10 or DB 8 25%)")
    n = int(m["n"])
    method = m["method"]
    if method in ("macrs", "gds"):
        if m["rate"]:
            raise ValueError(f"'{text}': MACRS takes a class only (3, 5, 7, 10, 15 or 20)")
        if n not in (3, 5, 7, 10, 15, 20):
            raise ValueError(f"'{text}': a MACRS class must be 3, 5, 7, 10, 15 or 20")
        return Depreciation("macrs", macrs_class=n)
    if not 1 <= n <= 100:
        raise ValueError(f"'{text}': the recovery period must be 1 to 100 years")
    if method in ("sl",) or method.startswith("straight"):
        if m["rate"]:
            raise ValueError(f"'{text}': straight line takes years only")
        return Depreciation("straight_line", years=n)
    if not m["rate"]:
        raise ValueError(f"'{text}': declining balance needs a rate, e.g. DB 8 25%")
    raw = m["rate"].replace(" ", "")
    rate = float(raw.rstrip("%")) / (100.0 if raw.endswith("%") or float(raw.rstrip("%")) > 1
                                     else 1.0)
    if not 0 < rate <= 1:
        raise ValueError(f"'{text}': the declining-balance rate must be above 0 and at most 100 %")
    return Depreciation("declining_balance", years=n, rate=rate)


@dataclass(frozen=True)
class AssetChange:
    """An asset of the list whose tag already exists, and what would change."""

    row: int
    before: Asset
    after: Asset

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(f for f in ASSET_FIELDS if getattr(self.before, f) != getattr(self.after, f))

    def describe(self) -> str:
        parts = [f"{f.replace('_', ' ')} {_show(getattr(self.before, f))} -> "
                 f"{_show(getattr(self.after, f))}" for f in self.fields]
        return f"row {self.row}: {self.after.tag} exists; " + "; ".join(parts)


def _show(value: Any) -> str:
    if value is None or value == "":
        return "(none)"
    if isinstance(value, Depreciation):
        return {"macrs": f"MACRS {value.macrs_class}",
                "straight_line": f"SL {value.years}",
                "declining_balance": f"DB {value.years} {value.rate:.0%}"}[value.method]
    if isinstance(value, float):
        return f"{value:,.2f}"
    return f"'{value}'"


@dataclass(frozen=True)
class AssetImportPlan:
    """What an asset-list import would do: new, changed, unchanged and rejected rows."""

    source: str
    new: tuple[Asset, ...]
    changed: tuple[AssetChange, ...]
    unchanged: tuple[str, ...]
    rejected: tuple[RejectedRow, ...]
    decimal: str = "."
    decimal_settled: bool = True

    @property
    def rows(self) -> int:
        return len(self.new) + len(self.changed) + len(self.unchanged) + len(self.rejected)

    def summary(self) -> str:
        return (f"{self.source}: {self.rows} rows: {len(self.new)} new assets, "
                f"{len(self.changed)} existing with changes, {len(self.unchanged)} unchanged, "
                f"{len(self.rejected)} rejected")

    def lines(self) -> list[str]:
        """The preview: each new asset, each change, each rejected row (one line each)."""
        out = [f"{self.source}: new {a.tag} at {a.site}" + (f" ({a.description})"
                                                            if a.description else "")
               for a in self.new]
        out += [f"{self.source}: {c.describe()}" for c in self.changed]
        out += [f"{self.source}: {r}" for r in self.rejected]
        return out


def plan_asset_import(table: pd.DataFrame, mapping: AssetMapping,
                      existing: Mapping[str, Asset], source: str = "") -> AssetImportPlan:
    """Read every data row of ``table`` against the register ``existing`` (tag -> Asset).

    Writes nothing. Raises ``StudyError`` when the mapping lacks the tag or the
    site or names a column the table does not have.

    >>> t = pd.DataFrame({"Tag": ["P-1", "P-1", "", "F-2"], "Site": ["Millbrook"] * 4,
    ...                   "Cost": ["12,500", "1", "3", "x"]}, index=[2, 3, 4, 5])
    >>> plan = plan_asset_import(t, AssetMapping(tag="Tag", site="Site", original_cost="Cost"),
    ...                          {}, "list.csv")
    >>> [a.original_cost for a in plan.new], [str(r) for r in plan.rejected]
    ([12500.0], ["row 3: tag 'P-1' is already on row 2", 'row 4: no tag', "row 5: original cost 'x' is not a number"])
    """
    where = source or "table"
    if mapping.tag is None:
        raise StudyError(where, "the mapping needs the asset tag column (--map COLUMN=tag)")
    if mapping.site is None:
        raise StudyError(where, "the mapping needs the site column (--map COLUMN=site)")
    if mapping.decimal not in DECIMAL_MARKS:
        raise StudyError(where, f"decimal mark must be 'auto', '.' or ',', not "
                                f"'{mapping.decimal}'")
    check_columns(table, mapping.columns(), where)
    if mapping.original_cost is not None and mapping.decimal == "auto":
        decimal, settled = detect_decimal(table[mapping.original_cost].tolist())
    else:
        decimal, settled = ("." if mapping.decimal == "auto" else mapping.decimal), True
    new: list[Asset] = []
    changed: list[AssetChange] = []
    unchanged: list[str] = []
    rejected: list[RejectedRow] = []
    seen: dict[str, int] = {}

    def cell(row: Any, field: str) -> Any:
        column = getattr(mapping, field)
        return None if column is None or blank(row[column]) else row[column]

    for rownum, row in table.iterrows():
        rownum = int(rownum)
        raw = tuple("" if blank(row[c]) else str(row[c]) for c in mapping.columns())

        def reject(reason: str, rownum: int = rownum, raw: tuple = raw) -> None:
            rejected.append(RejectedRow(rownum, reason, raw))

        if all(blank(row[c]) for c in mapping.columns()):
            reject("empty row")
            continue
        tag = cell(row, "tag")
        if tag is None:
            reject("no tag")
            continue
        tag = str(tag).strip()
        if any(ch.isspace() for ch in tag) or len(tag) > 120:
            reject(f"tag '{tag}' must be one word without spaces")
            continue
        if tag in seen:
            reject(f"tag '{tag}' is already on row {seen[tag]}")
            continue
        site = cell(row, "site")
        if site is None:
            reject(f"{tag}: no site")
            continue
        values: dict[str, Any] = {"tag": tag, "site": " ".join(str(site).split()),
                                  "description": str(cell(row, "description") or "").strip(),
                                  "asset_class": str(cell(row, "asset_class") or "").strip()}
        date = cell(row, "in_service")
        if date is not None:
            try:
                values["in_service"] = parse_date(date, mapping.dayfirst)
            except ValueError:
                reject(f"in-service date '{date}' is not a date")
                continue
            if values["in_service"] > _dt.date.today():
                reject(f"in-service date {values['in_service']} is in the future")
                continue
        cost = cell(row, "original_cost")
        if cost is not None:
            try:
                values["original_cost"] = parse_amount(cost, decimal)
            except ValueError:
                reject(f"original cost '{cost}' is not a number")
                continue
            if values["original_cost"] < 0:
                reject(f"original cost {values['original_cost']:g} is negative")
                continue
        dep = cell(row, "depreciation")
        if dep is not None:
            try:
                values["depreciation"] = parse_depreciation_text(str(dep))
            except ValueError as exc:
                reject(str(exc))
                continue
        asset = Asset(**values)
        try:
            _check_asset(asset)
        except StudyError as exc:
            reject(f"{exc.path}: {exc.message}")
            continue
        seen[tag] = rownum
        before = existing.get(tag)
        if before is None:
            new.append(asset)
            continue
        # fields the list does not carry keep the register's value
        after = dataclasses.replace(before, **{
            f: getattr(asset, f) for f in ASSET_FIELDS
            if f == "tag" or getattr(mapping, f) is not None})
        if after == before:
            unchanged.append(tag)
        elif before.retired:
            reject(f"{tag} is retired (read only); the list would change "
                   + ", ".join(AssetChange(rownum, before, after).fields))
        else:
            changed.append(AssetChange(rownum, before, after))
    return AssetImportPlan(source or "table", tuple(new), tuple(changed), tuple(unchanged),
                           tuple(rejected), decimal, settled)


def plan_asset_file(wb: Workbook, path: str | Path, mapping: AssetMapping | None = None,
                    overrides: Mapping[str, str | None] | None = None,
                    sheet: str | int | None = None, **options: Any) -> AssetImportPlan:
    """Read ``path`` and plan its import into ``wb`` (mapping guessed unless given)."""
    path = Path(path)
    table = read_table(path, sheet)
    if mapping is None:
        mapping = AssetMapping.guess(list(table.columns), overrides, **options)
    return plan_asset_import(table, mapping, {a.tag: a for a in wb.assets()}, path.name)


def apply_asset_import(wb: Workbook, plan: AssetImportPlan, update_existing: bool = False
                       ) -> int:
    """Write the plan in one transaction: the new assets (and their sites); the changes
    to existing assets only with ``update_existing``. Returns how many assets were written.
    """
    with wb.transaction():
        for asset in plan.new:
            wb.new_asset(asset)
        if update_existing:
            for change in plan.changed:
                wb.edit_asset(change.before.tag, change.after)
    return len(plan.new) + (len(plan.changed) if update_existing else 0)
