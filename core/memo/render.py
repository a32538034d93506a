"""Render the decision memo of one study as PDF (reportlab), docs/method.md §8.

The memo reads a :class:`core.results.StudyResult` and never recomputes
economics. Order: the recommendation in one sentence; key figures; the chart
of AW against retention with every ESL marked; study-period options (when the
study has a period); after-tax and risk results and the technology plan (when the
study has them);
every assumption and input; the method in plain words; warnings; cautions;
the sign-off block with one empty signature field per role. Every page
carries a footer with the study fingerprint and "page x of y".

The study JSON rides inside the PDF as an attachment (``study.tenure.json``)
and its fingerprint is stored in the ``/TenureFingerprint`` Info key, so
``tenure verify`` can check the attachment against the footer.

>>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
>>> from core.study import run_study
>>> d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
...                 OperatingCosts(first=9000.0, gradient=2500.0))
>>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
...                 OperatingCosts(first=3000.0, gradient=500.0))
>>> pdf = render_memo(run_study(Study("Press line", 0.10, d, (c,))))
>>> pdf[:5]
b'%PDF-'
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import io
import math
from dataclasses import dataclass, field
from typing import Any
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.platypus import (
    CondPageBreak,
    KeepTogether,
    Paragraph,
    Spacer,
)

from core import text
from core.bases import basis_views
from core.currency import currency_symbol, format_money
from core.memo.blocks import (
    PAGE_SIZES,
    CommonMemoOptions,
    _p,
    _styles,
    _table,
    caution_bullets,
    memo_template,
    page_footer,
    signoff_section,
)
from core.memo.chart import aw_chart
from core.memo.fonts import FB
from core.memo.page_one import AssetFacts, PageMarker, page_one_facts, page_one_flowables
from core.memo.sign import finish_pdf
from core.studyfile import dump_study_document, fingerprint, is_rate_input
from core.text import percent

__all__ = ["MemoOptions", "render_memo", "render_memo_pages", "money", "PAGE_SIZES"]

CONVENTIONS = (
    "End-of-year convention: every cash flow of a year falls at its end; discrete annual "
    "compounding; rates are per year.",
    "Annual worth (AW) is signed: outflows negative, inflows positive. The best option has the "
    "largest AW, that is the least equivalent annual cost (EAC = -AW).",
    "The defender is priced at today's market value (its opportunity cost); what was paid for it "
    "in the past is sunk and does not enter the before-tax study. A challenger is priced at its "
    "installed first cost.",
    "AW for retention k: AW_k = -P(A/P,i,k) + S_k(A/F,i,k) - [sum over j<=k of "
    "(C_j+X_j)(P/F,i,j)](A/P,i,k); capital recovery CR_k = P(A/P,i,k) - S_k(A/F,i,k).",
    "The economic service life (ESL) is the retention k with the best AW; on an exact tie "
    "(to the cent) the shorter life.",
    "Marginal cost of year j: MC_j = (S_(j-1) - S_j) + i S_(j-1) + C_j + X_j with S_0 = P.",
)

METHOD = (
    "For every alternative and every possible retention of 1 to n years, the capital it ties "
    "up (price less resale value) and its running and one-off costs are turned into one "
    "constant yearly amount at the interest rate of the study, the annual worth. The retention "
    "with the best annual worth is that alternative's economic service life.",
    "Without a study period, the defender at its economic life is compared with each challenger "
    "at its economic life. If the best challenger costs less per year, replace now; otherwise "
    "keep the defender, and keep it each further year only while that year's marginal cost "
    "stays below the best challenger's equivalent annual cost. The study is repeated each year "
    "with fresh estimates.",
    "With a study period T, every option 'keep the defender j years, then a challenger for the "
    "remaining T-j years' is valued over T years, and the option with the best annual worth "
    "wins; options a machine's life cannot fill are listed as infeasible.",
    "The replacement value is the market value of the defender today at which keeping it is "
    "exactly as good as the best challenger; an offer above it favours selling.",
)


LEGEND = (
    "k: years the asset is kept (retention); j: a year within it; n: the longest retention "
    "considered. i: the interest rate (MARR) per year.",
    "P: price today (a challenger's first cost, the defender's market value). S_k: market "
    "value at the end of year k. C_k: operating cost of year k. X_k: extra one-off cost in "
    "year k (overhaul, retrofit).",
    "AW_k: annual worth of keeping the asset k years (signed, costs negative); EAC_k = -AW_k, "
    "the equivalent annual cost. CR_k: capital recovery. MC_k: marginal cost of year k, what "
    "keeping it that one more year costs. ESL: economic service life, the k with the best AW.",
    "After tax: t the tax rate, D_k the tax depreciation of year k, BV_k the book value at "
    "disposal in year k, MV the market value today.",
)


def money(x: float | None, decimals: int = 0) -> str:
    """Amounts as the memo prints them (``core.text.money``): blank for None, 'n/a' when
    undefined; the currency is named in each column head.

    >>> money(-12345.6), money(0.4), money(1234.5, 2), money(None)
    ('-12,346', '0', '1,234.50', '')
    """
    return text.money(x, decimals=decimals, missing="", not_finite="n/a")


def pct(x: float | None) -> str:
    """A decimal rate as a percentage.

    >>> pct(0.09), pct(0.0325), pct(None)
    ('9%', '3.25%', '')
    """
    if x is None:
        return ""
    s = f"{float(x) * 100:.4f}".rstrip("0").rstrip(".")
    return f"{s}%"


def method_words(method: str | None) -> str:
    """A depreciation method as the memo names it.

    >>> method_words("macrs"), method_words("straight_line"), method_words(None)
    ('MACRS', 'straight line', '-')
    """
    if not method:
        return "-"
    return "MACRS" if method.lower() == "macrs" else method.replace("_", " ")


def technology_note(result: Any, currency: str, page: int | None = None) -> str:
    """Page one's sentence when the technology plan's first action differs from the
    recommendation (docs/method.md §11); empty when they agree or there is no plan.

    Amounts in words are positive: the gain of the better first action, in present worth.
    """
    plan = getattr(result, "technology", None)
    if plan is None or not plan.policy or plan.first_action == result.recommendation.action:
        return ""
    where = f" (page {page})" if page else ""
    now, wait = plan.best_replace_now_present_worth, plan.best_wait_present_worth
    gain = format_money(abs(wait - now), currency)
    if plan.first_action == "replace":
        other = (f"says to replace now rather than wait: over {plan.horizon} years, with the "
                 f"model change rates estimated, replacing now is worth {gain} more in "
                 "present worth than the best plan that waits")
    else:
        other = (f"says to keep the defender one more year and buy a later, better model: over "
                 f"{plan.horizon} years, with the model change rates estimated, waiting is "
                 f"worth {gain} more in present worth than the best plan that replaces now")
    return (f"The technology plan{where} {other}. The recommendation above compares "
            "today's models only; the plan rests on forecasts of future models, so weigh "
            "both before signing.")


def yrs(n: int | None) -> str:
    if n is None:
        return ""
    return f"{n} year" if n == 1 else f"{n} years"


@dataclass(frozen=True)
class MemoOptions(CommonMemoOptions):
    """How the memo is laid out and who signs it off."""

    currency: str = "£"  # a symbol, or a code (GBP is shown as £; core.currency)
    extra_notes: tuple[str, ...] = field(default=())
    asset: AssetFacts | None = None

    def with_signer(self, role: str, name: str) -> MemoOptions:
        """These options with ``name`` in the sign-off box of ``role``."""
        if role == "prepared":
            return dataclasses.replace(self, prepared_by=name)
        if role == "reviewed":
            return dataclasses.replace(self, reviewed_by=name)
        return dataclasses.replace(self, approved_by=name)


# --------------------------------------------------------------------------- helpers
# --------------------------------------------------------------------------- sections
class _Builder:
    def __init__(self, result: Any, opts: MemoOptions, width: float):
        self.r = result
        self.o = opts
        self.w = width
        self.s = _styles()
        self.cur = self.sym = currency_symbol(opts.currency)  # one display everywhere
        self.marks: dict[str, int] = {}
        self.story: list = []

    def add(self, *flow):
        self.story.extend(flow)

    def h(self, text: str):
        self.add(CondPageBreak(130), _p(text, self.s["h"]))

    # -- top
    def header(self):
        r, o, s = self.r, self.o, self.s
        study = r.study
        self.add(_p("Decision memo", s["sub"]), _p(study.title, s["title"]))
        issued = (o.issued or _dt.date.today()).isoformat()
        bits = [f"Issued {issued}"]
        if o.organisation:
            bits.insert(0, o.organisation)
        bits.append(f"Amounts in {self.cur}; AW is signed (costs negative); EAC = -AW")
        self.add(_p(" | ".join(bits), s["sub"]), Spacer(1, 6))
        facts = page_one_facts(r, self.sym, o.asset, self.marks.get("cautions"),
                               self.marks.get("options"))
        note = technology_note(r, self.sym, self.marks.get("technology"))
        if note:  # in the recommendation box, beside what it qualifies
            facts = dataclasses.replace(facts, comparison=" ".join(
                t for t in (facts.comparison, note) if t))
        self.add(*page_one_flowables(facts, self.w, s, r.recommendation.basis))

    def key_figures(self):
        r, s, cur = self.r, self.s, self.cur
        ats = {a.name: a for a in r.after_tax.alternatives} if r.after_tax is not None else {}
        with_tax = r.after_tax is not None
        self.h("Key figures" + (" (decision basis: after tax)"
                                if r.recommendation.basis == "after-tax" else " (before tax)"))
        rows = [["#", "Alternative", "Role", f"Price ({cur})", "Max life",
                 "ESL", f"AW at ESL ({cur}/yr)", f"EAC at ESL ({cur}/yr)"]]
        if with_tax:
            rows[0][5:] = ["ESL before tax", f"EAC before tax ({cur}/yr)", "ESL after tax",
                           f"EAC after tax ({cur}/yr)"]
        order = r.ranking
        if with_tax and r.recommendation.basis == "after-tax":
            order = sorted(r.alternatives, key=lambda a: ats[a.name].rank)
        for n, a in enumerate(order, 1):
            row = [str(n if with_tax else a.rank), Paragraph(escape(a.name), s["cell"]), a.role,
                   money(a.price), yrs(a.max_life), yrs(a.economic_life)]
            if with_tax:
                d = ats[a.name]
                row += [money(-a.annual_worth_at_economic_life), yrs(d.economic_life),
                        money(-d.annual_worth_at_economic_life)]
            else:
                row += [money(a.annual_worth_at_economic_life),
                        money(-a.annual_worth_at_economic_life)]
            rows.append(row)
        w = self.w
        widths = [0.06 * w, 0.25 * w, 0.1 * w, 0.11 * w, 0.1 * w, 0.1 * w, 0.14 * w, 0.14 * w]
        if with_tax:
            widths = [0.05 * w, 0.23 * w, 0.1 * w, 0.1 * w, 0.09 * w, 0.09 * w, 0.12 * w,
                      0.09 * w, 0.13 * w]
        self.add(_table(rows, widths, numeric_from=3,
                        extra=[("ALIGN", (0, 0), (0, -1), "CENTER")]))
        rec = r.recommendation
        facts = [["Basis of the recommendation", rec.basis],
                 ["Interest rate used for AW" + (" before tax" if r.study.tax else ""),
                  pct(r.before_tax.rate)
                  + ("" if r.before_tax.rate == r.study.marr
                     else f" (MARR {pct(r.study.marr)}, adjusted for inflation)")]]
        if r.study.tax is not None:
            facts.append(["After-tax MARR and tax rate",
                          f"{pct(r.study.tax.after_tax_marr)} after tax; effective tax rate "
                          f"{pct(r.study.tax.rate)}"])
        if rec.best_challenger:
            facts.append(["Best challenger", rec.best_challenger])
        # With a study period these two compare economic lives, not the period's options.
        no_period = " without a study period" if r.study.study_period else ""
        if rec.replacement_value is not None:
            facts.append([f"Replacement value of the defender ({cur}){no_period}",
                          f"{money(rec.replacement_value)} (market value today "
                          f"{money(r.defender.price)})"])
        omy = rec.one_more_year
        keep = "keep" if omy.keep_next_year else "do not keep"
        facts.append([f"One-more-year check (next year){no_period}",
                      f"defender marginal cost {format_money(omy.defender_marginal_cost, cur)} "
                      f"vs best challenger EAC {format_money(omy.challenger_annual_cost, cur)}"
                      f": {keep} it another year"])
        if rec.action == "keep" and rec.planned_defender_years and r.study.study_period is None:
            facts.append(["Planned replacement (today's estimates)",
                          f"after {yrs(rec.planned_defender_years)}"])
        if r.study.study_period:
            facts.append(["Study period", yrs(r.study.study_period)])
        if r.risk is not None:
            facts.append(["Risk: share of simulated trials that say replace",
                          f"{percent(r.risk.probability_replace)} (see Risk)"])
        facts = [[_p(a, s["cell"]), _p(b, s["cell"])] for a, b in facts]
        self.add(Spacer(1, 4), KeepTogether([_table(facts, [0.32 * self.w, 0.68 * self.w],
                                                    numeric_from=None, header=False)]))

    def chart(self):
        views = basis_views(self.r)
        self.h("Annual worth against retention")
        for n, view in enumerate(views):
            series = [(a.name, list(a.annual_worth), a.economic_life) for a in view.alternatives]
            title = f"Annual worth against years of retention, {view.title.lower()}"
            if n:
                self.add(Spacer(1, 4))
            self.add(aw_chart(series, self.w, 250 if n == 0 else 230, self.cur, title))
            if n == 0:
                self.add(_p("Each line is one alternative's AW for keeping it k years; the "
                            "large filled marker is its economic service life (ESL), the best "
                            "AW. Higher is better (less cost). EAC = -AW. Amounts in "
                            f"{self.cur} per year.", self.s["small"]))

    def schedules(self):
        """Year-by-year table of every alternative: the inputs and AW's parts."""
        r, s, cur = self.r, self.s, self.cur
        self.add(CondPageBreak(200))
        self.h("Year by year (before tax)")
        self.add(_p(f"Market value S_k, operating cost C_k and extra cost X_k (inputs), and the "
                    f"annual worth AW_k of keeping the asset k years with its capital-recovery "
                    f"and operating parts, and the marginal cost MC_k of year k. All in {cur}; "
                    f"AW and its parts are signed (costs negative); the ESL row is marked.",
                    s["small"]))
        for a in r.alternatives:
            rows = [["k", "S_k", "C_k", "X_k", "AW_k", "Capital recovery -CR_k", "Operating part of AW",
                     "EAC_k = -AW_k", "MC_k"]]
            n = len(a.annual_worth)
            for k in range(n):
                rows.append([str(k + 1) + (" ESL" if k + 1 == a.economic_life else ""),
                             money(_at(a.market_values, k)), money(_at(a.operating_costs, k)),
                             money(_at(a.extra_costs, k)), money(a.annual_worth[k]),
                             money(_neg(_at(a.capital_recovery, k))), money(_at(a.operating, k)),
                             money(-a.annual_worth[k]), money(_at(a.marginal_cost, k))])
            esl_row = a.economic_life
            w = self.w / 9
            self.add(KeepTogether([
                _p(f"{a.name} ({a.role}, price {format_money(a.price, cur)})", s["h3"]),
                _table(rows, [w] * 9, numeric_from=1, extra=[
                    ("BACKGROUND", (0, esl_row), (-1, esl_row), colors.HexColor("#fff2cc")),
                    ("FONT", (0, esl_row), (-1, esl_row), FB(), 7.5)]),
            ]) if n <= 25 else _table(rows, [w] * 9))

    def study_period(self):
        r, s, cur = self.r, self.s, self.cur
        views = [v for v in basis_views(r) if v.options]
        if not views:
            return
        self.add(PageMarker(self.marks, "options"))
        self.h(f"Study-period options ({yrs(r.study.study_period)})")
        self.add(_p("Keep the defender j years, then the challenger for the remaining years. "
                    f"AW over the whole study period, {cur} per year; the best feasible option "
                    "is marked." + (" The decision basis comes first." if len(views) > 1
                                    else ""), s["lead"]))
        for view in views:
            opts = list(view.options)
            feasible = [o for o in opts if o.feasible and o.annual_worth is not None]
            best = max(feasible, key=lambda o: round(o.annual_worth or 0.0, 2)) if feasible else None
            rows = [["Keep defender", "Then challenger", "For", f"AW ({cur}/yr)",
                     f"EAC ({cur}/yr)", "Feasible / note"]]
            best_row = None
            for o in opts:
                if o is best:
                    best_row = len(rows)
                rows.append([yrs(o.defender_years), Paragraph(escape(o.challenger or "(none)"),
                                                              s["cell"]),
                             yrs(o.challenger_years) if o.challenger else "-",
                             money(o.annual_worth), money(-o.annual_worth) if o.annual_worth
                             is not None else "", Paragraph(escape("best" if o is best else (
                                 "yes" if o.feasible else f"no: {o.reason}")), s["cell"])])
            w = self.w
            extra = []
            if best_row is not None:
                extra = [("BACKGROUND", (0, best_row), (-1, best_row),
                          colors.HexColor("#fff2cc"))]
            self.add(_p(f"Study-period options, {view.title.lower()}", s["h3"]),
                     _table(rows, [0.13 * w, 0.25 * w, 0.1 * w, 0.14 * w, 0.14 * w, 0.24 * w],
                            numeric_from=None,
                            extra=extra + [("ALIGN", (3, 0), (4, -1), "RIGHT")]))

    def after_tax(self):
        r, s, cur = self.r, self.s, self.cur
        after = r.after_tax
        if after is None or after.tax is None:
            return
        terms = after.tax
        self.h("After-tax results")
        bits = [f"Effective tax rate {pct(terms.tax_rate)}; after-tax MARR "
                f"{pct(terms.after_tax_marr)}.",
                f"Rate used for after-tax AW {pct(after.rate)}"
                + (f" (discounting depreciation at {pct(terms.discount_rate)})"
                   if terms.discount_rate != after.rate else "") + ".",
                f"After-tax AW is in {after.money}.",
                "Year j flow: -(1-t)(C_j+X_j) + t D_j; disposal at k: S_k - t(S_k - BV_k); "
                "the defender today is valued at its forgone after-tax sale proceeds "
                "MV - t(MV - BV_now)."]
        self.add(_p(" ".join(bits), s["small"]))
        if terms.conventions:
            self.add(_p(terms.conventions, s["small"]))
        rows = [["Alternative", "Depreciation", f"Tax basis ({cur})",
                 f"Book value today ({cur})", f"Outlay today ({cur})", "ESL after tax",
                 f"AW at ESL ({cur}/yr)", f"EAC at ESL ({cur}/yr)"]]
        for a in after.alternatives:
            tax = a.tax
            assert tax is not None
            at_esl = a.annual_worth_at_economic_life
            rows.append([Paragraph(escape(a.name), s["cell"]),
                         method_words(tax.method), money(tax.tax_basis),
                         money(tax.book_value_0), money(tax.initial), yrs(a.economic_life),
                         money(at_esl), money(-at_esl)])
        w = self.w
        self.add(_table(rows, [0.2 * w, 0.14 * w, 0.1 * w, 0.11 * w, 0.1 * w, 0.1 * w,
                               0.125 * w, 0.125 * w], numeric_from=2))
        for a in after.alternatives:
            tax = a.tax
            assert tax is not None
            esl = a.economic_life
            rows = [["k", f"Depreciation D_k ({cur})", f"Book value BV_k ({cur})",
                     f"After-tax disposal ({cur})", f"After-tax AW_k ({cur}/yr)",
                     f"EAC_k ({cur}/yr)"]]
            for k, v in enumerate(a.annual_worth.tolist()):
                rows.append([str(k + 1) + (" ESL" if k + 1 == esl else ""),
                             money(_at(tax.allowance, k)), money(_at(tax.book_value, k)),
                             money(_at(tax.disposal, k)), money(v), money(-v)])
            extra = [("BACKGROUND", (0, esl), (-1, esl), colors.HexColor("#fff2cc")),
                     ("FONT", (0, esl), (-1, esl), FB(), 7.5)]
            tbl = _table(rows, [self.w / 6] * 6, numeric_from=1, extra=extra)
            head = _p(f"{a.name}, after tax", s["h3"])
            n = len(a.annual_worth)
            self.add(KeepTogether([head, tbl]) if n <= 25 else head, )
            if n > 25:
                self.add(tbl)

    def risk(self):
        r, s, cur = self.r, self.s, self.cur
        risk = r.risk
        if risk is None:
            return
        from core.risk.labels import input_label  # inputs in words; the JSON keeps the paths
        sim = risk.simulation
        self.h("Risk")
        intro = (f"Monte Carlo simulation: {sim.trials:,} trials, seed {sim.seed}. Each trial "
                 "draws every uncertain input, recomputes every economic life and compares the "
                 "best challenger's AW at its ESL with the defender's."
                 f" Basis: {risk.basis}. Decision rule: {risk.decision_rule}.")
        self.add(_p(intro, s["small"]))
        rows = [["Result", "Value"],
                ["Share of trials that say replace",
                 f"{percent(risk.probability_replace)} (standard error "
                 f"{sim.probability_standard_error * 100:.1f} points)"],
                ["Base case (every input at its estimate)",
                 f"{risk.base_action}; AW difference {money(_finite(risk.base_difference))}"
                 f" {cur}/yr"]]
        names = {"p5": "P5", "p10": "P10", "p50": "P50 (median)", "p90": "P90", "p95": "P95",
                 "mean": "mean", "standard_deviation": "standard deviation",
                 "min": "smallest", "max": "largest"}
        for k, v in risk.difference_summary().items():
            if k == "mean_standard_error" or v is None:
                continue
            rows.append([f"AW difference, best challenger minus defender, {names.get(k, k)} "
                         f"({cur}/yr)", money(v)])
        rows = [rows[0]] + [[_p(a, s["cell"]), b] for a, b in rows[1:]]
        self.add(_table(rows, [0.62 * self.w, 0.38 * self.w], numeric_from=1))
        counts, edges = risk.histogram()
        if counts.size:
            from core.memo.chart import histogram_chart

            self.add(Spacer(1, 4), histogram_chart(
                [round(float(e), 2) for e in edges], [int(c) for c in counts], self.w, 150, cur))
        tot = sim.trials
        self.add(_p("Best challenger across trials: " + "; ".join(
            f"{k} {100 * v / tot:.1f}%" for k, v in risk.best_challenger_counts().items()),
            s["small"]))
        for name, row in risk.economic_life_counts().items():
            parts = [f"{k + 1}: {100 * v / tot:.1f}%" for k, v in enumerate(row) if v]
            self.add(_p(f"ESL of {name} across trials (years: share): " + "; ".join(parts),
                        s["small"]))
        if risk.inputs:
            rows = [["Uncertain input", "Distribution", "Estimate", "P10", "P90"]]
            for x in risk.inputs:
                addr = x.address
                par = ", ".join(_num_for(addr, v) for v in x.distribution.params)
                rows.append([Paragraph(escape(input_label(addr, r.study)), s["cell"]),
                             Paragraph(escape(f"{x.distribution.kind} ({par})"), s["cell"]),
                             _num_for(addr, x.estimate), _num_for(addr, x.p10),
                             _num_for(addr, x.p90)])
            w = self.w
            self.add(Spacer(1, 4), _table(rows, [0.36 * w, 0.28 * w, 0.12 * w, 0.12 * w, 0.12 * w],
                                          numeric_from=2))
        if risk.tornado:
            rows = [["Input (P10 to P90, the rest at estimates)", "Low", "High",
                     f"AW difference at low ({cur}/yr)", f"at high ({cur}/yr)",
                     f"Swing ({cur}/yr)"]]
            for b in risk.tornado:
                addr = b.address
                rows.append([Paragraph(escape(input_label(addr, r.study)), s["cell"]), _num_for(addr, b.low_value),
                             _num_for(addr, b.high_value), money(_finite(b.difference_at_low)),
                             money(_finite(b.difference_at_high)), money(_finite(b.swing))])
            w = self.w
            self.add(Spacer(1, 4), _table(rows, [0.34 * w, 0.11 * w, 0.11 * w, 0.15 * w,
                                                 0.15 * w, 0.14 * w], numeric_from=1))
        if risk.breakeven:
            brow = [["Uncertain input (alone; the rest at their estimates)",
                     "Value at which the recommendation flips"]]
            for k, v in risk.breakeven.items():
                rng = risk.breakeven_ranges.get(k)
                if v is None:
                    txt = "does not flip within a tenfold range"
                    if rng is not None:
                        txt += f" ({_num_for(k, rng[0])} to {_num_for(k, rng[1])})"
                else:
                    txt = _num_for(k, v)
                brow.append([Paragraph(escape(input_label(k, r.study)), s["cell"]),
                             Paragraph(escape(txt), s["cell"])])
            self.add(Spacer(1, 4), _table(brow, [0.55 * self.w, 0.45 * self.w], numeric_from=None))
        for n in risk.notes:
            self.add(Paragraph(escape(n), s["bullet"], bulletText="\u2022"))

    def technology(self):
        """The technology plan (docs/method.md §11)."""
        r, s, cur = self.r, self.s, self.cur
        plan = r.technology
        if plan is None or not plan.policy:
            return
        self.add(PageMarker(self.marks, "technology"))
        self.h("Technology plan: replace now or wait for a better model?")
        horizon, first = plan.horizon, plan.first_action
        pw, flat = plan.present_worth, plan.no_change_present_worth
        now, wait = plan.best_replace_now_present_worth, plan.best_wait_present_worth
        verb = "replace the defender now" if first == "replace" else "keep the defender this year"
        span = f"{horizon}-year"
        self.add(_p(f"Over a {span} plan in which each year's model of a challenger "
                    "costs and runs differently (the change rates below), the best chain of "
                    f"replacements{' after tax' if r.study.tax is not None else ''} says: {verb}. "
                    "Present worths (PW) are in today's money, "
                    f"{cur}; the defender's market value today counts as an outlay.", s["body"]))
        segs = [[seg.name, "-" if seg.vintage is None else str(seg.vintage), seg.start,
                 seg.end - seg.start] for seg in plan.segments()]
        rows = [["Machine in service", "Vintage (year bought)", "Plan years (0 = now)", "Years"]]
        for name, vint, start, n in segs:
            rows.append([Paragraph(escape(str(name)), s["cell"]), vint,
                         f"{start} to {start + n - 1}" if n > 1 else str(start), str(n)])
        w = self.w
        self.add(_table(rows, [0.44 * w, 0.2 * w, 0.2 * w, 0.16 * w], numeric_from=1))
        self.add(Spacer(1, 4))
        value = plan.value_of_change
        gain = plan.waiting_gain
        rates = "; ".join(f"{name}: first cost {gp:+.1%}, operating cost {gc:+.1%} a year"
                          for name, gp, gc in plan.change_rates)
        if first != r.recommendation.action:
            self.add(_p("This differs from the recommendation on page one, which compares "
                        "today's models only; see page one for how to read the two together.",
                        s["small"]))
        fig = [["Figure", f"{cur}"],
               ["First action", "replace now" if first == "replace" else "keep (wait)"],
               ["PW of the best plan", money(pw)],
               ["AW over the horizon", money(plan.annual_worth)],
               ["Best plan that replaces now, PW", money(now)],
               ["Best plan that waits, PW", money(wait)],
               ["Waiting against replacing now (PW)", money(gain)],
               ["Best plan if every future model were today's, PW", money(flat)],
               ["Value of waiting for better models (PW)", money(value)]]
        self.add(KeepTogether([_table(fig, [0.6 * w, 0.4 * w], numeric_from=1)]))
        self.add(_p("Change rates: " + (rates or "none") + ". A model bought in plan year t "
                    "costs P(1+gP)^t, resells for S_k(1+gP)^t and runs for C_j(1+gC)^t; extra "
                    "costs as estimated. Solved by backward induction over plan year, machine, "
                    "vintage and age (Bellman, 1955).", s["small"]))

    def assumptions(self):
        r, s, cur = self.r, self.s, self.cur
        st = r.study
        self.h("Assumptions and inputs")
        rows = [["Item", "Value"],
                ["Minimum attractive rate of return (MARR)", pct(st.marr)],
                ["Currency", cur],
                ["Study period", yrs(st.study_period) if st.study_period else
                 "none (each alternative at its own economic life, repeated)"]]
        if st.tax is not None:
            rows.append(["Tax", f"effective rate {pct(st.tax.rate)}, after-tax MARR "
                                f"{pct(st.tax.after_tax_marr)}; the recommendation rests on "
                                "the after-tax study"])
        else:
            rows.append(["Tax", "not modelled (before-tax study)"])
        if st.inflation is not None:
            money_kind = ("constant (today's) money, discounted at the real rate"
                          if st.inflation.estimates == "constant"
                          else "then-current money, discounted at the market rate "
                               "i_f = i + f + i f")
            rows.append(["Inflation", f"general inflation {pct(st.inflation.rate)} a year; "
                                      f"estimates are in {money_kind}"])
        else:
            rows.append(["Inflation", "not modelled; all estimates in one kind of money"])
        if st.uncertainty is not None:
            u = st.uncertainty
            from core.risk.labels import input_label

            ins = "; ".join(f"{input_label(a, st)}: {dist.kind} "
                            f"({', '.join(_num_for(a, p) for p in dist.params)})"
                            for a, dist in u.inputs)
            rows.append(["Uncertainty", f"{u.trials:,} trials"
                         + (f", seed {u.seed}" if u.seed is not None else "") + f"; {ins}"])
        if st.notes:
            rows.append(["Notes", st.notes])
        rows = [rows[0]] + [[_p(a, s["cell"]), _p(b, s["cell"])] for a, b in rows[1:]]
        self.add(_table(rows, [0.3 * self.w, 0.7 * self.w], numeric_from=None))
        for alt in st.alternatives:
            self.add(KeepTogether([_p(f"{alt.name} ({alt.role})", s["h3"]),
                                   _table(self._alt_rows(alt), [0.3 * self.w, 0.7 * self.w],
                                          numeric_from=None)]))
        self.add(_p("Conventions", s["h3"]))
        for c in CONVENTIONS:
            self.add(Paragraph(escape(c), s["bullet"], bulletText="\u2022"))

    def _alt_rows(self, alt) -> list:
        s, cur = self.s, self.cur
        rows = [["Input", "Value"]]
        if alt.role == "defender":
            rows.append([f"Market value today ({cur})", money(alt.price)])
        else:
            rows.append([f"Installed first cost ({cur})", money(alt.price)])
        rows.append(["Longest retention considered", yrs(alt.max_life)])
        mv = alt.market_values
        if mv.values is not None:
            rows.append([f"Market values S_1..S_n ({cur})", ", ".join(money(v) for v in mv.values)])
        else:
            rows.append(["Market values", f"decline {pct(mv.decline_rate or 0.0)} a year on "
                                          "the year-0 value"])
        oc = alt.operating_costs
        if oc.values is not None:
            rows.append([f"Operating costs C_1..C_n ({cur})", ", ".join(money(v) for v in oc.values)])
        else:
            txt = f"{money(oc.first or 0.0)} in year 1"
            if oc.growth is not None:
                txt += f", growing {pct(oc.growth)} a year"
            elif oc.gradient:
                txt += f", rising {money(oc.gradient)} a year"
            else:
                txt += ", level"
            rows.append([f"Operating costs ({cur})", txt])
        for x in alt.extra_costs:
            rows.append([f"Extra cost, year {x.year} ({cur})",
                         f"{money(x.amount)}" + (f" ({x.label})" if x.label else "")])
        dep = alt.depreciation
        if dep is not None:
            bits = [method_words(dep.method)]
            if dep.macrs_class:
                bits.append(f"{dep.macrs_class}-year class")
            if dep.years:
                bits.append(f"over {yrs(dep.years)}")
            if dep.basis is not None:
                bits.append(f"basis {format_money(dep.basis, cur)}")
            if dep.rate is not None:
                bits.append(f"rate {pct(dep.rate)}")
            if dep.age:
                bits.append(f"{yrs(dep.age)} already claimed")
            if dep.salvage:
                bits.append(f"tax salvage {format_money(dep.salvage, cur)}")
            rows.append(["Tax depreciation", ", ".join(bits)])
        return [rows[0]] + [[_p(a, s["cell"]), _p(b, s["cell"])] for a, b in rows[1:]]

    def method(self):
        self.h("Method")
        for m in METHOD:
            self.add(_p(m, self.s["body"]))
        self.add(_p("Symbols used in the tables", self.s["h3"]))
        for m in LEGEND:
            self.add(Paragraph(escape(m), self.s["bullet"], bulletText="\u2022"))

    def warnings(self):
        w = list(getattr(self.r, "warnings", ()) or ()) + list(self.o.extra_notes)
        if not w:
            return
        self.h("Warnings from the study")
        for x in w:
            self.add(Paragraph(escape(str(x)), self.s["bullet"], bulletText="\u2022"))

    def cautions(self):
        self.h("Cautions")
        self.add(*caution_bullets(self.s, PageMarker(self.marks, "cautions")))

    def signoff(self, sink: dict):
        self.add(*signoff_section(self.w, self.s, self.o.names(), self.o.issued, sink,
                                  "memo", "tenure memo / tenure sign"))


