"""The plan memo: one signed PDF for the capital plan (docs/method.md §8, §10).

Laid out with the decision memo's page template, fonts, cautions and sign-off
block (core.memo.blocks) and finished, signed and verified by the same
machinery (core.memo.sign, core.memo.verify): the plan's inputs ride inside as
``plan.tenure.json`` with their own SHA-256 fingerprint in the footer and the
``/TenureFingerprint`` Info key.
"""

from __future__ import annotations

import datetime as _dt
import io
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.platypus import (
    CondPageBreak,
    KeepTogether,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from core.currency import currency_symbol, format_money
from core.memo import blocks
from core.memo.blocks import PAGE_SIZES, _p, _styles, _table
from core.memo.render import money
from core.memo.sign import PLAN_ATTACHMENT_NAME, _atomic_write, finish_pdf, sign_pdf_bytes
from core.plan.chart import capital_chart
from core.plan.document import canonical, plan_document, plan_fingerprint, plan_title
from core.plan.result import CapitalPlan, PlannedAsset

METHOD = (
    "Each asset's current study says what keeping it longer is worth. For every year the "
    "asset could be replaced in, the plan takes the value of replacing it then rather than "
    "now: the present worth of keeping the defender that many years, less the best "
    "challenger's equivalent annual cost over the same years. Replacing now is worth 0; a "
    "positive value means waiting pays, a negative one that waiting costs.",
    "An asset can be replaced in any plan year up to the end of its defender's life. When "
    "its life runs past the horizon it may also wait until after the horizon, worth its best "
    "later value and needing no capital inside the plan. A study with a study period offers "
    "its own feasible options instead.",
    "The capital of a replacement is the challenger's first cost in the year it is bought; "
    "the defender's sale proceeds that year are shown as net capital.",
    "The plan picks exactly one option per asset so that the total value is as large as "
    "possible while each year's capital stays within that year's budget (and any limit on "
    "replacements per site and year). Assets marked must-replace are replaced in year 0. "
    "The choice is made by mixed-integer programming (HiGHS through SciPy), which either "
    "proves the plan optimal or reports how far from optimal it may be.",
    "For comparison, a simple rule funds each year's due replacements in order of value per "
    "unit of capital (what waiting a year would lose, divided by the capital) until the "
    "year's budget is spent; the difference to the optimum is shown.",
    "The plan rests on today's estimates. Each study is repeated every year with fresh "
    "estimates, and the plan with it; later years are an outlook, not a commitment.",
)


@dataclass(frozen=True)
class PlanMemoOptions(blocks.CommonMemoOptions):
    """How the plan memo is laid out and who signs it off."""


@dataclass(frozen=True)
class IssuedPlanMemo:
    """A plan memo just written."""

    path: str
    fingerprint: str
    title: str
    pages: int
    role: str | None
    signed_by: str | None


def _when(plan: CapitalPlan, y: int | None) -> str:
    return "after the horizon" if y is None else str(plan.first_year + y)


class _PlanBuilder:
    def __init__(self, plan: CapitalPlan, opts: PlanMemoOptions, width: float):
        self.plan, self.o, self.w = plan, opts, width
        self.s = _styles()
        self.cur = currency_symbol(opts.currency)  # shown as the study memos show it: £, not GBP
        self.story: list = []

    def add(self, *flow: Any) -> None:
        self.story.extend(flow)

    def _m(self, x: float | None) -> str:
        """An amount in a sentence, with the currency symbol ("£334,100")."""
        return format_money(x, self.cur)

    def h(self, text: str) -> None:
        self.add(CondPageBreak(110), _p(text, self.s["h"]))

    def header(self) -> None:
        p, s, o = self.plan, self.s, self.o
        self.add(_p("Capital plan memo", s["sub"]), _p(plan_title(p), s["title"]))
        bits = [f"Issued {(o.issued or _dt.date.today()).isoformat()}",
                f"{len(p.assets)} assets", f"plan years {p.first_year}-{p.first_year + p.horizon - 1}",
                f"amounts in {self.cur}"]
        if o.organisation:
            bits.insert(0, o.organisation)
        self.add(_p(" | ".join(bits), s["sub"]), Spacer(1, 6))
        inside = [a for a in p.assets if a.year is not None]
        total = sum(p.capital_by_year)
        net_total = sum(p.net_capital_by_year)
        budget = (f"under the budget ({'net of sales' if p.net else 'gross capital'})"
                  if any(b is not None for b in p.budgets) else "with no budget limit")
        text = (f"Replace {len(inside)} of {len(p.assets)} assets in the {p.horizon} plan years "
                f"{budget}, for {self._m(total)} of capital ({self._m(net_total)} after selling "
                f"the replaced machines).")
        deferred = p.deferred
        if deferred:
            text += (f" The budget defers {len(deferred)} replacement"
                     f"{'s' if len(deferred) != 1 else ''}; that costs {self._m(p.budget_cost)} "
                     f"of value against the plan without a budget.")
        else:
            text += " No replacement has to wait for the budget."
        if p.forced:
            text += f" {len(p.forced)} must-replace asset{'s are' if len(p.forced) != 1 else ' is'} replaced now."
        status = ("The plan is proven optimal." if p.status == "optimal" else
                  f"The solver {p.status}; the plan may be that far from the best.")
        box = Table([[Paragraph("<font color='#1f4e79'>The plan:</font>", s["small"])],
                     [_p(text, s["rec"])], [_p(status, s["small"])]],
                    colWidths=[self.w], hAlign="LEFT")
        box.setStyle(TableStyle([
            ("BOX", (0, 0), (-1, -1), 1.0, colors.HexColor("#1f4e79")),
            ("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#f3f6fa")),
            ("LEFTPADDING", (0, 0), (-1, -1), 7), ("RIGHTPADDING", (0, 0), (-1, -1), 7),
            ("TOPPADDING", (0, 0), (-1, 0), 5), ("BOTTOMPADDING", (0, -1), (-1, -1), 7)]))
        self.add(box, Spacer(1, 4))
        self.add(Paragraph("<i>" + escape(
            "Before signing, read the cautions at the end, before the sign-off: the plan "
            "rests on each study's estimates of future costs and resale values, and on "
            "today's budgets.") + "</i>", s["body"]))

    def by_year(self) -> None:
        p, cur = self.plan, self.cur
        biggest = max([*p.capital_by_year, *[b for b in p.budgets if b is not None], 0.0])
        unit = 1000.0 if sum(p.capital_by_year) >= 1e6 or biggest >= 1e6 else 1.0
        self.h(f"Budget and capital by year ({cur}{' thousands' if unit > 1 else ''})")
        head = ["", *[str(y) for y in p.calendar_years], "Total"]
        rows: list[list[Any]] = [head]

        def row(label: str, values: Any) -> list[Any]:
            vals = list(values)
            total = sum(v for v in vals if v is not None)
            return [label, *[money(v / unit) if v is not None else "-" for v in vals],
                    money(total / unit)]

        bold = []
        if any(b is not None for b in p.budgets):
            rows.append(row("Budget" + (" (net)" if p.net else ""), p.budgets))
            bold.append(len(rows) - 1)
        rows.append(row("Capital", p.capital_by_year))
        bold.append(len(rows) - 1)
        for site in p.capital_by_site:
            rows.append(row(f"  {site.site}", site.capital))
        rows.append(row("Sale proceeds", [c - n for c, n in zip(p.capital_by_year,
                                                                 p.net_capital_by_year,
                                                                 strict=True)]))
        rows.append(row("Net capital", p.net_capital_by_year))
        rows.append(row("Without a budget", p.unconstrained_capital_by_year))
        n = len(p.calendar_years)
        first = 0.16 * self.w
        rest = (self.w - first) / (n + 1)
        extra: list[tuple] = [("BACKGROUND", (0, r), (-1, r), colors.HexColor("#f5f5f5"))
                              for r in bold]
        size = 7.0 if n <= 10 else 6.0
        extra.append(("FONTSIZE", (0, 1), (-1, -1), size))
        self.add(_table(rows, [first] + [rest] * (n + 1), extra=extra))
        self.add(Spacer(1, 6), capital_chart(
            p.calendar_years, [(s.site, s.capital) for s in p.capital_by_site], p.budgets,
            self.w, 220, self.cur, "Capital by plan year, stacked by site"))
        self.add(_p("Bars: capital of the planned replacements in each year, by site. Dashed "
                    "line: the year's budget. 'Without a budget' is the capital each asset's "
                    "own best year would need.", self.s["small"]))

    def assets(self) -> None:
        p, s, cur = self.plan, self.s, self.cur
        self.h("The plan by year and site")
        order = sorted(p.assets, key=lambda a: (a.year if a.year is not None else 10**6,
                                                a.site or "", a.tag or a.title))
        rows: list[list[Any]] = [["Year", "Site", "Asset", "Replace with",
                                  f"Capital ({cur})", f"Net ({cur})", f"Value ({cur})"]]
        for a in order:
            if a.year is None:
                continue
            rows.append([_when(p, a.year), _p(a.site or "-", s["cell"]),
                         _p(self._name(a) + self._note(a), s["cell"]),
                         _p(a.challenger or "-", s["cell"]), money(a.capital),
                         money(a.net_capital), money(a.value)])
        w = self.w
        self.add(_table(rows, [0.07 * w, 0.13 * w, 0.3 * w, 0.22 * w, 0.095 * w, 0.09 * w,
                               0.095 * w], numeric_from=4))
        later = [a for a in order if a.year is None]
        if later:
            self.add(Spacer(1, 4), _p(
                f"Kept past the last plan year ({len(later)}): " +
                "; ".join(self._name(a) for a in later) + ".", s["small"]))
        self.add(_p("Value: what replacing in that year is worth compared with replacing now, "
                    "on the study's basis (after tax when the study has tax). Net: capital "
                    "less the defender's sale proceeds that year.", s["small"]))

    def _note(self, a: PlannedAsset) -> str:
        if a.forced:
            return " (must replace)"
        if a.deferred:
            return f" (deferred from {_when(self.plan, a.best_year)})"
        return ""

    def _name(self, a: PlannedAsset) -> str:
        if a.tag:
            rest = a.title.split(a.tag, 1)[-1].strip(" —-") if a.tag in a.title else a.title
            return f"{a.tag} {rest}".strip()
        return a.title

    def deferred(self) -> None:
        p, s, cur = self.plan, self.s, self.cur
        title = "Deferred replacements and what each deferral costs"
        deferred = sorted(p.deferred, key=lambda a: -a.deferral_cost)
        if not deferred:
            self.h(title)
            self.add(_p("None: every asset is replaced in its own best year.", s["body"]))
            return
        note = _p("The cost of a deferral is the value of replacing the asset in its best "
                  "year less the value in the planned year: the extra running, upkeep and "
                  "lost resale of keeping the old machine longer, in today's money.",
                  s["small"])
        rows: list[list[Any]] = [["Asset", "Site", "Best year", "Planned", f"Cost ({cur})"]]
        for a in deferred:
            rows.append([_p(self._name(a), s["cell"]), _p(a.site or "-", s["cell"]),
                         _when(p, a.best_year), _when(p, a.year), money(a.deferral_cost)])
        rows.append(["Total", "", "", "", money(sum(a.deferral_cost for a in deferred))])
        w = self.w
        table = _table(rows, [0.4 * w, 0.18 * w, 0.13 * w, 0.15 * w, 0.14 * w], numeric_from=4,
                       extra=[("LINEABOVE", (0, -1), (-1, -1), 0.6, colors.black)])
        if len(rows) <= 25:  # heading, basis and a short table (with its Total) on one page
            self.add(CondPageBreak(110), KeepTogether([_p(title, s["h"]), note, table]))
        else:
            self.h(title)
            self.add(note, table)

    def must(self) -> None:
        p, s = self.plan, self.s
        self.h("Must-replace assets")
        if not p.forced:
            self.add(_p("None were marked. Any asset can be marked must-replace (safety or "
                        "regulation): it is then replaced in year 0 whatever its value.",
                        s["body"]))
            return
        for a in p.forced:
            why = a.forced_reason or "marked must-replace"
            self.add(Paragraph(escape(f"{self._name(a)} ({a.site or 'no site'}): {why}; "
                                      f"replaced in {_when(p, a.year)} with {a.challenger}, "
                                      f"{self._m(a.capital)}."),
                               s["bullet"], bulletText="\u2022"))

    def comparison(self) -> None:
        p, s = self.plan, self.s
        self.h("Against a simple rule")
        if p.rule_objective is None:
            text = ("Funding each year's due replacements in order of value per unit of "
                    "capital cannot keep the budgets: it leaves an asset that cannot wait "
                    "unfunded. This plan keeps every budget.")
        elif (p.rule_gap or 0.0) < 0.5:
            text = (f"Funding each year's due replacements in order of value per unit of "
                    f"capital gives the same total value here ({self._m(p.rule_objective)}).")
        else:
            text = (f"Funding each year's due replacements in order of value per unit of "
                    f"capital gives a total value of {self._m(p.rule_objective)}; this plan "
                    f"gives {self._m(p.objective)}, {self._m(p.rule_gap or 0.0)} more.")
        self.add(_p(text, s["body"]))

    def method(self) -> None:
        p, s = self.plan, self.s
        self.h("Assumptions and method")
        budgets = [b for b in p.budgets if b is not None]
        if not budgets:
            btxt = "No budget was set: every asset is at its best year."
        elif len(set(budgets)) == 1 and len(budgets) == p.horizon:
            btxt = f"The budget is {self._m(budgets[0])} in every plan year."
        else:
            btxt = "The budget varies by year (table above)."
        btxt += (" Budgets apply to capital net of the defender's sale proceeds." if p.net else
                 " Budgets apply to gross capital (first costs).")
        if p.per_site_limit is not None:
            btxt += f" At most {p.per_site_limit} replacement(s) per site per year."
        for text in (btxt, p.basis_note, *METHOD):
            self.add(Paragraph(escape(text), s["bullet"], bulletText="\u2022"))

    def cautions(self) -> None:
        self.h("Cautions")
        self.add(*blocks.caution_bullets(self.s))

    def signoff(self, sink: dict) -> None:
        self.add(*blocks.signoff_section(self.w, self.s, self.o.names(), self.o.issued, sink,
                                         "plan", "tenure sign"))


