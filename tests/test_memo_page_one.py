"""Memo page one (issue 17): what a signer needs, in plain words; every table labelled.

Checked on the demo fleet (an after-tax replace with a negative replacement value, a keep
with the replacement value above the market value) and on an invented after-tax grinder
with a study period and a £28,000 overhaul.
"""

from __future__ import annotations

import datetime as dt
import io
import re

import pytest
from pypdf import PdfReader

from core.demo import build_demo
from core.memo.page_one import AssetFacts, asset_facts, page_one_facts
from core.memo.render import MemoOptions, render_memo
from core.study import run_study
from core.studyfile import parse_study_document
from core.workbook import Workbook

AC101 = "Kestrel Road — AC-101 Rotary screw compressor 75 kW"
PB05 = "Kestrel Road — PB-05 Hydraulic press brake 60 t"

GRINDER = {
    "format": "tenure-study", "version": 1,
    "title": "Ouseburn Yard — GR-3 Surface grinder", "marr": 0.09, "study_period": 6,
    "tax": {"rate": 0.25, "after_tax_marr": 0.07},
    "defender": {"name": "Surface grinder GR-3 (2013)", "market_value": 9000, "max_life": 6,
                 "market_values": {"decline_rate": 0.2},
                 "operating_costs": {"first": 15500, "gradient": 1800},
                 "extra_costs": [{"year": 3, "amount": 28000,
                                  "label": "spindle and way overhaul"}],
                 "depreciation": {"method": "straight_line", "basis": 70000, "years": 10,
                                  "age": 8}},
    "challengers": [{"name": "CNC surface grinder 600", "first_cost": 88000, "max_life": 12,
                     "market_values": {"decline_rate": 0.15},
                     "operating_costs": {"first": 7200, "growth": 0.05},
                     "extra_costs": [{"year": 5, "amount": 12000, "label": "control retrofit"}],
                     "depreciation": {"method": "macrs", "class": 7}},
                    {"name": "Manual grinder, rebuilt", "first_cost": 41000, "max_life": 8,
                     "market_values": {"decline_rate": 0.25},
                     "operating_costs": {"first": 11800, "gradient": 900},
                     "depreciation": {"method": "declining_balance", "rate": 0.25,
                                      "years": 8}}]}

HEADINGS = ("Key figures", "Annual worth against retention", "Study-period options",
            "After-tax results", "Year by year", "Assumptions and inputs", "Conventions",
            "Method", "Symbols used in the tables", "Cautions", "Sign-off", "Risk")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return build_demo(tmp_path_factory.mktemp("demo") / "demo.tenure")


def _study(demo, title):
    with Workbook.open(demo, write=False) as wb:
        return next(r.study for r in wb.studies() if r.study.title == title)


def _pages(pdf: bytes) -> list[str]:
    return [p.extract_text() or "" for p in PdfReader(io.BytesIO(pdf)).pages]


def _flat(s: str) -> str:
    return " ".join(s.split())


def test_after_tax_replace_with_a_negative_replacement_value(demo):
    study = _study(demo, AC101)
    result = run_study(study)
    facts = page_one_facts(result, "£", asset_facts(demo, study))
    at = result.after_tax
    best = at.alternative("VSD screw compressor 75 kW")
    d = at.alternative(study.defender.name)
    assert facts.headline == "REPLACE NOW"
    # the same EAC as Key figures' "EAC after tax" column, as a positive cost
    assert f"£{-best.annual_worth_at_economic_life:,.0f}" == "£29,827"
    assert "equivalent annual cost after tax of £29,827" in facts.sentence
    assert not re.search(r"-£?\d", facts.sentence)  # no negative number in a sentence
    # hand calculation: 64,000 - 7,500 = 56,500; after tax 64,000 less the defender's
    # after-tax sale proceeds MV - t(MV - BV_0) (its year-0 outlay)
    rows = dict(facts.capital)
    assert rows["First cost of VSD screw compressor 75 kW"] == "£64,000"
    assert rows["Net capital required before tax"] == "£56,500"
    after = [v for k, v in facts.capital if k.startswith("Net outlay after tax")]
    assert after == [f"£{64000 - d.tax.initial:,.0f}"]
    assert d.tax.initial == pytest.approx(7500 - 0.25 * (7500 - d.tax.book_value_0))
    assert "now (2026)" in facts.capital_intro
    assert facts.one_offs == ("Airend rebuild: £9,500 in year 1 of keeping Rotary screw "
                              "compressor 75 kW (2012) (the defender).",)
    assert "below zero" in facts.replacement_value and "£2,215" in facts.replacement_value
    assert dict(facts.asset) == {"Asset": "AC-101, Rotary screw compressor 75 kW",
                                 "Site": "Kestrel Road",
                                 "In service since": "2012-04-16 (14 years old in 2026)"}


