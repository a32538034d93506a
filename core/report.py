"""Readable text tables of a study result, for ``tenure study`` without ``--json``."""

from __future__ import annotations

from collections.abc import Sequence

from core.bases import basis_views
from core.currency import DEFAULT_CURRENCY, currency_symbol, format_money
from core.results import AlternativeResult, StudyResult
from core.study import money, years


def table(headers: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    """A plain text table: numbers right-aligned, text and the first column left-aligned.

    >>> print(table(["k", "AW"], [["1", "-5,000"], ["2", "-4,619"]]))
    k      AW
    -  ------
    1  -5,000
    2  -4,619
    """
    widths = [max(len(str(h)), *(len(str(r[c])) for r in rows)) for c, h in enumerate(headers)]

    def line(cells: Sequence[str]) -> str:
        parts = [str(cells[0]).ljust(widths[0])]
        parts += [str(cell).rjust(widths[c]) if _numeric(str(cell)) else str(cell).ljust(widths[c])
                  for c, cell in enumerate(cells) if c > 0]
        return "  ".join(parts).rstrip()

    return "\n".join([line(headers), line(["-" * w for w in widths]), *(line(r) for r in rows)])


def _numeric(cell: str) -> bool:
    return cell.replace(",", "").replace(".", "").replace("-", "").replace("%", "").isdigit() \
        or set(cell) <= {"-"}


def _alternative_table(alt: AlternativeResult) -> str:
    price_label = "market value today" if alt.role == "defender" else "first cost"
    head = (f"{alt.role.capitalize()}: {alt.name}  ({price_label} {money(alt.price)}, "
            f"max life {alt.max_life} years)")
    rows = []
    for k in range(alt.max_life):
        mark = " *" if k + 1 == alt.economic_life else ""
        rows.append([f"{k + 1}{mark}", money(alt.market_values[k]), money(alt.operating_costs[k]),
                     money(alt.extra_costs[k]), money(alt.marginal_cost[k]),
                     money(alt.capital_recovery[k]), money(alt.operating[k]),
                     money(alt.annual_worth[k])])
    body = table(["year k", "market value S_k", "operating C_k", "extra X_k", "marginal cost",
                  "capital recovery", "operating AW", "AW_k"], rows)
    return f"{head}\n{body}\n(* economic service life: {years(alt.economic_life)}, " \
           f"AW {money(alt.annual_worth_at_economic_life)}, " \
           f"EAC {money(-alt.annual_worth_at_economic_life)})"


def format_study(result: StudyResult, currency: str = DEFAULT_CURRENCY) -> str:
    """Every table and the recommendation of one study, as text (amounts in ``currency``)."""
    study = result.study
    rec = result.recommendation
    out = [f"Study: {study.title}", "=" * (7 + len(study.title)),
           f"MARR {study.marr:.2%} per year (rate used {result.rate:.4%}); end-of-year cash flows; "
           "AW is signed (costs negative), EAC = -AW.",
           f"Amounts in {currency_symbol(currency)}.",
           f"Study period: {'none' if study.study_period is None else f'{study.study_period} years'}"]
    if study.inflation is not None:
        from core.inflation import describe

        out.append(describe(study))
    views = basis_views(result)
    before = next(v for v in views if v.basis == "before-tax")
    taxed = len(views) > 1
    if taxed and result.after_tax is not None and hasattr(result.after_tax, "format_text"):
        head = f"{views[0].title}:"
        out += ["", head, "-" * len(head), result.after_tax.format_text()]
    if taxed:
        head = f"{before.title}:"
        out += ["", head, "-" * len(head)]
    label = f" ({before.label})" if taxed else ""
    for alt in result.alternatives:
        out += ["", _alternative_table(alt)]
    out += ["", f"Ranking at each economic service life{label}:",
            table(["rank", "alternative", "role", "ESL (years)", "AW at ESL", "EAC at ESL"],
                  [[str(a.rank), a.name, a.role, str(a.economic_life),
                    money(a.annual_worth_at_economic_life),
                    money(-a.annual_worth_at_economic_life)] for a in before.ranking])]
    if before.options:
        rows = [[str(o.defender_years), o.challenger or "-", str(o.challenger_years),
                 money(o.annual_worth) if o.annual_worth is not None else "-",
                 "yes" if o.feasible else f"no: {o.reason}"] for o in before.options]
        out += ["", f"Study-period options over {study.study_period} years{label}:",
                table(["defender years", "then challenger", "challenger years", "AW", "feasible"],
                      rows)]
    if result.risk is not None and hasattr(result.risk, "format_text"):
        out += ["", result.risk.format_text()]
    if getattr(result, "technology", None) is not None:
        out += ["", result.technology.format_text()]
    check = rec.one_more_year
    out += ["", f"Recommendation ({rec.basis}): {rec.action.upper()}", rec.reason]
    if rec.replacement_value is not None:
        d = result.defender
        cur = currency_symbol(currency)
        out.append(f"Replacement value of {d.name}: {format_money(rec.replacement_value, cur)} "
                   f"(market value today {format_money(d.price, cur)}); at a market value "
                   "above it, replacing wins.")
    if check:
        verdict = "stays below" if check["keep_next_year"] else "does not stay below"
        out.append(f"One-more-year check: next year's marginal cost of the defender "
                   f"({money(check['defender_marginal_cost'])}) {verdict} the best challenger's "
                   f"EAC ({money(check['challenger_annual_cost'])}).")
    if study.study_period is None and rec.action == "keep":
        out.append(f"Under today's estimates, replace in {rec.planned_defender_years} "
                   f"year(s) with {rec.best_challenger}.")
    for note in result.warnings:
        out.append(f"Warning: {note}")
    return "\n".join(out)
