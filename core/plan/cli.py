"""``tenure plan``: the fleet capital plan from the command line (docs/method.md §6, §10).

    tenure plan WORKBOOK|STUDIES.json [--horizon H] [--budget AMOUNT | --budgets A0,A1,...]
                [--net] [--must TAG ...] [--per-site-limit N] [--json] [-o PLAN.pdf|PLAN.xlsx]
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.plan.build import DEFAULT_HORIZON, make_plan
from core.plan.result import CapitalPlan
from core.plan.solve import TIME_LIMIT


def _amount(text: str, where: str) -> float:
    try:
        value = float(text.replace("_", ""))
    except ValueError:
        raise StudyError(where, f"'{text}' is not an amount") from None
    if not math.isfinite(value) or value < 0:
        raise StudyError(where, f"'{text}' must be an amount of 0 or more")
    return value


def parse_budgets(budget: str | None, budgets: str | None, horizon: int | None
                  ) -> tuple[int, list[float | None] | None]:
    """(horizon, budgets) from the options; a --budgets list sets the horizon when none is given.

    >>> parse_budgets(None, "100,200", None)
    (2, [100.0, 200.0])
    >>> parse_budgets("5e5", None, 3)
    (3, [500000.0, 500000.0, 500000.0])
    """
    if budget is not None and budgets is not None:
        raise StudyError("--budgets", "give either --budget or --budgets, not both")
    if horizon is not None and not 1 <= horizon <= 50:
        raise StudyError("--horizon", "must be a whole number of years from 1 to 50")
    if budgets is not None:
        parts = [p.strip() for p in budgets.split(",")]
        amounts: list[float | None] = [_amount(p, "--budgets") for p in parts]
        if horizon is None:
            horizon = len(amounts)
        if len(amounts) != horizon:
            raise StudyError("--budgets", f"{len(amounts)} amounts for a {horizon}-year "
                             f"horizon; give one per plan year")
        return horizon, amounts
    horizon = DEFAULT_HORIZON if horizon is None else horizon
    if budget is not None:
        return horizon, [_amount(budget, "--budget")] * horizon
    return horizon, None


def format_plan(plan: CapitalPlan) -> str:
    """The plan as plain-text tables for the terminal."""
    from core.report import table
    from core.text import money

    years = plan.calendar_years
    head = ["", *[str(y) for y in years]]
    rows = []
    if any(b is not None for b in plan.budgets):
        rows.append(["budget", *[money(b) if b is not None else "-" for b in plan.budgets]])
    rows.append(["capital", *[money(v) for v in plan.capital_by_year]])
    rows.append(["net of sales", *[money(v) for v in plan.net_capital_by_year]])
    for s in plan.capital_by_site:
        rows.append([f"  {s.site}", *[money(v) for v in s.capital]])
    out = [f"Capital plan {years[0]}-{years[-1]} ({plan.status}). {plan.basis_note}",
           table(head, rows), ""]
    arows = []
    for a in plan.assets:
        when = str(plan.first_year + a.year) if a.year is not None else "later"
        best = str(plan.first_year + a.best_year) if a.best_year is not None else "later"
        arows.append([a.tag or a.title, a.site or "", when, best, a.challenger or "-",
                      money(a.capital) if a.year is not None else "-", money(a.value),
                      money(a.deferral_cost), "yes" if a.forced else ""])
    out += [table(["asset", "site", "year", "best year", "challenger", "capital", "value",
                   "deferral cost", "must"], arows), ""]
    out.append(f"Total value {money(plan.objective)}; without the budget "
               f"{money(plan.unconstrained_objective)}; the budget costs "
               f"{money(plan.budget_cost)}.")
    if plan.rule_objective is not None:
        out.append(f"Funding by value per unit of capital would give {money(plan.rule_objective)}"
                   f" ({money(plan.rule_gap or 0.0)} less than this plan).")
    else:
        out.append("Funding by value per unit of capital finds no plan within the budgets.")
    return "\n".join(out)


def run_plan(args: argparse.Namespace) -> int:
    """tenure plan: solve the capital plan and print or write it."""
    from core.plan.load import load_plan_source

    horizon, budgets = parse_budgets(args.budget, args.budgets, args.horizon)
    if not (math.isfinite(args.time_limit) and args.time_limit > 0):
        raise StudyError("--time-limit", "must be a number of seconds above 0")
    out = Path(args.output) if args.output else None
    if out is not None:
        if out.suffix.lower() not in (".pdf", ".xlsx"):
            raise StudyError("-o", "the output must end in .pdf or .xlsx")
        if out.is_dir():
            raise StudyError("-o", f"{out} is a folder")
        if not out.parent.exists():
            raise StudyError("-o", f"folder {out.parent} does not exist")
    if args.sign and (out is None or out.suffix.lower() != ".pdf"):
        raise StudyError("--sign", "signs the plan memo: give -o PLAN.pdf")
    if args.passphrase_file and not args.sign:
        raise StudyError("--sign", "needed with --passphrase-file (the identity file, .p12)")
    if args.sign:  # a wrong passphrase is refused before any work is done
        from core.memo.identity import load_identity, read_passphrase_file

        if not args.passphrase_file:
            raise StudyError("--passphrase-file", "needed with --sign")
        load_identity(args.sign, read_passphrase_file(args.passphrase_file))
    source = load_plan_source(args.file, args.must or ())
    plan = make_plan(source.inputs, horizon=horizon, budgets=budgets, net=args.net,
                     per_site_limit=args.per_site_limit, first_year=source.first_year,
                     time_limit=args.time_limit)
    if out is not None:
        _write(plan, source, out, args)
    if args.json:
        json.dump(plan.to_json(), sys.stdout, ensure_ascii=False, allow_nan=False,
                  separators=(",", ":") if len(plan.assets) > 200 else None,
                  indent=None if len(plan.assets) > 200 else 2)
        sys.stdout.write("\n")
    elif out is None:
        sys.stdout.write(format_plan(plan) + "\n")
    return 0


def _write(plan: CapitalPlan, source: Any, out: Path, args: argparse.Namespace) -> None:
    if out.suffix.lower() == ".xlsx":
        from core.plan.xlsx import write_plan_xlsx

        write_plan_xlsx(plan, out)
    else:
        from core.plan.memo import PlanMemoOptions, issue_plan_memo

        passphrase = None
        if args.sign:
            from core.memo.identity import read_passphrase_file

            if not args.passphrase_file:
                raise StudyError("--passphrase-file", "needed with --sign")
            passphrase = read_passphrase_file(args.passphrase_file)
        opts = PlanMemoOptions(currency=args.currency, prepared_by=args.prepared_by,
                               organisation=args.organisation)
        issue_plan_memo(plan, source, out, opts, identity=args.sign, passphrase=passphrase,
                        role=args.role, time_limit=args.time_limit)
    print(f"plan written to {out}", file=sys.stderr if args.json else sys.stdout)


def register(subparsers: Any) -> None:
    """Add ``tenure plan`` to the CLI."""
    p = subparsers.add_parser(
        "plan", help="the capital plan: which assets to replace in which year under a budget",
        description="Plan the fleet's replacements over a horizon of plan years (year 0 = the "
                    "study year): each asset may be replaced in any year up to the end of its "
                    "defender's life; the plan with the most total value whose capital keeps "
                    "every year's budget is found by mixed-integer programming (HiGHS). Values "
                    "are relative to replacing now, on each study's decision basis.")
    p.add_argument("file", metavar="WORKBOOK|STUDIES.json", help=".tenure workbook or study JSON")
    p.add_argument("--horizon", type=int, default=None, metavar="H",
                   help=f"plan years (default {DEFAULT_HORIZON}, or the number of --budgets)")
    p.add_argument("--budget", default=None, metavar="AMOUNT",
                   help="the capital budget of every plan year")
    p.add_argument("--budgets", default=None, metavar="A0,A1,...",
                   help="one capital budget per plan year, comma separated")
    p.add_argument("--net", action="store_true",
                   help="budgets apply to capital net of the defender's sale proceeds")
    p.add_argument("--must", nargs="+", metavar="TAG", default=None,
                   help="assets to replace now (tags; study titles for a study file)")
    p.add_argument("--per-site-limit", type=int, default=None, metavar="N",
                   help="at most N replacements per site per year")
    p.add_argument("--time-limit", type=float, default=TIME_LIMIT, metavar="SECONDS",
                   help=f"stop the solver after this long and report the gap to the best "
                        f"possible plan (default {TIME_LIMIT:g})")
    p.add_argument("--json", action="store_true", help="print the plan as one JSON object")
    p.add_argument("-o", "--output", default=None, metavar="PLAN.pdf|PLAN.xlsx",
                   help="write the plan memo (PDF) or the plan tables (XLSX)")
    p.add_argument("--currency", default="GBP", help="currency code for the memo")
    p.add_argument("--prepared-by", default=None, metavar="NAME")
    p.add_argument("--organisation", default=None, metavar="ORG")
    p.add_argument("--sign", default=None, metavar="ID.p12", help="sign the memo")
    p.add_argument("--passphrase-file", default=None, metavar="F")
    p.add_argument("--role", default="prepared", choices=("prepared", "reviewed", "approved"))
    p.set_defaults(func=run_plan)
