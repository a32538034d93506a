"""Export study results and their tables to CSV and XLSX, safe against formula injection.

Everything comes from the study's JSON object (``core.jsonout.study_json``; a
``StudyResult`` or that dict may be passed); nothing is recomputed. Tables:

* ``summary``: one row per study (recommendation, replacement value, basis, reason);
* ``annual_worth``: AW_k of every alternative for each retention k (signed: costs < 0);
* ``alternatives``: long form, one row per alternative and year j: S_j, C_j, X_j,
  capital recovery, operating AW, marginal cost, AW;
* ``study_period_options``: the options of a study-period comparison;
* ``warnings``.

A text cell beginning with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
return is written with a leading single quote, so a spreadsheet shows it as
text instead of running it (common practice, OWASP "CSV injection" advice).
Numbers stay numbers.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.jsonout import study_json
from core.results import StudyResult

TABLES = ("summary", "annual_worth", "alternatives", "study_period_options", "warnings")
_DANGEROUS = ("=", "+", "-", "@", "\t", "\r")


def escape_cell(value: Any) -> Any:
    """A cell value safe for a spreadsheet: risky text gets a leading quote; numbers stay.

    >>> escape_cell("=HYPERLINK(1)"), escape_cell("-2+3"), escape_cell(-2.5), escape_cell("ok")
    ("'=HYPERLINK(1)", "'-2+3", -2.5, 'ok')
    >>> escape_cell(None), escape_cell(True)
    ('', 'true')
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else str(value)
    if hasattr(value, "item") and not isinstance(value, str):  # numpy scalar
        return escape_cell(value.item())
    text = str(value)
    return "'" + text if text.startswith(_DANGEROUS) else text


def _as_json(result: StudyResult | dict[str, Any]) -> dict[str, Any]:
    return study_json(result) if isinstance(result, StudyResult) else dict(result)


def _results(results: Any) -> list[dict[str, Any]]:
    if isinstance(results, dict) and "studies" in results:
        return [dict(r) for r in results["studies"]]
    if isinstance(results, (dict, StudyResult)):
        return [_as_json(results)]
    return [_as_json(r) for r in results]


def result_tables(results: Any) -> dict[str, list[list[Any]]]:
    """The export tables (header row first) of one result, several, or ``{"studies": [...]}``.

    >>> t = result_tables({"title": "T", "alternatives": [
    ...     {"name": "Old", "role": "defender", "annual_worth": [-5.0, -4.0], "economic_life": 2,
    ...      "annual_worth_at_economic_life": -4.0}],
    ...     "recommendation": {"action": "keep"}, "study_period_options": []})
    >>> t["annual_worth"]
    [['study', 'retention_years', 'Old'], ['T', 1, -5.0], ['T', 2, -4.0]]
    """
    out: dict[str, list[list[Any]]] = {
        "summary": [["study", "fingerprint", "marr", "study_period", "action", "challenger",
                     "defender_years", "replacement_value", "basis", "reason",
                     "alternative", "role", "economic_life", "annual_worth_at_economic_life",
                     "equivalent_annual_cost_at_economic_life"]],
        "annual_worth": [],
        "alternatives": [["study", "alternative", "role", "year", "market_value",
                          "operating_cost", "extra_cost", "capital_recovery",
                          "operating_annual_worth", "marginal_cost", "annual_worth"]],
        "study_period_options": [["study", "defender_years", "challenger", "challenger_years",
                                  "annual_worth", "feasible", "reason"]],
        "warnings": [["study", "warning"]],
    }
    aw_header: list[Any] = ["study", "retention_years"]
    aw_rows: list[list[Any]] = []
    for res in _results(results):
        title = res.get("title", "")
        rec = res.get("recommendation") or {}
        alts = res.get("alternatives") or []
        for alt in alts:
            best = alt.get("annual_worth_at_economic_life")
            out["summary"].append([
                title, res.get("fingerprint"), res.get("marr"), res.get("study_period"),
                rec.get("action"), rec.get("challenger"), rec.get("defender_years"),
                rec.get("replacement_value"), rec.get("basis"), rec.get("reason"),
                alt.get("name"), alt.get("role"), alt.get("economic_life"), best,
                None if best is None else -best])
            aw = alt.get("annual_worth") or []
            cols = {k: alt.get(k) or [] for k in ("market_values", "operating_costs",
                                                  "extra_costs", "capital_recovery",
                                                  "operating_annual_worth", "marginal_cost")}
            for j, value in enumerate(aw):
                out["alternatives"].append(
                    [title, alt.get("name"), alt.get("role"), j + 1,
                     *[(c[j] if j < len(c) else None) for c in cols.values()], value])
        names = [a.get("name") for a in alts]
        for name in names:
            if name not in aw_header:
                aw_header.append(name)
        longest = max((len(a.get("annual_worth") or []) for a in alts), default=0)
        for k in range(longest):
            row: dict[Any, Any] = {a.get("name"): (a["annual_worth"][k]
                                                   if k < len(a.get("annual_worth") or [])
                                                   else None) for a in alts}
            aw_rows.append([title, k + 1, row])
        for opt in res.get("study_period_options") or []:
            out["study_period_options"].append(
                [title, opt.get("defender_years"), opt.get("challenger"),
                 opt.get("challenger_years"), opt.get("annual_worth"), opt.get("feasible"),
                 opt.get("reason")])
        for w in res.get("warnings") or []:
            out["warnings"].append([title, w])
    out["annual_worth"] = [aw_header] + [
        [t, k, *[r.get(n) for n in aw_header[2:]]] for t, k, r in aw_rows]
    return out


def _rows(table: Sequence[Sequence[Any]]) -> Iterable[list[Any]]:
    for row in table:
        yield [escape_cell(v) for v in row]


def export_csv(results: Any, path: str | Path, table: str = "alternatives") -> Path:
    """Write one table (see :data:`TABLES`) as UTF-8 CSV (with BOM, for spreadsheets)."""
    if table not in TABLES:
        raise StudyError("--table", f"unknown table '{table}' (tables: {', '.join(TABLES)})")
    path = Path(path)
    tmp = path.with_name(path.name + ".part")
    try:
        with tmp.open("w", newline="", encoding="utf-8-sig") as fh:
            csv.writer(fh).writerows(_rows(result_tables(results)[table]))
        os.replace(tmp, path)
    except OSError as exc:
        raise StudyError(str(path), f"cannot write ({exc.strerror or exc})") from None
    return path


def export_xlsx(results: Any, path: str | Path) -> Path:
    """Write every table as a sheet of one XLSX workbook (text cells never become formulas)."""
    from openpyxl import Workbook as XLWorkbook
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    path = Path(path)
    book = XLWorkbook()
    book.remove(book.active)
    for name, table in result_tables(results).items():
        sheet = book.create_sheet(name)
        for row in _rows(table):
            sheet.append(row)
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for col in range(1, (sheet.max_column or 0) + 1):
            sheet.column_dimensions[get_column_letter(col)].width = 16
        for row in sheet.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"  # a string is never a formula, whatever it starts with
    tmp = path.with_name(path.name + ".part")
    try:
        book.save(tmp)
        os.replace(tmp, path)
    except OSError as exc:
        raise StudyError(str(path), f"cannot write ({exc.strerror or exc})") from None
    return path
