"""Readable text tables of a study result, for ``tenure study`` without ``--json``."""

from __future__ import annotations

import math
from collections.abc import Sequence

from core.bases import basis_views
from core.currency import DEFAULT_CURRENCY, currency_symbol, format_money
from core.inflation import describe
from core.results import (
    PERCENTILES,
    AlternativeResult,
    BasisResult,
    RiskResult,
    StudyResult,
    TechnologyPlan,
)
from core.risk.labels import input_label
from core.text import money, number, years


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
    assert alt.capital_recovery is not None and alt.operating is not None
    assert alt.marginal_cost is not None
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
        out.append(describe(study))
    views = basis_views(result)
    before = next(v for v in views if v.basis == "before-tax")
    taxed = len(views) > 1
    if result.after_tax is not None:
        head = f"{views[0].title}:"
        out += ["", head, "-" * len(head), format_after_tax(result.after_tax, result.before_tax)]
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
    if result.risk is not None:
        out += ["", format_risk(result.risk)]
    if result.technology is not None:
        out += ["", format_technology(result.technology)]
    check = rec.one_more_year
    out += ["", f"Recommendation ({rec.basis}): {rec.action.upper()}", rec.reason]
    if rec.replacement_value is not None:
        d = result.defender
        cur = currency_symbol(currency)
        out.append(f"Replacement value of {d.name}: {format_money(rec.replacement_value, cur)} "
                   f"(market value today {format_money(d.price, cur)}); at a market value "
                   "above it, replacing wins.")
    verdict = "stays below" if check.keep_next_year else "does not stay below"
    out.append(f"One-more-year check: next year's marginal cost of the defender "
               f"({money(check.defender_marginal_cost)}) {verdict} the best challenger's "
               f"EAC ({money(check.challenger_annual_cost)}).")
    if study.study_period is None and rec.action == "keep":
        out.append(f"Under today's estimates, replace in {rec.planned_defender_years} "
                   f"year(s) with {rec.best_challenger}.")
    for note in result.warnings:
        out.append(f"Warning: {note}")
    return "\n".join(out)


def format_after_tax(after: BasisResult, before: BasisResult) -> str:
    """The after-tax tables: per alternative the depreciation, book values, after-tax
    disposal, PW and AW by retention, the cash flows at the ESL; ranking and options."""
    terms = after.tax
    assert terms is not None
    out = [f"After tax: effective tax rate {terms.tax_rate:.2%}, after-tax MARR "
           f"{terms.after_tax_marr:.2%}; AW in {after.money}.", terms.conventions]
    for alt in after.alternatives:
        tax = alt.tax
        assert tax is not None
        rows = []
        for k in range(len(alt.annual_worth)):
            mark = " *" if k + 1 == alt.economic_life else ""
            rows.append([f"{k + 1}{mark}", money(tax.allowance[k]), money(tax.book_value[k]),
                         money(tax.disposal[k]), money(alt.present_worth[k]),
                         money(alt.annual_worth[k])])
        price = "market value today" if alt.role == "defender" else "first cost"
        out += ["", f"After tax, {alt.role} {alt.name} ({tax.method}, tax basis "
                    f"{money(tax.tax_basis)}, book value today {money(tax.book_value_0)}; "
                    f"year-0 outlay after tax {money(tax.initial)}, from its {price})",
                table(["year k", "depreciation D_k", "book value at disposal",
                       "after-tax disposal", "PW_k", "AW_k"], rows),
                f"(* after-tax economic service life: {years(alt.economic_life)}, AW "
                f"{money(alt.annual_worth_at_economic_life)})"]
        tab = tax.tables[alt.economic_life - 1]
        out += [f"After-tax cash flows of keeping {alt.name} {years(tab.retention)}:",
                table(["year", "before tax", "disposal", "depreciation", "book value",
                       "taxable income", "tax", "net"],
                      [[str(j), money(tab.before_tax[j]), money(tab.disposal[j]),
                        money(tab.depreciation[j]), money(tab.book_value[j]),
                        money(tab.taxable_income[j]), money(tab.tax[j]), money(tab.net[j])]
                       for j in range(tab.retention + 1)])]
    out += ["", "After-tax ranking at each economic service life:",
            table(["rank", "alternative", "role", "ESL (years)", "AW at ESL"],
                  [[str(a.rank), a.name, a.role, str(a.economic_life),
                    money(a.annual_worth_at_economic_life)] for a in after.ranking])]
    if after.study_period_options:
        out += ["", "After-tax study-period options:",
                table(["defender years", "then challenger", "challenger years", "AW",
                       "feasible"],
                      [[str(o.defender_years), o.challenger or "-", str(o.challenger_years),
                        money(o.annual_worth) if o.annual_worth is not None else "-",
                        "yes" if o.feasible else f"no: {o.reason}"]
                       for o in after.study_period_options])]
    bt = before.recommendation
    out += ["", f"Before-tax recommendation: {bt.action.upper()}. {bt.reason}"]
    return "\n".join(out)


