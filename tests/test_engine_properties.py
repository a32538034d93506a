"""Property-based checks of the replacement study (hypothesis, bounded example counts).

Sources: "common practice, no source" for the invariances themselves (sunk costs are
irrelevant before tax; a change of currency unit changes nothing but the unit; a cost
common to every alternative and year cannot change a choice), with "hand calculation" for
the exact shifts: sum_j u (P/F,i,j) (A/P,i,k) = u, so a uniform cost u lowers every AW by u.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from core.estimates import (
    Alternative,
    Depreciation,
    MarketValues,
    OperatingCosts,
    Study,
)
from core.results import StudyResult
from core.study import run_study

SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
MARGIN = 1.0  # money units: comparisons closer than this are "near ties" and skipped


@st.composite
def alternatives(draw: st.DrawFn, name: str, role: str) -> Alternative:
    life = draw(st.integers(1, 7))
    price = draw(st.integers(2_000, 90_000))
    decline = draw(st.floats(0.05, 0.5))
    s = tuple(round(price * (1 - decline) ** k, 2) for k in range(1, life + 1))
    first = draw(st.integers(500, 20_000))
    step = draw(st.integers(0, 5_000))
    c = tuple(float(first + step * k) for k in range(life))
    return Alternative(name, role, float(price), life, MarketValues(values=s),
                       OperatingCosts(values=c))


@st.composite
def studies(draw: st.DrawFn) -> Study:
    d = draw(alternatives("Existing unit", "defender"))
    count = draw(st.integers(1, 3))
    chs = tuple(draw(alternatives(f"Challenger {k}", "challenger")) for k in range(count))
    marr = draw(st.sampled_from([0.0, 0.03, 0.08, 0.12, -0.02]))
    period = None
    if draw(st.booleans()):
        period = draw(st.integers(1, d.max_life + max(c.max_life for c in chs)))
    return Study("Harrowgate property study", marr, d, chs, study_period=period)


def _gaps_ok(values: list[float]) -> bool:
    ordered = sorted(values, reverse=True)
    return len(ordered) < 2 or ordered[0] - ordered[1] > MARGIN


def clear_cut(result: StudyResult) -> bool:
    """No ESL, ranking or option choice decided by less than MARGIN."""
    for a in result.alternatives:
        if not _gaps_ok([float(v) for v in a.annual_worth]):
            return False
    if not _gaps_ok([a.annual_worth_at_economic_life for a in result.alternatives]):
        return False
    if not _gaps_ok([a.annual_worth_at_economic_life for a in result.challengers]):
        return False
    feasible = [o.annual_worth for o in result.study_period_options if o.feasible]
    return _gaps_ok(feasible)


def decision(result: StudyResult) -> tuple:
    rec = result.recommendation
    return (rec.action, rec.challenger, rec.defender_years, rec.best_challenger,
            tuple(a.economic_life for a in result.alternatives),
            tuple(a.rank for a in result.alternatives),
            tuple((o.defender_years, o.challenger, o.feasible)
                  for o in result.study_period_options))


def scaled(alt: Alternative, factor: float) -> Alternative:
    return dataclasses.replace(
        alt, price=alt.price * factor,
        market_values=MarketValues(values=tuple(v * factor for v in alt.market_values.values)),
        operating_costs=OperatingCosts(values=tuple(v * factor
                                                    for v in alt.operating_costs.values)))


def plus_cost(alt: Alternative, u: float) -> Alternative:
    return dataclasses.replace(alt, operating_costs=OperatingCosts(
        values=tuple(v + u for v in alt.operating_costs.values)))


@SETTINGS
@given(study=studies(), basis=st.floats(0, 1e7), years=st.integers(1, 40),
       age=st.integers(0, 30), method=st.sampled_from(["straight_line", "macrs"]))
def test_sunk_cost_never_changes_a_before_tax_study(study: Study, basis: float, years: int,
                                                    age: int, method: str) -> None:
    # Source: common practice, no source (docs/method.md §2: the defender's past price is sunk).
    # The original price lives only in a depreciation block; without `tax` it must not matter.
    dep = (Depreciation("macrs", basis=basis, age=age, macrs_class=7) if method == "macrs"
           else Depreciation("straight_line", basis=basis, years=years, age=age))
    with_dep = dataclasses.replace(study, defender=dataclasses.replace(study.defender,
                                                                       depreciation=dep))
    a, b = run_study(study), run_study(with_dep)
    assert b.after_tax is None
    assert decision(a) == decision(b)
    assert a.recommendation.reason == b.recommendation.reason
    assert a.recommendation.replacement_value == b.recommendation.replacement_value
    for x, y in zip(a.alternatives, b.alternatives, strict=True):
        assert np.array_equal(x.annual_worth, y.annual_worth)
        assert np.array_equal(x.marginal_cost, y.marginal_cost)
    assert [o.annual_worth for o in a.study_period_options] == \
        [o.annual_worth for o in b.study_period_options]


@SETTINGS
@given(study=studies(), factor=st.sampled_from([0.5, 0.85, 1.37, 12.0, 150.0, 1000.0]))
def test_currency_factor_scales_annual_worth_and_keeps_decision(study: Study,
                                                                factor: float) -> None:
    # Source: common practice, no source (AW is linear in every amount; the rate is unitless).
    base = run_study(study)
    assume(clear_cut(base))
    moved = dataclasses.replace(study, defender=scaled(study.defender, factor),
                                challengers=tuple(scaled(c, factor) for c in study.challengers))
    other = run_study(moved)
    assert decision(other) == decision(base)
    for x, y in zip(base.alternatives, other.alternatives, strict=True):
        assert y.annual_worth == pytest.approx(x.annual_worth * factor, rel=1e-9)
    for x, y in zip(base.study_period_options, other.study_period_options, strict=True):
        if x.feasible:
            assert y.annual_worth == pytest.approx(x.annual_worth * factor, rel=1e-9)
    if base.recommendation.replacement_value is not None:
        assert other.recommendation.replacement_value == pytest.approx(
            base.recommendation.replacement_value * factor, rel=1e-6, abs=1e-3 * factor)


@SETTINGS
@given(study=studies(), u=st.sampled_from([-400.0, 1.0, 250.0, 3000.0, 12345.67]))
def test_uniform_cost_keeps_every_esl_and_shifts_annual_worth(study: Study, u: float) -> None:
    # Source: hand calculation: [sum_{j<=k} u (P/F,i,j)](A/P,i,k) = u, so every AW_k and every
    # option's AW drops by exactly u; every ESL, the ranking and the decision stay.
    base = run_study(study)
    assume(clear_cut(base))
    moved = dataclasses.replace(study, defender=plus_cost(study.defender, u),
                                challengers=tuple(plus_cost(c, u) for c in study.challengers))
    other = run_study(moved)
    assert decision(other) == decision(base)
    for x, y in zip(base.alternatives, other.alternatives, strict=True):
        assert y.annual_worth == pytest.approx(x.annual_worth - u, rel=1e-9, abs=1e-6)
        assert y.economic_life == x.economic_life
    for x, y in zip(base.study_period_options, other.study_period_options, strict=True):
        if x.feasible:
            assert y.annual_worth == pytest.approx(x.annual_worth - u, rel=1e-9, abs=1e-6)
    # The replacement value compares defender and challenger, which both move by u.
    if base.recommendation.replacement_value is not None:
        assert other.recommendation.replacement_value == pytest.approx(
            base.recommendation.replacement_value, rel=1e-6, abs=1e-3)


@SETTINGS
@given(study=studies())
def test_replacement_value_equalises_best_annual_worths(study: Study) -> None:
    # Source: docs/method.md §3 definition; the defender's best AW at its RV, computed with a plain
    # loop (AW_k = -[P - S_k v^k + sum C_j v^j]/annuity_k), equals the best challenger's AW.
    result = run_study(study)
    rv = result.recommendation.replacement_value
    assert rv is not None
    i = result.rate
    d = study.defender
    best = -np.inf
    for k in range(1, d.max_life + 1):
        v = 1.0 / (1.0 + i)
        annuity = sum(v**j for j in range(1, k + 1))
        pw = -rv + d.market_values.values[k - 1] * v**k - sum(
            d.operating_costs.values[j - 1] * v**j for j in range(1, k + 1))
        best = max(best, pw / annuity)
    target = max(c.annual_worth_at_economic_life for c in result.challengers)
    assert best == pytest.approx(target, abs=1e-3)
