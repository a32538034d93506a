"""The AW/ESL engine and the replacement study, checked independently of the engine.

Sources, named on each test: "hand calculation" (arithmetic written out in the
comments, or plain Python loops written from scratch here, never calling the
engine), "numpy-financial" (npv/pmt as an outside implementation of PW and AW),
"closed-form identity" (capital recovery and marginal-cost forms, docs/method.md §2).
"""

from __future__ import annotations

import numpy as np
import numpy_financial as npf
import pytest

from core.annual_worth import annual_worth_schedule
from core.decision import economic_life
from core.estimates import Alternative, ExtraCost, MarketValues, OperatingCosts, Study
from core.jsonout import study_json
from core.study import run_study


# --------------------------------------------------------------------------- plain references
def ref_annual_worth(price: float, s: list[float], c: list[float], i: float) -> list[float]:
    """Hand-written reference: AW_k = PW_k (A/P,i,k), PW_k = -P + S_k v^k - sum C_j v^j."""
    out = []
    for k in range(1, len(s) + 1):
        pw = -price + s[k - 1] / (1.0 + i) ** k
        for j in range(1, k + 1):
            pw -= c[j - 1] / (1.0 + i) ** j
        annuity = 0.0
        for j in range(1, k + 1):
            annuity += 1.0 / (1.0 + i) ** j
        out.append(pw / annuity)
    return out


def ref_esl(aw: list[float]) -> int:
    """Hand-written reference: first k with the largest AW after rounding to the cent."""
    best_k, best = 1, round(aw[0], 2)
    for k in range(2, len(aw) + 1):
        if round(aw[k - 1], 2) > best:
            best_k, best = k, round(aw[k - 1], 2)
    return best_k


def alt(name: str, role: str, price: float, s: list[float], c: list[float],
        extras: tuple[ExtraCost, ...] = ()) -> Alternative:
    return Alternative(name, role, float(price), len(s), MarketValues(values=tuple(s)),
                       OperatingCosts(values=tuple(c)), extras)


# --------------------------------------------------------------------------- one alternative
def test_two_year_example_by_hand() -> None:
    # Source: hand calculation.  P = 10,000, S = 7,000 / 5,000, C = 1,000 / 1,500, i = 10 %.
    # AW_1 = -10,000(1.1) + 7,000 - 1,000 = -5,000.
    # PW_2 = -10,000 - 1,000/1.1 + (5,000 - 1,500)/1.21 = -10,000 - 909.0909 + 2,892.5620
    #      = -8,016.5289; (A/P,10%,2) = 0.121/0.21 = 0.5761905; AW_2 = -4,619.05.
    # MC_1 = (10,000 - 7,000) + 1,000 + 1,000 = 5,000; MC_2 = 2,000 + 700 + 1,500 = 4,200.
    sch = annual_worth_schedule(10000.0, [7000.0, 5000.0], [1000.0, 1500.0], 0.10)
    assert sch.annual_worth[0] == pytest.approx(-5000.0, abs=1e-9)
    assert sch.annual_worth[1] == pytest.approx(-4619.05, abs=0.005)
    assert sch.marginal_cost.tolist() == pytest.approx([5000.0, 4200.0])
    assert int(economic_life(sch.annual_worth)) == 2