def format_risk(risk: RiskResult) -> str:
    """The risk analysis as text: probability of replacing, AW-difference percentiles,
    tornado, breakevens and the ESL distribution."""
    sim = risk.simulation
    s = risk.difference_summary()

    def m(v: float | None) -> str:
        return "-" if v is None or not math.isfinite(v) else money(v)

    rule = ("each at its ESL" if risk.decision_rule.startswith("no study")
            else "study-period options")
    lines = [f"Risk ({risk.basis}; {sim.trials:,} Monte Carlo trials, seed {sim.seed})",
             f"Replace wins in {risk.probability_replace:.1%} of trials "
             f"(standard error {sim.probability_standard_error:.2%}).",
             "AW difference = best challenger's AW minus the defender's "
             f"({rule}); positive favours replacing.",
             f"  base case {m(risk.base_difference)} ({risk.base_action}); mean "
             f"{m(s['mean'])} (standard error {m(s['mean_standard_error'])})",
             "  percentiles: " + ", ".join(f"p{p} {m(s[f'p{p}'])}" for p in PERCENTILES)]
    lines += ["", "Tornado (each input from its 10th to 90th percentile, the rest at "
              "their estimates):",
              table(["input", "low", "high", "AW difference at low", "at high", "swing"],
                    [[input_label(b.address), number(b.low_value), number(b.high_value),
                      m(b.difference_at_low), m(b.difference_at_high),
                      m(b.swing)] for b in risk.tornado])]
    lines += ["", "Breakeven (the value at which the recommendation flips, the rest at "
              "their estimates):",
              table(["input", "estimate", "breakeven", "searched"],
                    [[input_label(i.address), number(i.estimate),
                      "no flip" if risk.breakeven[i.address] is None
                      else number(risk.breakeven[i.address]),
                      f"{number(risk.breakeven_ranges[i.address][0])} to "
                      f"{number(risk.breakeven_ranges[i.address][1])}"]
                     for i in risk.inputs])]
    rows = []
    for name, row in risk.economic_life_counts().items():
        share = {k + 1: c / sim.trials for k, c in enumerate(row) if c}
        top = sorted(share.items(), key=lambda kv: -kv[1])[:3]
        rows.append([name, ", ".join(f"{k} y {v:.0%}" for k, v in top)])
    lines += ["", "Economic service life across trials (most frequent):",
              table(["alternative", "ESL share"], rows)]
    lines += [f"Note: {n}" for n in risk.notes]
    return "\n".join(lines)


def format_technology(plan: TechnologyPlan) -> str:
    """The technology plan as text: the plan year by year, its PW and AW, replace-now against
    wait, and the value of waiting for better models (docs/method.md §11)."""
    tag = " (after tax)" if plan.basis == "after-tax" else ""
    rates = "; ".join(f"{n}: first cost {gp:+.1%}, operating cost {gc:+.1%} a year"
                      for n, gp, gc in plan.change_rates)
    rows = [[str(s.year), s.action, s.challenger or plan.defender,
             "-" if s.vintage is None else str(s.vintage), str(s.age_after)]
            for s in plan.policy]
    first = "REPLACE NOW" if plan.first_action == "replace" else "KEEP (wait)"
    return "\n".join([
        f"Technology plan over {years(plan.horizon)}{tag}: each year's model changes "
        f"({rates}).",
        table(["plan year", "action", "machine in service", "vintage", "age at year end"], rows),
        f"First action: {first}. Best plan PW {money(plan.present_worth)}, AW over the "
        f"horizon {money(plan.annual_worth)}.",
        f"Best plan that replaces now: PW {money(plan.best_replace_now_present_worth)}; "
        f"best plan that waits: PW {money(plan.best_wait_present_worth)}.",
        f"Value of waiting for better models: {money(plan.value_of_change)} in PW against "
        f"the best plan if every future model were today's (PW "
        f"{money(plan.no_change_present_worth)})."])
