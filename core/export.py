"""Export study results and their tables to CSV and XLSX, safe against formula injection.

Everything comes from the study results (a result object or its ``core.jsonout.study_json`` dict),
read by basis through :func:`core.bases.basis_views`; nothing is recomputed. Every row
names its basis (``before-tax`` or ``after-tax``). Tables:

* ``summary``: one row per alternative of each study, on the basis its recommendation
  rests on (after tax when the study has tax): recommendation, replacement value,
  reason, ESL and AW at ESL;
* ``annual_worth``: AW_k of every alternative for each retention k on that basis
  (signed: costs < 0);
* ``alternatives``: the before-tax year-by-year detail, one row per alternative and
  year j: S_j, C_j, X_j, capital recovery, operating AW, marginal cost, AW;
* ``study_period_options``: the options of a study-period comparison, on that basis;
* only when a study has tax: ``after_tax_detail`` (D_k, BV_k, after-tax disposal,
  PW_k, AW_k by retention) and the before-tax comparison ``summary_before_tax``,
  ``annual_worth_before_tax``, ``study_period_options_before_tax``;
* ``warnings``.

A text cell beginning with ``=``, ``+``, ``-``, ``@``, a tab or a carriage
return is written with a leading single quote, so a spreadsheet shows it as
text instead of running it (common practice, OWASP "CSV injection" advice).
Numbers stay numbers.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from core.bases import BasisView, basis_views
from core.currency import DEFAULT_CURRENCY, currency_symbol
from core.errors import StudyError
from core.fsutil import atomic_write_bytes, is_disk_full, remove_leftovers
from core.jsonout import study_json
from core.results import StudyResult

TABLES = ("summary", "annual_worth", "alternatives", "study_period_options", "after_tax_detail",
          "summary_before_tax", "annual_worth_before_tax", "study_period_options_before_tax",
          "warnings")
#: Written only when a study has tax: the after-tax detail and the before-tax comparison.
TAX_TABLES = ("after_tax_detail", "summary_before_tax", "annual_worth_before_tax",
              "study_period_options_before_tax")
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


def _results(results: Any) -> list[Any]:
    """Each study's result object (or its JSON dict) from one, several or {"studies": [...]}."""
    if isinstance(results, dict) and "studies" in results:
        return [dict(r) for r in results["studies"]]
    if isinstance(results, (dict, StudyResult)):
        return [results]
    return list(results)


def _round(x: float | None, digits: int = 4) -> float | None:
    """As ``--json`` rounds (core.results): money to 4 decimals, the replacement value to 2."""
    return None if x is None else round(float(x), digits)


def _summary_rows(title: str, res: dict[str, Any], view: BasisView,
                  currency: str) -> list[list[Any]]:
    rec = view.recommendation
    rows = []
    for alt in view.alternatives:
        best = _round(alt.annual_worth_at_economic_life)
        rows.append([title, res.get("fingerprint"), res.get("marr"), res.get("study_period"),
                     rec.action, rec.challenger, rec.defender_years,
                     _round(rec.replacement_value, 2), view.basis, rec.reason, alt.name,
                     alt.role, alt.economic_life, best, None if best is None else -best,
                     currency])
    return rows


def _aw_table(entries: list[tuple[str, BasisView]]) -> list[list[Any]]:
    header: list[Any] = ["study", "basis", "retention_years"]
    body: list[tuple[str, str, int, dict[str, float | None]]] = []
    for title, view in entries:
        for a in view.alternatives:
            if a.name not in header:
                header.append(a.name)
        longest = max((len(a.annual_worth) for a in view.alternatives), default=0)
        for k in range(longest):
            body.append((title, view.basis, k + 1,
                         {a.name: _round(a.annual_worth[k]) if k < len(a.annual_worth) else None
                          for a in view.alternatives}))
    return [header] + [[t, b, k, *[row.get(n) for n in header[3:]]] for t, b, k, row in body]


def _option_rows(title: str, view: BasisView) -> list[list[Any]]:
    return [[title, view.basis, o.defender_years, o.challenger, o.challenger_years,
             _round(o.annual_worth), o.feasible, o.reason] for o in view.options]