def _build(plan: CapitalPlan, opts: PlanMemoOptions, fp: str, total: list[int],
           sink: dict) -> tuple[bytes, int]:
    buf = io.BytesIO()
    title = plan_title(plan)
    doc = blocks.memo_template(
        buf, opts.page_size, title=f"Plan memo: {title}",
        author=opts.prepared_by or opts.organisation or "Tenure",
        subject="Capital plan: replacements and capital by year under a budget",
        keywords=f"tenure capital plan; plan fingerprint {fp}")
    b = _PlanBuilder(plan, opts, doc.width)
    b.header()
    b.by_year()
    b.deferred()
    b.must()
    b.comparison()
    b.assets()
    b.method()
    b.cautions()
    b.signoff(sink)
    foot = blocks.page_footer(f"Plan fingerprint (SHA-256): {fp}",
                              f"Tenure capital plan memo: {title}", total,
                              PAGE_SIZES[opts.page_size])
    doc.build(b.story, onFirstPage=foot, onLaterPages=foot)
    return buf.getvalue(), doc.page


def render_plan_memo(plan: CapitalPlan, document: dict[str, Any],
                     options: PlanMemoOptions | None = None) -> tuple[bytes, int]:
    """The unsigned plan memo (PDF bytes, pages) with ``document`` attached."""
    opts = options or PlanMemoOptions()
    if opts.page_size not in PAGE_SIZES:
        raise ValueError(f"page size must be one of {', '.join(PAGE_SIZES)}")
    fp = plan_fingerprint(document)
    total = [0]
    sink: dict = {}
    _, pages = _build(plan, opts, fp, total, sink)
    total[0] = pages
    sink.clear()
    pdf, _ = _build(plan, opts, fp, total, sink)
    title = plan_title(plan)
    return finish_pdf(pdf, attachment=canonical(document).encode("utf-8"), fingerprint=fp,
                      fields=sink if opts.signature_fields else {}, title=title,
                      attachment_name=PLAN_ATTACHMENT_NAME,
                      description=f"Tenure capital plan inputs ({title}); SHA-256 "
                                  f"fingerprint {fp}"), total[0]


