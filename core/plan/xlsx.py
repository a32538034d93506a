"""The capital plan's tables as an XLSX workbook (openpyxl): by year, by asset, deferred."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.export import escape_cell
from core.plan.result import CapitalPlan


def plan_tables(plan: CapitalPlan) -> dict[str, list[list[Any]]]:
    """Sheet name -> rows (first row = header); years are calendar years, None = after."""
    years = plan.calendar_years
    by_year: list[list[Any]] = [["row", *years]]
    by_year.append(["budget", *plan.budgets])
    by_year.append(["capital", *plan.capital_by_year])
    by_year += [[f"capital: {s.site}", *s.capital] for s in plan.capital_by_site]
    by_year.append(["net capital", *plan.net_capital_by_year])
    by_year.append(["capital without a budget", *plan.unconstrained_capital_by_year])

    def cal(y: int | None) -> int | str:
        return plan.first_year + y if y is not None else "after the horizon"

    assets: list[list[Any]] = [["title", "tag", "site", "year", "challenger", "capital",
                                "net capital", "value", "best year", "deferral cost",
                                "must replace", "simple rule year", "basis"]]
    for a in plan.assets:
        assets.append([a.title, a.tag, a.site, cal(a.year), a.challenger,
                       a.capital, a.net_capital, a.value, cal(a.best_year), a.deferral_cost,
                       a.forced, cal(a.rule_year) if plan.rule_objective is not None else None,
                       a.basis])
    deferred: list[list[Any]] = [["title", "tag", "site", "best year", "planned year",
                                  "deferral cost"]]
    for a in sorted(plan.deferred, key=lambda a: -a.deferral_cost):
        deferred.append([a.title, a.tag, a.site, cal(a.best_year), cal(a.year), a.deferral_cost])
    summary: list[list[Any]] = [["item", "value"],
                                ["first year", plan.first_year], ["horizon", plan.horizon],
                                ["status", plan.status], ["objective", plan.objective],
                                ["unconstrained objective", plan.unconstrained_objective],
                                ["budget cost", plan.budget_cost],
                                ["simple rule objective", plan.rule_objective],
                                ["simple rule gap", plan.rule_gap],
                                ["budgets on net capital", plan.net],
                                ["per-site limit", plan.per_site_limit],
                                ["basis", plan.basis_note]]
    return {"summary": summary, "by year": by_year, "assets": assets, "deferred": deferred}


def write_plan_xlsx(plan: CapitalPlan, path: str | Path) -> Path:
    """Write :func:`plan_tables` to ``path`` (text cells never become formulas)."""
    from openpyxl import Workbook as XLWorkbook
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    path = Path(path)
    book = XLWorkbook()
    book.remove(book.active)
    for name, rows in plan_tables(plan).items():
        sheet = book.create_sheet(name)
        for row in rows:
            sheet.append([v if isinstance(v, (int, float)) and not isinstance(v, bool)
                          else escape_cell(v) for v in row])
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for col in range(1, (sheet.max_column or 0) + 1):
            sheet.column_dimensions[get_column_letter(col)].width = 40 if col == 1 else 14
        for row in sheet.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    cell.data_type = "s"
    tmp = path.with_name(path.name + ".part")
    try:
        book.save(tmp)
        os.replace(tmp, path)
    except OSError as exc:
        raise StudyError(str(path), f"cannot write ({exc.strerror or exc})") from None
    return path
