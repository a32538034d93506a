"""Page one of the decision memo: what a signer needs, in plain words (docs/method.md §8).

The asset (tag, site, in-service date and age, when the memo comes from a workbook),
the recommendation with its equivalent annual cost (the figure Key figures shows), the
capital required and when, the largest one-off costs in the comparison, the
replacement value explained when it is negative or above today's market value, and a
pointer to the cautions. No symbols here: they stay in the method section.

:func:`page_one_facts` builds the text (testable without a PDF) from the results read
through :func:`core.bases.basis_views` and the study's own estimates;
:func:`page_one_flowables` lays it out.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.platypus import Flowable, Paragraph, Spacer, Table, TableStyle

from core.bases import BasisAlternative, BasisView, basis_views
from core.currency import format_money
from core.results import StudyResult

__all__ = ["AssetFacts", "PageOne", "PageMarker", "asset_facts", "page_one_facts",
           "page_one_flowables"]


@dataclass(frozen=True)
class AssetFacts:
    """The register entry of the asset a study is about (from a workbook)."""

    tag: str
    description: str
    site: str
    in_service: _dt.date | None
    study_year: int | None

    @property
    def age(self) -> int | None:
        """Whole years in service at the end of the study year (as the register counts)."""
        if self.in_service is None or self.study_year is None:
            return None
        return self.study_year - self.in_service.year


def asset_facts(workbook_path: str | Path, study: Any) -> AssetFacts | None:
    """The asset of ``study`` in the workbook at ``workbook_path`` (found by the study's
    fingerprint), or None when the file is not a workbook or does not hold the study."""
    try:
        from core.studyfile import fingerprint
        from core.workbook import Workbook

        with Workbook.open(workbook_path, write=False) as wb:
            found = wb.find_study(fingerprint(study))
            if found is None:
                return None
            tag, year = found
            a = wb.asset(tag)
    except Exception:  # noqa: BLE001 - page one then goes without the register entry
        return None
    return AssetFacts(a.tag, a.description, a.site, a.in_service, int(year))


@dataclass(frozen=True)
class PageOne:
    """Page one's text: each item one plain sentence or a (label, amount) row."""

    asset: tuple[tuple[str, str], ...]
    headline: str
    sentence: str
    comparison: str
    capital_intro: str
    capital: tuple[tuple[str, str], ...]
    one_offs: tuple[str, ...]
    replacement_value: str
    cautions: str


def _yrs(n: int) -> str:
    return f"{n} year" if n == 1 else f"{n} years"


def _when(years: int, study_year: int | None) -> str:
    if years <= 0:
        return "now" + (f" ({study_year})" if study_year else "")
    return f"in {_yrs(years)}" + (f" ({study_year + years})" if study_year else "")


def _plan(view: BasisView) -> tuple[str | None, int]:
    """(challenger to buy or None, years until it is needed) on the decision basis."""
    rec = view.recommendation
    if rec.action == "replace":
        return rec.challenger or rec.best_challenger, 0
    if rec.study_period is not None:  # keep j years then a challenger, or keep throughout
        if rec.challenger is None:
            return None, 0
        return rec.challenger, int(rec.defender_years or 0)
    return rec.best_challenger or None, int(rec.planned_defender_years or 0)