def issue_plan_memo(plan: CapitalPlan, source: Any, out: str | os.PathLike,
                    options: PlanMemoOptions | None = None, *,
                    identity: str | os.PathLike | None = None, passphrase: bytes | None = None,
                    role: str = "prepared", pins: dict[int, int] | None = None,
                    time_limit: float | None = None,
                    progress: Callable[[int, str], None] | None = None) -> IssuedPlanMemo:
    """Render the plan memo into ``out``; sign it in ``role``'s field when an identity is given.

    ``source`` is the :class:`core.plan.load.PlanSource` the plan was made from.
    """
    import dataclasses

    def step(pc: int, text: str) -> None:
        if progress is not None:
            progress(pc, text)

    opts = options or PlanMemoOptions()
    if identity is not None:
        from core.memo.errors import MemoError
        from core.memo.identity import load_identity

        if passphrase is None:
            raise MemoError("--passphrase-file", "a passphrase is needed to sign")
        step(5, "Opening the identity")
        info = load_identity(identity, passphrase)
        if not opts.names().get(role):
            named: dict[str, Any] = {f"{role}_by": info.common_name}
            opts = dataclasses.replace(opts, **named)
    step(15, "Laying out the plan memo")
    document = plan_document(plan, source.inputs, source.studies, pins, time_limit)
    pdf, pages = render_plan_memo(plan, document, opts)
    signer = None
    if identity is not None and passphrase is not None:
        step(80, "Signing")
        pdf, res = sign_pdf_bytes(pdf, identity, passphrase, role,
                                  reason=f"{role.capitalize()} (Tenure capital plan)")
        signer = res.signer
    step(95, "Writing the file")
    _atomic_write(Path(out), pdf)
    step(100, "Done")
    return IssuedPlanMemo(str(out), plan_fingerprint(document), plan_title(plan), pages,
                          role if signer else None, signer)