def _finite(x: float) -> float | None:
    """None (printed blank) for an undefined figure (NaN)."""
    return x if math.isfinite(x) else None


def _num_for(address: str, v: float | None) -> str:
    """An uncertain input's value: rates (``is_rate_input``) as percentages, money with
    separators."""
    if v is None or not math.isfinite(v):
        return "-"
    if is_rate_input(address):
        return pct(round(float(v), 4))
    return money(v, 2 if abs(v) < 100 else 0)


def _neg(x: float | None) -> float | None:
    return None if x is None else -x


def _at(arr: Any, k: int) -> float | None:
    try:
        return float(arr[k])
    except (IndexError, TypeError, ValueError):
        return None


# --------------------------------------------------------------------------- build
def _build(result: Any, opts: MemoOptions, fingerprint: str, total: list[int],
           sink: dict, marks: dict[str, int] | None = None) -> tuple[bytes, int]:
    buf = io.BytesIO()
    title = result.study.title
    doc = memo_template(
        buf, opts.page_size, title=f"Decision memo: {title}",
        author=opts.prepared_by or opts.organisation or "Tenure",
        subject=f"Keep-or-replace decision: {result.recommendation.reason}",
        keywords=f"tenure decision memo; study fingerprint {fingerprint}")
    b = _Builder(result, opts, doc.width)
    if marks is not None:  # pages recorded by the first pass (page one points to them)
        b.marks = marks
    b.header()
    b.key_figures()
    b.chart()
    b.study_period()
    b.after_tax()
    b.risk()
    b.technology()
    b.schedules()
    b.assumptions()
    b.method()
    b.warnings()
    b.cautions()
    b.signoff(sink)
    foot = page_footer(f"Study fingerprint (SHA-256): {fingerprint}",
                       f"Tenure decision memo: {title}", total, PAGE_SIZES[opts.page_size])
    doc.build(b.story, onFirstPage=foot, onLaterPages=foot)
    return buf.getvalue(), doc.page


