"""Inflation: rate identities, constant vs then-current statements, inflation after tax."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from core import inflation as infl
from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    Inflation,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.factors import ap
from core.study import run_study


def test_market_rate_formula() -> None:
    # hand calculation: i_f = i + f + i f = 0.10 + 0.05 + 0.005 = 0.155
    assert float(infl.market_rate(0.10, 0.05)) == pytest.approx(0.155)
    # inverse: (1.155/1.05) - 1 = 0.10
    assert float(infl.real_rate(0.155, 0.05)) == pytest.approx(0.10)
    # vectorised, and f = 0 leaves the rate alone (common practice, no source)
    assert infl.market_rate([0.0, 0.07], [0.03, 0.0]).tolist() == pytest.approx([0.03, 0.07])


def test_money_conversions_round_trip() -> None:
    # hand calculation: 1,000 today at f = 10% is 1,100, 1,210, 1,331 then-current
    tc = infl.to_then_current([1000.0, 1000.0, 1000.0], 0.10)
    assert tc.tolist() == pytest.approx([1100.0, 1210.0, 1331.0])
    assert infl.to_constant(tc, 0.10).tolist() == pytest.approx([1000.0] * 3)
    # PW identity: constant money at i equals then-current money at i_f (Fisher relation)
    i, f = 0.08, 0.04
    years = np.arange(1, 4)
    pw_c = np.sum(1000.0 / (1 + i) ** years)
    tc_f = infl.to_then_current([1000.0] * 3, f)
    pw_t = np.sum(tc_f / (1 + float(infl.market_rate(i, f))) ** years)
    assert pw_t == pytest.approx(pw_c)


def _study(estimates: str, f: float, tax: Tax | None, period: int | None = None) -> Study:
    d = Alternative("Old compressor", "defender", 18000.0, 5, MarketValues(decline_rate=0.22),
                    OperatingCosts(first=11000.0, gradient=2200.0),
                    (ExtraCost(2, 6000.0, "valve overhaul"),),
                    Depreciation("straight_line", basis=40000.0, years=8, age=3))
    c1 = Alternative("Screw compressor", "challenger", 52000.0, 10,
                     MarketValues(decline_rate=0.17), OperatingCosts(first=4200.0, gradient=450.0),
                     depreciation=Depreciation("macrs", macrs_class=7))
    c2 = Alternative("Scroll compressor", "challenger", 41000.0, 8,
                     MarketValues(decline_rate=0.25), OperatingCosts(first=5600.0, growth=0.06),
                     depreciation=Depreciation("macrs", macrs_class=5))
    s = Study("Kestrel Road compressed air", 0.08, d, (c1, c2), study_period=period, tax=tax,
              inflation=Inflation(f, "constant"))
    if estimates == "constant":
        return s

    def restated(alt: Alternative) -> Alternative:
        # the same cash flows, written in then-current money: A_j = A'_j (1+f)^j
        S = infl.to_then_current(alt.market_value_array(), f)
        C = infl.to_then_current(alt.operating_cost_array(), f)
        extras = tuple(dataclasses.replace(x, amount=x.amount * (1 + f) ** x.year)
                       for x in alt.extra_costs)
        return dataclasses.replace(alt, market_values=MarketValues(values=tuple(S)),
                                   operating_costs=OperatingCosts(values=tuple(C)),
                                   extra_costs=extras)

    return dataclasses.replace(s, defender=restated(d), challengers=(restated(c1), restated(c2)),
                               inflation=Inflation(f, "then-current"))


@pytest.mark.parametrize("tax", [None, Tax(0.3, 0.055)])
@pytest.mark.parametrize("period", [None, 9])
def test_constant_and_then_current_statements_agree(tax, period) -> None:
    # common practice, no source: restating the same cash flows in the other money must not change
    # the PW of any retention, the ESLs or the decision
    a = run_study(_study("constant", 0.045, tax, period))
    b = run_study(_study("then-current", 0.045, tax, period))
    for x, y in zip(a.alternatives, b.alternatives, strict=True):
        assert x.economic_life == y.economic_life
        if tax is not None:
            xa, ya = a.after_tax.alternative(x.name), b.after_tax.alternative(y.name)
            assert xa.economic_life == ya.economic_life
            assert xa.present_worth == pytest.approx(ya.present_worth)
            assert xa.annual_worth_constant == pytest.approx(ya.annual_worth_constant)
    ra, rb = a.recommendation, b.recommendation
    assert (ra.action, ra.challenger, ra.defender_years, ra.planned_defender_years) == \
        (rb.action, rb.challenger, rb.defender_years, rb.planned_defender_years)
    assert ra.replacement_value == pytest.approx(rb.replacement_value, abs=1e-4)


def test_then_current_aw_is_reported_at_the_market_rate() -> None:
    # common practice, no source: same PW_k restated as a level annuity at i_f
    f, i = 0.045, 0.08
    a = run_study(_study("constant", f, None))
    b = run_study(_study("then-current", f, None))
    i_f = float(infl.market_rate(i, f))
    for x, y in zip(a.alternatives, b.alternatives, strict=True):
        k = np.arange(1, len(x.annual_worth) + 1)
        pw = x.annual_worth / ap(i, k)
        assert y.annual_worth == pytest.approx(pw * ap(i_f, k))
        # MC_j then-current = MC_j constant (1+f)^j (exact identity)
        assert y.marginal_cost == pytest.approx(x.marginal_cost * (1 + f) ** k)
    assert "then-current money" in infl.describe(b.study)
    assert "constant (today's) money" in infl.describe(a.study)


def test_zero_inflation_changes_nothing() -> None:
    # common practice, no source: f = 0 gives the study without inflation
    tax = Tax(0.25, 0.06)
    with_f = run_study(_study("then-current", 0.0, tax))
    without = run_study(dataclasses.replace(_study("constant", 0.0, tax), inflation=None))
    for x, y in zip(with_f.alternatives, without.alternatives, strict=True):
        assert x.annual_worth == pytest.approx(y.annual_worth)
        assert with_f.after_tax.alternative(x.name).annual_worth == pytest.approx(
            without.after_tax.alternative(y.name).annual_worth)


def test_inflation_after_tax_hand_calculation() -> None:
    # hand calculation: challenger P = 10,000 kept 1 year, constant S'_1 = 6,000, C'_1 = 1,000,
    # SL 2 years (D_1 = 5,000, fixed in then-current money), t = 0.25, real after-tax MARR 10%,
    # f = 10%.  Then-current S_1 = 6,600, C_1 = 1,100; year 1 = -0.75(1,100) + 0.25(5,000)
    # + 6,600 - 0.25(6,600 - 5,000) = 425 + 6,200 = 6,625; i_f = 0.21;
    # PW = -10,000 + 6,625/1.21 = -4,524.79; AW (constant money) = PW(1.10) = -4,977.27.
    # Without inflation: 500 + 5,750 = 6,250, PW = -4,318.18, AW = -4,750.00: inflation erodes
    # the real value of the (unindexed) depreciation.
    c = Alternative("New saw", "challenger", 10000.0, 1, MarketValues(values=(6000.0,)),
                    OperatingCosts(values=(1000.0,)),
                    depreciation=Depreciation("straight_line", years=2))
    d = Alternative("Old saw", "defender", 1000.0, 1, MarketValues(values=(500.0,)),
                    OperatingCosts(values=(100.0,)),
                    depreciation=Depreciation("straight_line", basis=1000.0, years=2))
    s = Study("Saw", 0.12, d, (c,), tax=Tax(0.25, 0.10), inflation=Inflation(0.10, "constant"))
    r = run_study(s)
    assert float(r.after_tax.alternative("New saw").annual_worth[0]) == pytest.approx(
        -4977.27, abs=0.01)
    r0 = run_study(dataclasses.replace(s, inflation=None))
    assert float(r0.after_tax.alternative("New saw").annual_worth[0]) == pytest.approx(
        -4750.00, abs=0.01)
    # the same study stated in then-current money reports AW at i_f: PW(1.21) = -5,475.00
    st = dataclasses.replace(
        s, inflation=Inflation(0.10, "then-current"),
        challengers=(dataclasses.replace(c, market_values=MarketValues(values=(6600.0,)),
                                         operating_costs=OperatingCosts(values=(1100.0,))),),
        defender=dataclasses.replace(d, market_values=MarketValues(values=(550.0,)),
                                     operating_costs=OperatingCosts(values=(110.0,))))
    rt = run_study(st)
    assert float(rt.after_tax.alternative("New saw").annual_worth[0]) == pytest.approx(
        -5475.00, abs=0.01)