def test_keep_with_the_replacement_value_above_the_market_value(demo):
    study = _study(demo, PB05)
    result = run_study(study)
    facts = page_one_facts(result, "£", AssetFacts("PB-05", "press", "Kestrel Road",
                                                   dt.date(2018, 10, 15), 2026))
    rec = result.recommendation
    assert facts.headline == "KEEP" and rec.action == "keep"
    assert f"£{-result.defender.annual_worth_at_economic_life:,.0f}" in facts.sentence
    assert not re.search(r"-£?\d", facts.sentence)
    n = rec.planned_defender_years
    assert f"in {n} years ({2026 + n})" in facts.capital_intro
    s_n = result.defender.market_values[n - 1]
    rows = dict(facts.capital)
    # hand calculation: first cost less the defender's estimated market value in year n
    assert rows["Net capital required before tax"] == f"£{182000 - s_n:,.0f}"
    assert "above today's market value of £52,000" in facts.replacement_value


def test_memo_text_cautions_pointer_and_both_study_period_tables(tmp_path):
    study = parse_study_document(GRINDER)[0]
    result = run_study(study)
    for size in ("A4", "Letter"):
        pdf = render_memo(result, MemoOptions(page_size=size, currency="GBP"))
        pages = _pages(pdf)
        caution_page = next(n for n, text in enumerate(pages, 1)
                            if re.search(r"^Cautions$", text, re.M))
        first = _flat(pages[0])
        assert f"read the cautions on page {caution_page}" in first
        assert "Spindle and way overhaul: £28,000 in year 3" in first
        assert "KEEP 2 YEARS, THEN REPLACE" in first and "£16,024" in first
        assert "Capital required in 2 years, to buy Manual grinder, rebuilt" in first
        # The replacement value and the one-more-year check compare economic lives; with a
        # study period the signer is told so, next to a recommendation that may differ.
        assert ("no study period; the recommendation above is the best option over the "
                "6-year study period") in first
        assert "One-more-year check (next year) without a study period" in first
        whole = _flat(" ".join(pages))
        a = whole.index("Study-period options, after tax (decision basis)")
        b = whole.index("Study-period options, before tax (for comparison)")
        assert a < b
        assert "Annual worth against years of retention, after tax (decision basis)" in whole
        assert "Key figures (decision basis: after tax)" in whole
        assert "Year by year (before tax)" in whole
        assert "Symbols used in the tables" in whole and "MC_k: marginal cost" in whole


@pytest.mark.parametrize("size", ["A4", "Letter"])
def test_no_page_ends_with_a_heading(demo, size):
    studies = [_study(demo, AC101), _study(demo, PB05), parse_study_document(GRINDER)[0]]
    for study in studies:
        pages = _pages(render_memo(run_study(study), MemoOptions(page_size=size)))
        for n, text in enumerate(pages[:-1], 1):
            lines = [ln.strip() for ln in text.splitlines() if ln.strip()
                     and not ln.startswith(("Study fingerprint", "Tenure decision memo"))
                     and not re.fullmatch(r"page \d+ of \d+", ln.strip())]
            last = lines[-1]
            assert not last.startswith(HEADINGS), (study.title, size, n, last)
            assert not last.endswith(", after tax"), (study.title, size, n, last)


def test_keep_when_next_year_alone_costs_more_than_the_challenger(demo):
    # demo PB-02: a £12,500 overhaul in year 1 puts next year's marginal cost above the
    # challenger's EAC while keeping still wins at the ESL; page one must not give a keep
    # rule that the one-more-year check contradicts
    result = run_study(_study(demo, "Ouseburn Yard — PB-02 Hydraulic press brake 100 t"))
    omy = result.recommendation.one_more_year
    assert result.recommendation.action == "keep" and omy.keep_next_year is False
    facts = page_one_facts(result, "£")
    assert "only while" not in facts.sentence
    assert f"Next year alone costs £{omy.defender_marginal_cost:,.0f}" in facts.sentence
    assert not re.search(r"-£?\d", facts.sentence)