def page_one_facts(result: StudyResult, currency: str = "",
                   asset: AssetFacts | None = None, cautions_page: int | None = None,
                   options_page: int | None = None) -> PageOne:
    """The text of page one (see the module docstring).

    >>> from core.estimates import Alternative, ExtraCost, MarketValues, OperatingCosts, Study
    >>> from core.study import run_study
    >>> d = Alternative("Old press", "defender", 20000.0, 4, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=9000.0, gradient=2500.0),
    ...                 (ExtraCost(3, 28000.0, "overhaul"),))
    >>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=3000.0, gradient=500.0))
    >>> p = page_one_facts(run_study(Study("Press line", 0.10, d, (c,))), "£")
    >>> p.headline, p.one_offs[0]
    ('REPLACE NOW', 'Overhaul: £28,000 in year 3 of keeping Old press (the defender).')
    """
    views = basis_views(result)
    view = views[0]
    tag = "" if len(views) == 1 else f" {view.label}"
    money = (lambda x: format_money(x, currency))  # noqa: E731 - local shorthand
    alts = {a.name: a for a in view.alternatives}
    d = next(a for a in view.alternatives if a.role == "defender")
    rec = view.recommendation
    year0 = asset.study_year if asset is not None else None
    facts: list[tuple[str, str]] = []
    if asset is not None:
        facts.append(("Asset", f"{asset.tag}, {asset.description}"))
        facts.append(("Site", asset.site))
        if asset.in_service is not None:
            age = asset.age
            facts.append(("In service since", asset.in_service.isoformat()
                          + (f" ({_yrs(age)} old in {asset.study_year})"
                             if age is not None and age >= 0 else "")))

    # the recommendation, in words, with the equivalent annual cost that Key figures shows
    buy, wait = _plan(view)
    period = rec.study_period
    if period is None:
        c = alts[rec.best_challenger] if rec.best_challenger in alts else None
        d_eac = -d.annual_worth_at_economic_life
        c_eac = -c.annual_worth_at_economic_life if c is not None else 0.0  # read only with c
        if rec.action == "replace" and c is not None:
            headline = "REPLACE NOW"
            sentence = (f"Replace {d.name} now with {c.name}. Over its economic life of "
                        f"{_yrs(c.economic_life)}, {c.name} has an equivalent annual cost"
                        f"{tag} of {money(c_eac)}, which is {money(d_eac - c_eac)} a year "
                        f"less than keeping {d.name} ({money(d_eac)} a year over its best "
                        f"remaining life of {_yrs(d.economic_life)}).")
        else:
            headline = "KEEP"
            sentence = (f"Keep {d.name}. Over its best remaining life of "
                        f"{_yrs(d.economic_life)} it has an equivalent annual cost{tag} of "
                        f"{money(d_eac)}")
            omy = rec.one_more_year
            if c is not None:
                sentence += (f", {money(c_eac - d_eac)} a year less than the best "
                             f"challenger, {c.name} ({money(c_eac)} a year over "
                             f"{_yrs(c.economic_life)}).")
                if not omy.keep_next_year:
                    # the one-more-year check disagrees: say why keeping still wins
                    sentence += (f" Next year alone costs "
                                 f"{money(omy.defender_marginal_cost)} to keep it, "
                                 f"more than {money(c_eac)}, but the years after it cost "
                                 "less, so keeping wins over its best remaining life")
                else:
                    sentence += (" Keep it each further year only while that year's cost "
                                 f"stays below {money(c_eac)}")
                sentence += ("; restudy it every year" + (
                    f"; on today's estimates it is replaced {_when(wait, year0)}"
                    if wait else ""))
            sentence += "."
    else:
        feasible = [o for o in view.options if o.feasible and o.annual_worth is not None]
        best = max(feasible, key=lambda o: round(float(o.annual_worth or 0.0), 2),
                   default=None)
        eac = money(-best.annual_worth) if best is not None and best.annual_worth is not None \
            else "-"
        if rec.action == "replace":
            headline = "REPLACE NOW"
            plan = f"replace {d.name} now with {buy}"
        elif buy is None:
            headline = "KEEP"
            plan = f"keep {d.name} for the whole study period"
        else:
            headline = f"KEEP {_yrs(wait).upper()}, THEN REPLACE"
            plan = (f"keep {d.name} {_yrs(wait)} more, then replace it with {buy} for the "
                    f"remaining {_yrs(period - wait)}")
        sentence = (f"Over the {period}-year study period, {plan}: an equivalent annual cost"
                    f"{tag} of {eac}, the least of the {len(feasible)} feasible options "
                    f"(Study-period options{f', page {options_page}' if options_page else ''}).")
    comparison = ""
    if len(views) > 1:
        other = views[1].recommendation
        same = (other.action == rec.action and other.challenger == rec.challenger
                and other.defender_years == rec.defender_years)
        words = ("replace now" if other.action == "replace" else "keep the defender")
        if other.study_period is not None and other.action == "keep" and other.challenger:
            words = f"keep the defender {_yrs(int(other.defender_years or 0))}, then replace"
        comparison = (f"The recommendation rests on the after-tax study. Before tax the "
                      f"study {'says the same' if same else 'would say'}: {words}"
                      + ("" if same or not other.challenger else f" with {other.challenger}")
                      + ". Both bases are shown in full in this memo.")

    # capital required
    capital: list[tuple[str, str]] = []
    if buy is None or buy not in alts:
        intro = ("No capital is required: the defender is kept"
                 + (" for the whole study period." if period else "."))
    else:
        c = alts[buy]
        before = next(v for v in views if v.basis == "before-tax")
        cb, db = before.alternative(c.name), before.alternative(d.name)
        price = cb.outlay
        intro = f"Capital required {_when(wait, year0)}, to buy {c.name}"
        if wait and period is None:
            intro += " (on today's estimates; the yearly restudy may move it)"
        intro += ":"
        capital.append((f"First cost of {c.name}", money(price)))
        if wait == 0:
            sale = db.outlay
            capital.append((f"Less the sale of {d.name} at today's market value",
                            money(-sale if sale is not None else None)))
            if price is not None and sale is not None:
                capital.append(("Net capital required before tax", money(price - sale)))
            if view.basis == "after-tax":
                ca, da = c, d
                if ca.outlay is not None and da.outlay is not None:
                    capital.append((f"Net outlay after tax (the sale of {d.name} after the "
                                    "tax on its gain, or the credit on its loss)",
                                    money(ca.outlay - da.outlay)))
        else:
            s = db.market_values[wait - 1] if len(db.market_values) >= wait else None
            if s is not None:
                capital.append((f"Less the sale of {d.name} then, at its estimated market "
                                "value", money(-s)))
                if price is not None:
                    capital.append(("Net capital required before tax", money(price - s)))
    # the largest one-off costs
    extras = []
    for alt in result.study.alternatives:
        owner = (f"keeping {alt.name} (the defender)" if alt.role == "defender"
                 else f"owning {alt.name}")
        for x in alt.extra_costs:
            label = (x.label or "one-off cost").strip()
            extras.append((float(x.amount), f"{label[:1].upper()}{label[1:]}: "
                                             f"{money(x.amount)} in year {x.year} of {owner}."))
    extras.sort(key=lambda e: -e[0])
    one_offs = tuple(text for _, text in extras[:3])
    # the replacement value in words
    rv, mv = rec.replacement_value, before_price(views, d)
    rv_text = ""
    if rv is not None and mv is not None:
        if rv < -0.5:
            rv_text = (f"Replacement value {money(rv)}, below zero: replacing pays even if "
                       f"{d.name} fetches nothing. It would still pay if removing it cost up "
                       f"to {money(-rv)}. So the case does not rest on the sale price "
                       f"(today about {money(mv)}).")
        elif rv > mv + 0.5:
            rv_text = (f"Replacement value {money(rv)}, above today's market value of "
                       f"{money(mv)}: replacing would pay only if someone offered more than "
                       f"{money(rv)} for {d.name}. At today's value, keeping it costs less.")
        else:
            rv_text = (f"Replacement value {money(rv)}: replacing pays as long as {d.name} "
                       f"sells for more than that (today about {money(mv)}).")
        if rec.study_period is not None:  # the figure compares economic lives, not the period
            rv_text += (f" This compares each alternative at its economic life with no study "
                        f"period; the recommendation above is the best option over the "
                        f"{rec.study_period}-year study period.")
    where = f" on page {cautions_page}" if cautions_page else " near the end"
    cautions = (f"Before signing, read the cautions{where}: the result rests on estimates "
                "of future costs and resale values, and on the interest rate chosen.")
    return PageOne(tuple(facts), headline, sentence, comparison, intro, tuple(capital),
                   one_offs, rv_text, cautions)