def result_tables(results: Any, currency: str = DEFAULT_CURRENCY) -> dict[str, list[list[Any]]]:
    """The export tables (header row first) of one result, several, or ``{"studies": [...]}``.

    Each study's ``summary``, ``annual_worth`` and ``study_period_options`` rows are on the
    basis its recommendation rests on (after tax when it has tax), and every row says
    which in its ``basis`` column. When a study has tax, ``after_tax_detail`` holds its
    after-tax year-by-year figures and the ``*_before_tax`` tables its before-tax
    comparison; those tables appear only when some study has tax. ``alternatives`` is
    the before-tax year-by-year detail (inputs and the parts of AW). The summaries name
    the ``currency`` of every amount (shown as :func:`core.currency.currency_symbol`).

    >>> t = result_tables({"title": "T", "alternatives": [
    ...     {"name": "Old", "role": "defender", "annual_worth": [-5.0, -4.0], "economic_life": 2,
    ...      "annual_worth_at_economic_life": -4.0}],
    ...     "recommendation": {"action": "keep"}, "study_period_options": []})
    >>> t["annual_worth"]
    [['study', 'basis', 'retention_years', 'Old'], ['T', 'before-tax', 1, -5.0], ['T', 'before-tax', 2, -4.0]]
    """
    summary_head = ["study", "fingerprint", "marr", "study_period", "action", "challenger",
                    "defender_years", "replacement_value", "basis", "reason",
                    "alternative", "role", "economic_life", "annual_worth_at_economic_life",
                    "equivalent_annual_cost_at_economic_life", "currency"]
    options_head = ["study", "basis", "defender_years", "challenger", "challenger_years",
                    "annual_worth", "feasible", "reason"]
    out: dict[str, list[list[Any]]] = {
        "summary": [summary_head],
        "annual_worth": [],
        "alternatives": [["study", "basis", "alternative", "role", "year", "market_value",
                          "operating_cost", "extra_cost", "capital_recovery",
                          "operating_annual_worth", "marginal_cost", "annual_worth"]],
        "study_period_options": [options_head],
        "after_tax_detail": [["study", "basis", "alternative", "role", "retention_years",
                              "depreciation", "book_value_at_disposal", "after_tax_disposal",
                              "present_worth", "annual_worth"]],
        "summary_before_tax": [list(summary_head)],
        "annual_worth_before_tax": [],
        "study_period_options_before_tax": [list(options_head)],
        "warnings": [["study", "warning"]],
    }
    symbol = currency_symbol(currency)
    decision_aw: list[tuple[str, BasisView]] = []
    before_aw: list[tuple[str, BasisView]] = []
    taxed = False
    for item in _results(results):
        res = _as_json(item)
        views = basis_views(item)
        title = res.get("title", "")
        decision = views[0]
        out["summary"] += _summary_rows(title, res, decision, symbol)
        decision_aw.append((title, decision))
        out["study_period_options"] += _option_rows(title, decision)
        for alt in res.get("alternatives") or []:
            aw = alt.get("annual_worth") or []
            cols = {k: alt.get(k) or [] for k in ("market_values", "operating_costs",
                                                  "extra_costs", "capital_recovery",
                                                  "operating_annual_worth", "marginal_cost")}
            for j, value in enumerate(aw):
                out["alternatives"].append(
                    [title, "before-tax", alt.get("name"), alt.get("role"), j + 1,
                     *[(c[j] if j < len(c) else None) for c in cols.values()], value])
            at = alt.get("after_tax")
            if isinstance(at, dict):
                cols = {k: at.get(k) or [] for k in ("depreciation", "book_value_at_disposal",
                                                     "after_tax_disposal", "present_worth",
                                                     "annual_worth")}
                for j in range(len(cols["annual_worth"])):
                    out["after_tax_detail"].append(
                        [title, "after-tax", alt.get("name"), alt.get("role"), j + 1,
                         *[(c[j] if j < len(c) else None) for c in cols.values()]])
        for view in views[1:]:
            taxed = True
            out["summary_before_tax"] += _summary_rows(title, res, view, symbol)
            before_aw.append((title, view))
            out["study_period_options_before_tax"] += _option_rows(title, view)
        for w in res.get("warnings") or []:
            out["warnings"].append([title, w])
    out["annual_worth"] = _aw_table(decision_aw)
    out["annual_worth_before_tax"] = _aw_table(before_aw)
    if not taxed:
        for name in TAX_TABLES:
            del out[name]
    return {name: out[name] for name in TABLES if name in out}


def _rows(table: Sequence[Sequence[Any]]) -> Iterable[list[Any]]:
    for row in table:
        yield [escape_cell(v) for v in row]


def export_csv(results: Any, path: str | Path, table: str = "alternatives",
               currency: str = DEFAULT_CURRENCY) -> Path:
    """Write one table (see :data:`TABLES`) as UTF-8 CSV (with BOM, for spreadsheets)."""
    if table not in TABLES:
        raise StudyError("--table", f"unknown table '{table}' (tables: {', '.join(TABLES)})")
    tables = result_tables(results, currency)
    if table not in tables:
        raise StudyError("--table", f"'{table}' is written only for a study with tax")
    buffer = io.StringIO(newline="")
    csv.writer(buffer).writerows(_rows(tables[table]))
    return _write(Path(path), buffer.getvalue().encode("utf-8-sig"))


def _write(path: Path, data: bytes) -> Path:
    """Write the export whole or not at all; leftovers of an earlier killed export go first."""
    remove_leftovers(path.parent, stem=path.name + ".")
    return atomic_write_bytes(path, data)


def export_xlsx(results: Any, path: str | Path, currency: str = DEFAULT_CURRENCY) -> Path:
    """Write every table as a sheet of one XLSX workbook (text cells never become formulas)."""
    from openpyxl import Workbook as XLWorkbook
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    path = Path(path)
    book = XLWorkbook()
    book.remove(book.active)
    for name, table in result_tables(results, currency).items():
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
    buffer = io.BytesIO()  # built in memory: a full disk cannot leave half a zip behind
    failure = _save_quietly(book, buffer)
    if failure is not None:
        raise StudyError(str(path), failure)
    return _write(path, buffer.getvalue())


def _save_quietly(book: Any, buffer: io.BytesIO) -> str | None:
    """Save ``book`` into ``buffer``; the refusal text on failure, else None.

    openpyxl writes each sheet through a temporary file; when that fails (a full disk)
    the half-made files are closed by the garbage collector, which would print
    "Exception ignored ..." tracebacks. They are collected here with that hook silenced.
    """
    import gc
    import sys

    failure = None
    hook = sys.unraisablehook
    sys.unraisablehook = lambda _unraisable: None
    try:
        try:
            book.save(buffer)
        except Exception as exc:  # noqa: BLE001 - openpyxl and lxml raise several kinds
            failure = ("disk full: nothing was written and the previous file is unchanged; "
                       "free some space or choose another folder" if is_disk_full(exc)
                       else f"cannot write ({type(exc).__name__}: {exc})")
        gc.collect()
    finally:
        sys.unraisablehook = hook
    return failure