@pytest.mark.parametrize("i", [-0.2, 0.0, 0.04, 0.10, 0.35])
def test_schedule_matches_hand_reference_and_identities(i: float) -> None:
    # Source: hand calculation (loops above); closed-form identity CR_k = (P-S_k)(A/P,i,k) + S_k i;
    # closed-form identity AW_k = -[sum_j MC_j (P/F,i,j)](A/P,i,k) with
    # MC_j = (S_{j-1} - S_j) + i S_{j-1} + C_j, S_0 = P  (docs/method.md §2).
    price = 52000.0
    s = [41000.0, 33500.0, 26000.0, 21000.0, 15500.0, 9000.0, -1500.0]
    c = [4100.0, 4900.0, 6300.0, 6900.0, 9800.0, 11000.0, 12500.0]
    sch = annual_worth_schedule(price, s, c, i)
    assert sch.annual_worth == pytest.approx(ref_annual_worth(price, s, c, i), rel=1e-10)
    for k in range(1, len(s) + 1):
        annuity = sum(1.0 / (1.0 + i) ** j for j in range(1, k + 1))
        ap = 1.0 / annuity
        assert sch.capital_recovery[k - 1] == pytest.approx((price - s[k - 1]) * ap + s[k - 1] * i,
                                                           rel=1e-10)
        prev = [price, *s]
        mc = [(prev[j - 1] - prev[j]) + i * prev[j - 1] + c[j - 1] for j in range(1, k + 1)]
        assert sch.marginal_cost[k - 1] == pytest.approx(mc[-1], rel=1e-10)
        aw_mc = -sum(mc[j - 1] / (1.0 + i) ** j for j in range(1, k + 1)) * ap
        assert sch.annual_worth[k - 1] == pytest.approx(aw_mc, rel=1e-10)
        assert sch.annual_worth[k - 1] == pytest.approx(
            -sch.capital_recovery[k - 1] + sch.operating[k - 1], rel=1e-12)


@pytest.mark.parametrize("i", [-0.1, 0.0, 0.07, 0.12])
def test_annual_worth_via_numpy_financial_pmt_of_npv(i: float) -> None:
    # Source: numpy-financial: PW_k = npv(i, [-P, -C_1, ..., -C_k + S_k]); AW_k = -pmt(i, k, PW_k).
    price, s, c = 30000.0, [24000.0, 19000.0, 15000.0, 12000.0], [2000.0, 2600.0, 3900.0, 5200.0]
    sch = annual_worth_schedule(price, s, c, i)
    for k in range(1, 5):
        flows = [-price] + [-c[j] for j in range(k)]
        flows[k] += s[k - 1]
        pw = npf.npv(i, flows)
        assert sch.present_worth[k - 1] == pytest.approx(pw, rel=1e-10)
        assert sch.annual_worth[k - 1] == pytest.approx(-npf.pmt(i, k, pw), rel=1e-10)


def test_schedule_broadcasts_over_a_batch() -> None:
    # Source: hand calculation reference, row by row, for a (2, 3) batch of assets and rates.
    rng = np.random.default_rng(5)
    price = rng.uniform(1e4, 5e4, size=(2, 3))
    s = rng.uniform(0, 1e4, size=(2, 3, 6))
    c = rng.uniform(1e3, 9e3, size=(2, 3, 6))
    rate = np.array([[0.0, 0.05, 0.1], [0.2, -0.05, 0.08]])
    sch = annual_worth_schedule(price, s, c, rate)
    assert sch.annual_worth.shape == (2, 3, 6)
    for a in range(2):
        for b in range(3):
            want = ref_annual_worth(price[a, b], list(s[a, b]), list(c[a, b]), rate[a, b])
            assert sch.annual_worth[a, b] == pytest.approx(want, rel=1e-10)
    assert economic_life(sch.annual_worth).shape == (2, 3)


def test_economic_life_ties_go_to_the_shorter_life() -> None:
    # Source: hand calculation at i = 0: P = 10, S = 4, 0, C = 0, 2:
    # AW_1 = -(10 - 4 + 0)/1 = -6; AW_2 = -(10 - 0 + 2)/2 = -6 -> tie -> ESL 1.
    sch = annual_worth_schedule(10.0, [4.0, 0.0], [0.0, 2.0], 0.0)
    assert sch.annual_worth.tolist() == pytest.approx([-6.0, -6.0])
    assert int(economic_life(sch.annual_worth)) == 1
    # Differences below half a cent are ties; a full cent is not.
    assert int(economic_life([-100.0, -99.999, -99.9995])) == 1
    assert int(economic_life([-100.0, -99.99, -99.98])) == 3


def test_extra_costs_enter_their_year() -> None:
    # Source: hand calculation at i = 0: P = 100, S = 60, 30, C = 10, 10, overhaul 25 in year 2:
    # AW_1 = -(100 - 60 + 10) = -50; AW_2 = -(100 - 30 + 10 + 10 + 25)/2 = -57.5.
    a = Alternative("Lathe", "challenger", 100.0, 2, MarketValues(values=(60.0, 30.0)),
                    OperatingCosts(first=10.0), (ExtraCost(2, 25.0, "overhaul"),))
    d = alt("Old lathe", "defender", 10.0, [5.0], [60.0])
    r = run_study(Study("Millbrook lathe", 0.0, d, (a,)))
    assert r.challengers[0].annual_worth.tolist() == pytest.approx([-50.0, -57.5])
    assert r.challengers[0].marginal_cost.tolist() == pytest.approx([50.0, 65.0])