def before_price(views: tuple[BasisView, ...], d: BasisAlternative) -> float | None:
    """The defender's market value today (its before-tax price)."""
    before = next(v for v in views if v.basis == "before-tax")
    return before.alternative(d.name).outlay


class PageMarker(Flowable):
    """Zero-size flowable that records the page it lands on in ``sink[key]``."""

    def __init__(self, sink: dict[str, int], key: str):
        super().__init__()
        self.sink, self.key = sink, key
        self.width = self.height = 0

    def wrap(self, availWidth, availHeight):  # noqa: N803 - reportlab API
        return 0, 0

    def draw(self) -> None:
        self.sink[self.key] = self.canv.getPageNumber()


def page_one_flowables(p: PageOne, width: float, styles: dict[str, ParagraphStyle],
                       basis: str) -> list[Flowable]:
    """Page one laid out: the asset, the recommendation box, capital, one-off costs, notes."""
    s = styles
    out: list[Flowable] = []
    if p.asset:
        t = Table([[Paragraph(f"<b>{escape(k)}</b>", s["cell"]),
                    Paragraph(escape(v), s["cell"])] for k, v in p.asset],
                  colWidths=[0.2 * width, 0.8 * width], hAlign="LEFT")
        t.setStyle(TableStyle([("TOPPADDING", (0, 0), (-1, -1), 1),
                               ("BOTTOMPADDING", (0, 0), (-1, -1), 1),
                               ("LEFTPADDING", (0, 0), (-1, -1), 0)]))
        out += [t, Spacer(1, 5)]
    rows = [[Paragraph(f"<font color='#1f4e79'>Recommendation ({escape(basis)}):</font> "
                       f"<b>{escape(p.headline)}</b>", s["body"])],
            [Paragraph(escape(p.sentence), s["rec"])]]
    if p.comparison:
        rows.append([Paragraph(escape(p.comparison), s["small"])])
    box = Table(rows, colWidths=[width], hAlign="LEFT")
    box.setStyle(TableStyle([
        ("BOX", (0, 0), (-1, -1), 1.0, colors.HexColor("#1f4e79")),
        ("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#f3f6fa")),
        ("LEFTPADDING", (0, 0), (-1, -1), 7), ("RIGHTPADDING", (0, 0), (-1, -1), 7),
        ("TOPPADDING", (0, 0), (-1, 0), 5), ("BOTTOMPADDING", (0, -1), (-1, -1), 7)]))
    out += [box, Spacer(1, 6)]
    out.append(Paragraph(f"<b>{escape(p.capital_intro)}</b>", s["body"]))
    if p.capital:
        t = Table([[Paragraph(escape(k), s["cell"]), v] for k, v in p.capital],
                  colWidths=[0.7 * width, 0.3 * width], hAlign="LEFT")
        t.setStyle(TableStyle([("ALIGN", (1, 0), (1, -1), "RIGHT"),
                               ("LINEBELOW", (0, 0), (-1, -1), 0.25, colors.HexColor("#cccccc")),
                               ("FONT", (1, 0), (1, -1), s["cell"].fontName, 8),
                               ("TOPPADDING", (0, 0), (-1, -1), 2),
                               ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
                               ("VALIGN", (0, 0), (-1, -1), "MIDDLE")]))
        out += [t]
    out.append(Spacer(1, 5))
    if p.one_offs:
        out.append(Paragraph("<b>Largest one-off costs in the comparison</b> (each is counted "
                             "whenever a retention or option keeps that machine into its "
                             "year):", s["body"]))
        out += [Paragraph(escape(x), s["bullet"], bulletText="\u2022") for x in p.one_offs]
        out.append(Spacer(1, 3))
    if p.replacement_value:
        out.append(Paragraph(escape(p.replacement_value), s["body"]))
    out.append(Paragraph(f"<i>{escape(p.cautions)}</i>", s["body"]))
    return out