def render_memo(result: Any, options: MemoOptions | None = None) -> bytes:
    """The unsigned memo PDF of one study result, with the study attached.

    The PDF holds empty signature fields Prepared, Reviewed, Approved in the
    sign-off block (unless ``options.signature_fields`` is False); sign with
    :func:`core.memo.sign.sign_pdf_bytes`.
    """
    return render_memo_pages(result, options)[0]


def render_memo_pages(result: Any, options: MemoOptions | None = None) -> tuple[bytes, int]:
    """:func:`render_memo`, and the page count."""
    opts = options or MemoOptions()
    if opts.page_size not in PAGE_SIZES:
        raise ValueError(f"page size must be one of {', '.join(PAGE_SIZES)}")
    fp = fingerprint(result.study)
    total = [0]
    sink: dict = {}
    marks: dict[str, int] = {}
    _, pages = _build(result, opts, fp, total, sink, marks)  # first pass: count the pages
    total[0] = pages
    sink.clear()
    pdf, pages2 = _build(result, opts, fp, total, sink, marks)
    if pages2 != pages:  # pragma: no cover - page count is stable between passes
        total[0] = pages2
        sink.clear()
        pdf, _ = _build(result, opts, fp, total, sink, marks)
    attachment = dump_study_document([result.study]).encode("utf-8")
    return finish_pdf(pdf, attachment=attachment, fingerprint=fp,
                      fields=sink if opts.signature_fields else {},
                      title=result.study.title, names=opts.names()), total[0]