# --------------------------------------------------------------------------- studies at i = 0
# Hand calculation at i = 0, where AW_k = -(P - S_k + sum_{j<=k} C_j)/k:
#   defender   P = 10, S = 6, 3, 1,   C = 2, 4, 7       AW = -6, -6.5, -7.333    ESL 1 (-6)
#   challenger P = 20, S = 12, 8, 5, 3, C = 1, 1, 2, 2  AW = -9, -7, -6.333, -5.75  ESL 4 (-5.75)
DEFENDER = alt("Old press", "defender", 10.0, [6.0, 3.0, 1.0], [2.0, 4.0, 7.0])
CHALLENGER = alt("New press", "challenger", 20.0, [12.0, 8.0, 5.0, 3.0], [1.0, 1.0, 2.0, 2.0])


def test_replace_now_by_hand() -> None:
    # Source: hand calculation (table above): challenger -5.75 > defender -6 -> replace now.
    r = run_study(Study("Ouseburn Yard press", 0.0, DEFENDER, (CHALLENGER,)))
    assert r.defender.annual_worth.tolist() == pytest.approx([-6.0, -6.5, -22.0 / 3.0])
    assert r.challengers[0].annual_worth.tolist() == pytest.approx([-9.0, -7.0, -19.0 / 3.0, -5.75])
    assert (r.defender.economic_life, r.challengers[0].economic_life) == (1, 4)
    rec = r.recommendation
    assert (rec.action, rec.challenger, rec.basis) == ("replace", "New press", "before-tax")
    # Replacement value: max_k (S_k - sum C_j - k * AW_c) = max(6 - 2 + 5.75, 3 - 6 + 11.5,
    # 1 - 13 + 17.25) = max(9.75, 8.5, 5.25) = 9.75.
    assert rec.replacement_value == pytest.approx(9.75, abs=1e-5)
    # One more year: MC_1 of the defender = 10 - 6 + 2 = 6 > 5.75 -> do not keep.
    assert rec.one_more_year.defender_marginal_cost == pytest.approx(6.0)
    assert rec.one_more_year.keep_next_year is False
    assert [a.name for a in r.ranking] == ["New press", "Old press"]


def test_exact_tie_keeps_the_defender() -> None:
    # Source: hand calculation: challenger C_4 = 3 gives AW_4 = -(20 - 3 + 7)/4 = -6, equal to
    # the defender's -6 -> not better by a cent -> keep.
    ch = alt("New press", "challenger", 20.0, [12.0, 8.0, 5.0, 3.0], [1.0, 1.0, 2.0, 3.0])
    r = run_study(Study("Tie", 0.0, DEFENDER, (ch,)))
    assert r.challengers[0].annual_worth_at_economic_life == pytest.approx(-6.0)
    assert r.recommendation.action == "keep"
    assert r.recommendation.challenger is None


def test_keep_with_one_more_year_check_by_hand() -> None:
    # Source: hand calculation at i = 0: defender P = 10, S = 8, 2, 0, C = 1, 6, 10:
    # AW_1 = -(10 - 8 + 1) = -3, AW_2 = -(10 - 2 + 7)/2 = -7.5, AW_3 = -(10 + 17)/3 = -9.
    # ESL 1 at -3 beats the challenger's -5.75 -> keep; MC_1 = 3 < 5.75 -> keep next year.
    # Keep j years then challenger forever, against replacing now: V_j = PW_D(j) + 5.75 j =
    # 0, 2.75, -3.5, -9.75 -> plan to replace after 1 year.
    d = alt("Old press", "defender", 10.0, [8.0, 2.0, 0.0], [1.0, 6.0, 10.0])
    r = run_study(Study("Keep", 0.0, d, (CHALLENGER,)))
    rec = r.recommendation
    assert r.defender.annual_worth.tolist() == pytest.approx([-3.0, -7.5, -9.0])
    assert rec.action == "keep" and rec.challenger is None
    assert rec.one_more_year.keep_next_year is True
    assert rec.planned_defender_years == 1
    assert rec.best_challenger == "New press"
    # RV: max(8 - 1 + 5.75, 2 - 7 + 11.5, 0 - 17 + 17.25) = max(12.75, 6.5, 0.25) = 12.75.
    assert rec.replacement_value == pytest.approx(12.75, abs=1e-5)
    assert "Keep Old press" in rec.reason and rec.reason.count(".") >= 1


