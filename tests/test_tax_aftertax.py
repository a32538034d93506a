"""The after-tax study: a hand-worked straight-line case, a plain-loop reference, limits."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from core.aftertax import after_tax_annual_worth, cash_flow_table
from core.depreciation import schedule
from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.jsonout import study_json
from core.report import format_after_tax
from core.study import run_study


def hand_study(**kw) -> Study:
    defender = Alternative(
        "Old lathe", "defender", 5000.0, 2, MarketValues(values=(4000.0, 2000.0)),
        OperatingCosts(values=(3000.0, 3500.0)),
        depreciation=Depreciation("straight_line", basis=12000.0, years=6, age=3))
    challenger = Alternative(
        "New lathe", "challenger", 10000.0, 2, MarketValues(values=(6000.0, 3000.0)),
        OperatingCosts(values=(1000.0, 1500.0)),
        depreciation=Depreciation("straight_line", years=4, salvage=2000.0))
    base = dict(title="Millbrook lathe", marr=0.15, defender=defender,
                challengers=(challenger,), tax=Tax(rate=0.40, after_tax_marr=0.10))
    base.update(kw)
    return Study(**base)


def test_hand_worked_straight_line_case() -> None:
    # hand calculation, t = 0.40, after-tax MARR 10%.
    # Challenger: P = 10,000, SL (10,000 - 2,000)/4 = 2,000 a year.
    #   k=1: year 1 = -(0.6)(1,000) + 0.4(2,000) = 200; BV_1 = 8,000;
    #        disposal 6,000 - 0.4(6,000 - 8,000) = 6,800; PW = -10,000 + 7,000/1.1 = -3,636.36;
    #        AW_1 = PW(1.1) = -4,000.00
    #   k=2: year 2 = -(0.6)(1,500) + 800 = -100; BV_2 = 6,000;
    #        disposal 3,000 - 0.4(3,000 - 6,000) = 4,200;
    #        PW = -10,000 + 200/1.1 + 4,100/1.21 = -6,429.75; AW_2 = PW(A/P,10%,2)
    #        = -6,429.75 x 0.576190 = -3,704.76  -> ESL 2
    # Defender: MV 5,000, basis 12,000, SL 2,000/yr, age 3: BV_0 = 6,000;
    #   year 0 = -[5,000 - 0.4(5,000 - 6,000)] = -5,400
    #   k=1: year 1 = -(0.6)(3,000) + 800 = -1,000; S_1 = BV_1 = 4,000 (no tax);
    #        PW = -5,400 + 3,000/1.1 = -2,672.73; AW_1 = -2,940.00
    #   k=2: year 2 = -(0.6)(3,500) + 800 = -1,300, S_2 = BV_2 = 2,000;
    #        PW = -5,400 - 1,000/1.1 + 700/1.21 = -5,730.58; AW_2 = -3,301.90  -> ESL 1
    # Decision: keep (-2,940.00 > -3,704.76).
    r = run_study(hand_study())
    ch = r.after_tax.alternative("New lathe")
    de = r.after_tax.alternative("Old lathe")
    assert ch.annual_worth.tolist() == pytest.approx([-4000.00, -3704.76], abs=0.01)
    assert de.annual_worth.tolist() == pytest.approx([-2940.00, -3301.90], abs=0.01)
    assert (ch.economic_life, de.economic_life) == (2, 1)
    assert float(de.tax.initial) == pytest.approx(5400.0)
    assert float(de.tax.book_value_0) == pytest.approx(6000.0)
    assert r.recommendation.basis == "after-tax"
    assert r.recommendation.action == "keep"
    assert r.before_tax_recommendation.basis == "before-tax"
    # after-tax RV: the MV at which the defender's best AW equals -3,704.76. Raising MV by x
    # lowers AW_k by 0.6x(A/P,10%,k): AW_1 by 0.66x, AW_2 by 0.345714x. AW_2 reaches the target
    # first: x = (3,704.76 - 3,301.90)/0.345714 = 1,165.29 (AW_1 is then -3,709.09, lower), so
    # RV = 6,165.29 (hand calculation)
    assert r.recommendation.replacement_value == pytest.approx(6165.29, abs=0.01)


def test_disposal_at_book_value_carries_no_tax() -> None:
    # common practice, no source: gain S_k - BV_k = 0 means no tax on disposal
    s = schedule(Depreciation("macrs", macrs_class=5), 50000.0, 4)
    bv = s.book_value_at_disposal()
    out = after_tax_annual_worth(50000.0, bv, np.full(4, 2000.0), s.allowance, 50000.0, 0.3,
                                 0.08, disposal_fraction=s.disposal_fraction)
    assert np.allclose(out.disposal, bv)
    for k in range(1, 5):
        tab = cash_flow_table(k, 50000.0, bv, np.full(4, 2000.0), s, 0.3, False)
        assert tab.taxable_income[k] == pytest.approx(-2000.0 - tab.depreciation[k])


def reference_aw(price, S, C, D, h, bv0, t, i, defender):
    """Plain loops, one retention at a time (independent of the vectorised code)."""
    out = []
    for k in range(1, len(S) + 1):
        pw = -(price - t * (price - bv0)) if defender else -price
        bv = bv0
        for j in range(1, k + 1):
            d = D[j - 1] * (h[j - 1] if j == k else 1.0)
            bv -= d
            flow = -(1 - t) * C[j - 1] + t * d
            if j == k:
                flow += S[k - 1] - t * (S[k - 1] - bv)
            pw += flow / (1 + i) ** j
        out.append(pw * i * (1 + i) ** k / ((1 + i) ** k - 1))
    return np.array(out)


@pytest.mark.parametrize("seed", range(6))
def test_vectorised_matches_plain_loops(seed: int) -> None:
    # reference: the plain-loop after-tax AW above (hand calculation written as code)
    rng = np.random.default_rng(seed)
    methods = [Depreciation("macrs", basis=90000.0, age=int(rng.integers(0, 5)),
                            macrs_class=int(rng.choice([3, 5, 7, 10, 15, 20]))),
               Depreciation("straight_line", basis=90000.0, years=7, age=2, salvage=5000.0),
               Depreciation("declining_balance", basis=90000.0, years=8, age=1, rate=0.25)]
    n = 9
    S = rng.uniform(0, 40000, n)
    C = rng.uniform(1000, 20000, n)
    t = float(rng.uniform(0.1, 0.45))
    i = float(rng.uniform(0.02, 0.15))
    for dep in methods:
        s = schedule(dep, 90000.0, n)
        ours = after_tax_annual_worth(30000.0, S, C, s.allowance, s.book_value_0, t, i,
                                      disposal_fraction=s.disposal_fraction, defender=True)
        ref = reference_aw(30000.0, S, C, s.allowance, s.disposal_fraction,
                           float(s.book_value_0), t, i, True)
        assert ours.annual_worth == pytest.approx(ref, abs=1e-6)
        # the cash-flow table discounts to the same PW
        for k in (1, n // 2, n):
            tab = cash_flow_table(k, 30000.0, S, C, s, t, True)
            pw = sum(tab.net[j] / (1 + i) ** j for j in range(k + 1))
            assert pw == pytest.approx(ours.present_worth[k - 1], abs=1e-6)


def test_batch_dimension() -> None:
    # common practice, no source: a batch gives row by row what single calls give
    s = schedule(Depreciation("macrs", macrs_class=7), np.array([60000.0, 80000.0]), 5)
    S = np.array([[40000.0, 30000, 22000, 15000, 10000], [50000, 40000, 30000, 20000, 12000]])
    C = np.array([[3000.0, 3500, 4000, 4500, 5000]] * 2)
    batch = after_tax_annual_worth(np.array([60000.0, 80000.0]), S, C, s.allowance,
                                   s.book_value_0, np.array([0.25, 0.3]), np.array([0.07, 0.08]),
                                   disposal_fraction=s.disposal_fraction)
    for b, (p, t, i) in enumerate([(60000.0, 0.25, 0.07), (80000.0, 0.3, 0.08)]):
        one = schedule(Depreciation("macrs", macrs_class=7), p, 5)
        single = after_tax_annual_worth(p, S[b], C[b], one.allowance, one.book_value_0, t, i,
                                        disposal_fraction=one.disposal_fraction)
        assert batch.annual_worth[b] == pytest.approx(single.annual_worth)


def _rich_study(study_period=None) -> Study:
    d = Alternative("Old furnace", "defender", 30000.0, 6, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=12000.0, gradient=1500.0),
                    (ExtraCost(3, 8000.0, "reline"),),
                    Depreciation("macrs", basis=70000.0, age=4, macrs_class=7))
    c1 = Alternative("Induction furnace", "challenger", 95000.0, 12,
                     MarketValues(decline_rate=0.15), OperatingCosts(first=5000.0, growth=0.05),
                     depreciation=Depreciation("macrs", macrs_class=10))
    c2 = Alternative("Gas furnace", "challenger", 70000.0, 10,
                     MarketValues(values=tuple(70000.0 * 0.8 ** k for k in range(1, 11))),
                     OperatingCosts(first=7000.0, gradient=600.0),
                     depreciation=Depreciation("declining_balance", years=8, rate=0.25))
    return Study("Ouseburn Yard furnace", 0.09, d, (c1, c2), study_period=study_period,
                 tax=Tax(0.0, 0.09))


@pytest.mark.parametrize("period", [None, 8])
def test_zero_tax_equals_before_tax(period) -> None:
    # common practice, no source: with t = 0 and after-tax MARR = MARR, after tax = before tax
    r = run_study(_rich_study(period))
    for alt in r.alternatives:
        assert r.after_tax.alternative(alt.name).annual_worth == pytest.approx(alt.annual_worth, abs=1e-6)
        assert r.after_tax.alternative(alt.name).economic_life == alt.economic_life
    a, b = r.recommendation, r.before_tax_recommendation
    assert (a.action, a.challenger, a.defender_years) == (b.action, b.challenger, b.defender_years)
    assert a.replacement_value == pytest.approx(b.replacement_value, abs=1e-4)
    before = r.before_tax.study_period_options
    for x, y in zip(r.study_period_options, before, strict=True):
        assert (x.annual_worth is None) == (y.annual_worth is None)
        if x.annual_worth is not None:
            assert x.annual_worth == pytest.approx(y.annual_worth, abs=1e-6)


def test_esl_ties_go_to_the_shorter_life() -> None:
    # common practice, no source: equal after-tax AW (to the cent) -> the shorter life.
    # t = 0, i = 0, P = 100, S = 50 then 0, C = 0 then 0: AW_1 = -50, AW_2 = -50.
    d = Alternative("D", "defender", 100.0, 2, MarketValues(values=(50.0, 0.0)),
                    OperatingCosts(values=(0.0, 0.0)),
                    depreciation=Depreciation("straight_line", basis=100.0, years=2))
    c = dataclasses.replace(d, name="C", role="challenger",
                            depreciation=Depreciation("straight_line", years=2))
    r = run_study(Study("tie", 0.0, d, (c,), tax=Tax(0.0, 0.0)))
    assert r.after_tax.alternative("C").annual_worth.tolist() == pytest.approx([-50.0, -50.0])
    assert r.after_tax.alternative("C").economic_life == 1


def test_text_and_json_blocks() -> None:
    r = run_study(hand_study())
    text = format_after_tax(r.after_tax, r.before_tax)
    assert "After-tax cash flows of keeping New lathe 2 years" in text
    js = study_json(r)
    at = js["alternatives"][1]["after_tax"]
    assert at["economic_life"] == 2
    assert len(at["annual_worth"]) == 2
    assert [len(tab["rows"]) for tab in at["cash_flows"]] == [2, 3]
    assert js["recommendation"]["basis"] == "after-tax"
    assert js["before_tax_recommendation"]["basis"] == "before-tax"


def test_decision_annual_worth_matches_analyse() -> None:
    # common practice, no source: the batch helper reproduces the study's own after-tax AW
    study = _rich_study()
    study = dataclasses.replace(study, tax=Tax(0.3, 0.06))
    r = run_study(study)
    from core.aftertax import decision_annual_worth

    for alt in study.alternatives:
        aw = decision_annual_worth(study, alt, np.array([alt.price, alt.price]))
        assert aw.shape == (2, alt.max_life)
        assert aw[1] == pytest.approx(r.after_tax.alternative(alt.name).annual_worth_constant)


def test_tables_against_numpy_financial() -> None:
    # numpy-financial: npv of each retention's after-tax cash-flow table, times pmt-based
    # capital recovery, gives the after-tax AW the study reports
    npf = pytest.importorskip("numpy_financial")
    study = dataclasses.replace(_rich_study(), tax=Tax(0.35, 0.065))
    r = run_study(study)
    for alt in r.alternatives:
        at = r.after_tax.alternative(alt.name)
        for k, tab in enumerate(at.tax.tables, start=1):
            pw = npf.npv(0.065, tab.net)
            aw = -npf.pmt(0.065, k, pw)
            assert aw == pytest.approx(at.annual_worth[k - 1], abs=1e-6)