def test_study_period_options_enumerated_by_hand() -> None:
    # Source: hand calculation at i = 0, T = 4, defender AW -3, -7.5, -9 (PW = -3, -15, -27),
    # challenger AW -9, -7, -6.333, -5.75 (PW = -9, -14, -19, -23); AW_option = PW / 4:
    #   j=0: -23/4 = -5.75;  j=1: (-3 - 19)/4 = -5.5;  j=2: (-15 - 14)/4 = -7.25;
    #   j=3: (-27 - 9)/4 = -9;  j=4: infeasible (defender lasts 3).  Best: keep 1 year, then replace.
    d = alt("Old press", "defender", 10.0, [8.0, 2.0, 0.0], [1.0, 6.0, 10.0])
    r = run_study(Study("Period", 0.0, d, (CHALLENGER,), study_period=4))
    opts = [(o.defender_years, o.challenger, o.challenger_years, o.feasible)
            for o in r.study_period_options]
    assert opts == [(0, "New press", 4, True), (1, "New press", 3, True),
                    (2, "New press", 2, True), (3, "New press", 1, True), (4, None, 0, False)]
    values = [o.annual_worth for o in r.study_period_options[:4]]
    assert values == pytest.approx([-5.75, -5.5, -7.25, -9.0])
    infeasible = r.study_period_options[-1]
    assert infeasible.annual_worth is None and "at most 3 years" in infeasible.reason
    rec = r.recommendation
    assert (rec.action, rec.challenger, rec.defender_years) == ("keep", "New press", 1)


def test_study_period_infeasible_challenger_options_by_hand() -> None:
    # Source: hand calculation at i = 0, T = 6: the challenger lasts 4, the defender 3, so
    # j = 0 (6 needed) and j = 1 (5 needed) cannot be filled; j = 2 -> 4, j = 3 -> 3 can:
    #   j=2: (-13 - 23)/6 = -6;  j=3: (-22 - 19)/6 = -6.8333.  Best: keep 2 years.
    r = run_study(Study("Long period", 0.0, DEFENDER, (CHALLENGER,), study_period=6))
    by_j = {o.defender_years: o for o in r.study_period_options}
    assert not by_j[0].feasible and "6 are needed" in by_j[0].reason
    assert not by_j[1].feasible and "5 are needed" in by_j[1].reason
    assert by_j[2].annual_worth == pytest.approx(-6.0)
    assert by_j[3].annual_worth == pytest.approx(-41.0 / 6.0)
    assert r.recommendation.defender_years == 2


def test_study_period_keep_whole_period_by_hand() -> None:
    # Source: hand calculation at i = 0, T = 2, defender P = 10, S = 9, 8, C = 1, 1:
    # keep 2 years: -(10 - 8 + 2)/2 = -2; j=1: (-(10 - 9 + 1) - 9)/2 = -5.5; j=0: -7 -> keep.
    d = alt("Old press", "defender", 10.0, [9.0, 8.0], [1.0, 1.0])
    r = run_study(Study("Short period", 0.0, d, (CHALLENGER,), study_period=2))
    values = {(o.defender_years, o.challenger): o.annual_worth for o in r.study_period_options}
    assert values == pytest.approx({(0, "New press"): -7.0, (1, "New press"): -5.5,
                                    (2, None): -2.0})
    rec = r.recommendation
    assert (rec.action, rec.challenger, rec.defender_years) == ("keep", None, 2)


@pytest.mark.parametrize("i", [0.0, 0.06, 0.15])
def test_study_period_matches_hand_pw_loop(i: float) -> None:
    # Source: hand calculation: PW of each option from raw cash flows with plain loops,
    # AW = PW (A/P,i,T); the challenger is bought at the end of year j.
    d = alt("Old press", "defender", 18000.0, [14000.0, 11000.0, 7000.0, 4000.0],
            [7000.0, 8200.0, 9900.0, 12000.0])
    c = alt("New press", "challenger", 61000.0, [50000.0, 42000.0, 35000.0, 29000.0, 24000.0],
            [2500.0, 2900.0, 3400.0, 4000.0, 4700.0])
    T = 6
    r = run_study(Study("Loop check", i, d, (c,), study_period=T))
    v = 1.0 / (1.0 + i)
    annuity = sum(v**t for t in range(1, T + 1))
    for o in r.study_period_options:
        j = o.defender_years
        if not o.feasible:
            assert (o.challenger is None and j > 4) or T - j > 5
            continue
        flows = [0.0] * (T + 1)
        flows[0] -= d.price
        for t in range(1, j + 1):
            flows[t] -= d.operating_costs.values[t - 1]
        if j:
            flows[j] += d.market_values.values[j - 1]
        else:
            flows[0] += d.price  # defender sold today: its opportunity cost cancels
        flows[j] -= c.price
        for t in range(1, T - j + 1):
            flows[j + t] -= c.operating_costs.values[t - 1]
        flows[T] += c.market_values.values[T - j - 1]
        pw = sum(f * v**t for t, f in enumerate(flows))
        assert o.annual_worth == pytest.approx(pw / annuity, rel=1e-10)


# --------------------------------------------------------------------------- several challengers
def test_several_challengers_ranked_by_hand() -> None:
    # Source: hand calculation at i = 0:
    #   A: P = 12, S = 6, 3, C = 1, 1    AW = -7, -5.5          ESL 2 (-5.5)
    #   B: P = 30, S = 20, 14, 9, C = 1, 1, 1   AW = -11, -9, -8   ESL 3 (-8)
    #   C: P = 8, S = 5, C = 2           AW = -5                 ESL 1 (-5)
    #   defender (table above) ESL 1 (-6), New press ESL 4 (-5.75).
    # Ranking: C (-5), A (-5.5), New press (-5.75), defender (-6), B (-8); replace with C.
    a = alt("A", "challenger", 12.0, [6.0, 3.0], [1.0, 1.0])
    b = alt("B", "challenger", 30.0, [20.0, 14.0, 9.0], [1.0, 1.0, 1.0])
    c = alt("C", "challenger", 8.0, [5.0], [2.0])
    r = run_study(Study("Several", 0.0, DEFENDER, (a, b, CHALLENGER, c)))
    assert [x.name for x in r.ranking] == ["C", "A", "New press", "Old press", "B"]
    assert [x.rank for x in r.alternatives] == [4, 2, 5, 3, 1]
    assert (r.recommendation.action, r.recommendation.challenger) == ("replace", "C")
    # RV against C's -5: max(6 - 2 + 5, 3 - 6 + 10, 1 - 13 + 15) = 9.
    assert r.recommendation.replacement_value == pytest.approx(9.0, abs=1e-5)


def test_equal_challengers_keep_the_first_listed() -> None:
    # Source: common practice, no source (stable order on an exact tie).
    twin = alt("Twin", "challenger", 20.0, [12.0, 8.0, 5.0, 3.0], [1.0, 1.0, 2.0, 2.0])
    r = run_study(Study("Twins", 0.0, DEFENDER, (CHALLENGER, twin)))
    assert r.recommendation.challenger == "New press"


# --------------------------------------------------------------------------- nonzero MARR
def test_nonzero_rate_study_against_hand_loops() -> None:
    # Source: hand calculation with the loops above (i = 10 %), then the decision rule by hand.
    d = alt("Old press", "defender", 20000.0, [14000.0, 9800.0, 6860.0],
            [9000.0, 11500.0, 14000.0])
    c1 = alt("New press", "challenger", 60000.0, [48000.0 * 0.8**k for k in range(8)],
             [3000.0 + 500.0 * k for k in range(8)])
    c2 = alt("Rebuilt press", "challenger", 35000.0, [25000.0, 18000.0, 12000.0, 8000.0, 5000.0],
             [6000.0, 6500.0, 7500.0, 9000.0, 11000.0])
    r = run_study(Study("Rate 10 %", 0.10, d, (c1, c2)))
    ref = {x.name: ref_annual_worth(x.price, list(x.market_values.values),
                                    list(x.operating_costs.values), 0.10) for x in (d, c1, c2)}
    for res in r.alternatives:
        assert res.annual_worth == pytest.approx(ref[res.name], rel=1e-10)
        assert res.economic_life == ref_esl(ref[res.name])
    best = {n: max(v) for n, v in ref.items()}
    top = max(["New press", "Rebuilt press"], key=lambda n: best[n])
    want = "replace" if round(best[top], 2) > round(best["Old press"], 2) else "keep"
    assert r.recommendation.action == want
    assert r.recommendation.best_challenger == top


def test_replacement_value_makes_defender_equal_best_challenger() -> None:
    # Source: hand calculation reference loop: at the RV the defender's best AW (future market
    # values unchanged) equals the best challenger's AW at its ESL; a little above -> replace,
    # a little below -> keep.
    d = alt("Old press", "defender", 20000.0, [14000.0, 9800.0, 6860.0], [9000.0, 11500.0, 14000.0])
    c = alt("New press", "challenger", 60000.0, [48000.0 * 0.8**k for k in range(8)],
            [3000.0 + 500.0 * k for k in range(8)])
    r = run_study(Study("RV", 0.10, d, (c,)))
    rv = r.recommendation.replacement_value
    target = r.challengers[0].annual_worth_at_economic_life
    assert max(ref_annual_worth(rv, list(d.market_values.values), list(d.operating_costs.values),
                                0.10)) == pytest.approx(target, abs=1e-4)
    for price, action in ((rv + 5.0, "replace"), (rv - 5.0, "keep")):
        moved = Alternative(d.name, "defender", price, 3, d.market_values, d.operating_costs)
        assert run_study(Study("RV", 0.10, moved, (c,))).recommendation.action == action


def test_doctest_study_replacement_value_by_hand() -> None:
    # Source: hand calculation for the run_study doctest: defender S_k = 20,000(0.7)^k stays as
    # estimated; RV = max_k [S_k(A/F) - PW_C(k)(A/P) - AW_c]/(A/P,10%,k) computed with loops.
    d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=9000.0, gradient=2500.0))
    c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=3000.0, gradient=500.0))
    r = run_study(Study("Press line", 0.10, d, (c,)))
    s = [20000.0 * 0.7**k for k in range(1, 4)]
    cost = [9000.0 + 2500.0 * k for k in range(3)]
    target = max(ref_annual_worth(60000.0, [60000.0 * 0.8**k for k in range(1, 9)],
                                  [3000.0 + 500.0 * k for k in range(8)], 0.10))
    candidates = []
    for k in range(1, 4):
        annuity = sum(1.1**-j for j in range(1, k + 1))
        rest = (s[k - 1] * 1.1**-k - sum(cost[j - 1] * 1.1**-j for j in range(1, k + 1))) / annuity
        candidates.append((rest - target) * annuity)  # AW_k(P) = -P/annuity + rest = target
    assert r.recommendation.replacement_value == pytest.approx(max(candidates), abs=1e-4)
    assert r.recommendation.action == "replace"


def test_result_json_has_design_keys() -> None:
    # Source: docs/method.md §6 (keys of the --json output).
    r = study_json(run_study(Study("Keys", 0.0, DEFENDER, (CHALLENGER,), study_period=4)))
    assert {"title", "alternatives", "recommendation", "study_period_options"} <= set(r)
    for a in r["alternatives"]:
        assert {"name", "role", "annual_worth", "economic_life",
                "annual_worth_at_economic_life"} <= set(a)
        assert "after_tax" not in a
    assert {"action", "challenger", "defender_years", "replacement_value", "basis"} <= set(
        r["recommendation"])
    for o in r["study_period_options"]:
        assert {"defender_years", "challenger", "challenger_years", "annual_worth",
                "feasible"} <= set(o)
    assert "risk" not in r
