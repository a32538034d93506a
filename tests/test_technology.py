"""The technology plan (docs/method.md §11): Bellman's programme against exhaustive enumeration.

Sources: "hand calculation" (the two-year case below, written out); a naive reference written
here year by year from the cash flows of the model (every keep/replace sequence enumerated,
factors as (1+i)^-n typed out, not core.factors); IRS Publication 946, Table A-1 for the
5-year MACRS percentages hardcoded below; "common practice, no source" for the identities.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools

import pytest

from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
    Technology,
)
from core.jsonout import study_json
from core.study import run_study
from core.technology import technology_plan

# IRS Publication 946, Table A-1, 5-year property, half-year convention (percent)
MACRS5 = [20.00, 32.00, 19.20, 11.52, 11.52, 5.76]

DEF = Alternative("Old lathe", "defender", 9000.0, 4, MarketValues(values=(7000.0, 5200.0,
                  3900.0, 2500.0)), OperatingCosts(first=6000.0, gradient=1500.0),
                  (ExtraCost(2, 2500.0, "spindle rebuild"),),
                  Depreciation("straight_line", basis=30000.0, years=8, age=5))
CH1 = Alternative("CNC lathe A", "challenger", 40000.0, 5, MarketValues(decline_rate=0.25),
                  OperatingCosts(first=2500.0, gradient=700.0),
                  (ExtraCost(3, 1800.0, "controller update"),),
                  Depreciation("macrs", macrs_class=5))
CH2 = Alternative("CNC lathe B", "challenger", 28000.0, 3, MarketValues(values=(19000.0,
                  13000.0, 8000.0)), OperatingCosts(values=(4200.0, 5000.0, 6100.0)),
                  depreciation=Depreciation("straight_line", years=3, salvage=1000.0))


# ----------------------------------------------------------------------- the naive reference
def _allowances(alt: Alternative, basis: float, n: int) -> tuple[list[float], list[float], float]:
    """Allowances D_1..D_n from the machine's first study year, disposal fractions, BV today."""
    d = alt.depreciation
    assert d is not None
    if d.method == "macrs":            # Publication 946 percentages, half-year on disposal
        full = [basis * p / 100.0 for p in MACRS5] + [0.0] * 100
        tax_years = [d.age + j for j in range(1, n + 1)]
        h = [0.5 if y < 6 else 1.0 for y in tax_years]
    else:                              # straight line, full-year convention
        full = [(basis - d.salvage) / d.years if y <= d.years else 0.0 for y in range(1, 200)]
        h = [1.0] * n
    claimed = sum(full[:d.age])
    return full[d.age:d.age + n], h, basis - claimed


@functools.cache
def _segment_pw(alt: Alternative, vintage: int, start: int, k: int, i: float, gp: float,
                gc: float, tax: float | None, f: float = 0.0) -> float:
    """PW at time 0 of one machine bought (or, the defender, held) at ``start`` and kept k years.

    Before tax: -P at start, -(C_j(1+gC)^v + X_j) at start+j, +S_k(1+gP)^v at start+k.
    After tax: year 0 -P (defender: -(MV - t(MV - BV_0))); year j: -(1-t)c_j + t D_j, in the
    year of sale t h_k D_k instead of t D_k, and S_k - t(S_k - BV_k), BV_k = BV_0 - sum_{j<k} D_j
    - h_k D_k.  Written out here on purpose (not the kernels).  With inflation f (after tax,
    constant-money estimates), every amount of year start+j is in then-current money,
    (1+f)^(start+j) times the estimate, the tax basis (1+f)^start; i is then the market rate.
    """
    if alt.role == "defender" and k == 0:
        return 0.0
    scale_p, scale_c = (1 + gp) ** vintage, (1 + gc) ** vintage
    grow = [(1 + f) ** (start + j) for j in range(alt.max_life + 1)]
    price = alt.price * scale_p * grow[0]
    S = [s * scale_p * grow[j + 1] for j, s in enumerate(alt.market_value_array())]
    C = list(alt.operating_cost_array())
    X = [0.0] * alt.max_life
    for x in alt.extra_costs:
        X[x.year - 1] += x.amount
    c = [(C[j] * scale_c + X[j]) * grow[j + 1] for j in range(alt.max_life)]
    v = [(1 + i) ** -(start + j) for j in range(k + 1)]
    if tax is None:
        pw = -price * v[0] - sum(c[j - 1] * v[j] for j in range(1, k + 1)) + S[k - 1] * v[k]
        return pw
    t = tax
    basis = (alt.depreciation.basis if alt.depreciation.basis is not None else alt.price) \
        * scale_p * grow[0]
    D, h, bv0 = _allowances(alt, basis, alt.max_life)
    initial = price - t * (price - bv0) if alt.role == "defender" else price
    pw = -initial * v[0]
    for j in range(1, k + 1):
        allowed = D[j - 1] * (h[j - 1] if j == k else 1.0)
        pw += (-(1 - t) * c[j - 1] + t * allowed) * v[j]
    bv = bv0 - sum(D[:k - 1]) - h[k - 1] * D[k - 1]
    pw += (S[k - 1] - t * (S[k - 1] - bv)) * v[k]
    return pw


def enumerate_plans(study: Study, change: bool = True) -> dict[tuple[str, ...], float]:
    """PW of every feasible keep/replace sequence over the horizon (keys: 'k' or a name per year)."""
    H = study.technology.horizon
    tax = study.tax.rate if study.tax is not None else None
    i = study.tax.after_tax_marr if study.tax is not None else study.marr
    f = 0.0
    if study.inflation is not None and tax is not None:   # after tax: then-current flows
        f = study.inflation.rate
        i = i + f + i * f                                 # the market rate (Fisher, exact)
    rates = {c.name: ((c.technology or study.technology).first_cost_change,
                      (c.technology or study.technology).operating_cost_change)
             if change else (0.0, 0.0) for c in study.challengers}
    out: dict[tuple[str, ...], float] = {}
    names = [c.name for c in study.challengers]
    for seq in itertools.product(["k", *names], repeat=H):
        machine, vintage, start, age, pw, ok = study.defender, 0, 0, 0, 0.0, True
        for y, act in enumerate(seq):
            if act == "k":
                if age + 1 > machine.max_life:
                    ok = False
                    break
                age += 1
            else:
                gp, gc = rates.get(machine.name, (0.0, 0.0))
                pw += _segment_pw(machine, vintage, start, age, i, gp, gc, tax, f)
                machine, vintage, start, age = study.alternative(act), y, y, 1
        if ok:
            gp, gc = rates.get(machine.name, (0.0, 0.0))
            out[seq] = pw + _segment_pw(machine, vintage, start, age, i, gp, gc, tax, f)
    return out


def _seq(plan) -> tuple[str, ...]:  # noqa: ANN001
    return tuple("k" if s.action == "keep" else s.challenger for s in plan.policy)


def _study(H: int, challengers: tuple[Alternative, ...], gp: float, gc: float,
           taxed: bool) -> Study:
    return Study("Turning cell", 0.09, DEF, challengers,
                 tax=Tax(0.3, 0.06) if taxed else None, technology=Technology(H, gp, gc))


CASES = [  # (horizon, challengers, gP, gC, after tax)
    (10, (CH1,), -0.04, -0.08, False),
    (10, (CH1,), 0.03, -0.10, True),
    (7, (CH1, CH2), -0.06, -0.05, False),
    (10, (CH1, CH2), 0.02, -0.12, False),
    (8, (CH1, CH2), -0.05, -0.07, True),
    (10, (CH2, CH1), 0.0, 0.0, True),
    (1, (CH1, CH2), -0.2, -0.2, False),
    (3, (CH2,), -0.3, 0.1, True),
]


@pytest.mark.parametrize("case", CASES, ids=[f"H{c[0]}-{len(c[1])}ch-{'tax' if c[4] else 'pre'}"
                                             for c in CASES])
def test_programme_equals_exhaustive_enumeration(case) -> None:  # noqa: ANN001
    H, chs, gp, gc, taxed = case
    study = _study(H, chs, gp, gc, taxed)
    plan = technology_plan(study)
    every = enumerate_plans(study)
    best = max(every.values())
    # naive reference: the best of every keep/replace sequence, to a thousandth of a cent
    assert plan.present_worth == pytest.approx(best, abs=1e-5, rel=1e-10)
    # the reported policy is one of those sequences, and its PW is the best
    assert every[_seq(plan)] == pytest.approx(best, abs=1e-5, rel=1e-10)
    now = max(v for s, v in every.items() if s[0] != "k")
    wait = max(v for s, v in every.items() if s[0] == "k")
    assert plan.best_replace_now_present_worth == pytest.approx(now, abs=1e-5, rel=1e-10)
    assert plan.best_wait_present_worth == pytest.approx(wait, abs=1e-5, rel=1e-10)
    flat = max(enumerate_plans(study, change=False).values())
    assert plan.no_change_present_worth == pytest.approx(flat, abs=1e-5, rel=1e-10)
    # AW over the horizon: PW (A/P,i,H), numpy-financial's pmt written out
    i = 0.06 if taxed else 0.09
    assert plan.annual_worth == pytest.approx(best * i / (1 - (1 + i) ** -H), rel=1e-12)
    assert plan.first_action == ("keep" if _seq(plan)[0] == "k" else "replace")


def test_policy_steps_are_consistent() -> None:
    plan = technology_plan(_study(10, (CH1, CH2), 0.02, -0.12, False))
    age, vintage = 0, None
    for step in plan.policy:
        if step.action == "replace":
            assert step.vintage == step.year and step.age_after == 1
            age, vintage = 1, step.year
        else:
            age += 1
            assert step.vintage == vintage and step.age_after == age
    segs = plan.segments()
    assert segs[0].start == 0 and segs[-1].end == 10
    assert all(a.end == b.start for a, b in itertools.pairwise(segs))


def test_hand_worked_two_year_case() -> None:
    # Hand calculation at i = 0 (no discounting), H = 2.
    # Defender: MV today 1,000; S_1 = 600, S_2 = 300; C_1 = 100, C_2 = 200.
    # Challenger: P = 1,000, life 1, S_1 = 500, C_1 = 100; gP = gC = -50 % a year.
    #   vintage 0: P 1,000, S_1 500, C_1 100 -> kept 1 year: -1,000 - 100 + 500 = -600
    #   vintage 1: P   500, S_1 250, C_1  50 -> kept 1 year:   -500 -  50 + 250 = -300
    # Plans (the defender's 1,000 today is an outlay; selling it today is a receipt):
    #   keep, keep:        -1,000 - 100 - 200 + 300          = -1,000
    #   keep, replace:     -1,000 - 100 + 600 (sold at 1) - 300 = -800   <- best
    #   replace, replace:  -1,000 + 1,000 - 600 - 300         = -900
    #   replace, keep:     infeasible (life 1)
    d = Alternative("Old", "defender", 1000.0, 2, MarketValues(values=(600.0, 300.0)),
                    OperatingCosts(values=(100.0, 200.0)))
    c = Alternative("New", "challenger", 1000.0, 1, MarketValues(values=(500.0,)),
                    OperatingCosts(values=(100.0,)))
    plan = technology_plan(Study("hand", 0.0, d, (c,), technology=Technology(2, -0.5, -0.5)))
    assert plan.present_worth == pytest.approx(-800.0, abs=1e-9)
    assert [(s.action, s.challenger, s.vintage, s.age_after) for s in plan.policy] == \
        [("keep", None, None, 1), ("replace", "New", 1, 1)]
    assert plan.best_replace_now_present_worth == pytest.approx(-900.0, abs=1e-9)
    assert plan.best_wait_present_worth == pytest.approx(-800.0, abs=1e-9)
    # zero change: vintage 1 also -600; best is keep, keep at -1,000 vs keep, replace -1,000 +
    # ... = -1,000 - 100 + 600 - 600 = -1,100; replace, replace = -1,200 -> -1,000
    assert plan.no_change_present_worth == pytest.approx(-1000.0, abs=1e-9)
    assert plan.annual_worth == pytest.approx(-400.0, abs=1e-9)      # -800 (A/P,0,2) = -800/2


@pytest.mark.parametrize("taxed", [False, True])
@pytest.mark.parametrize("T", [3, 6])
def test_zero_change_plan_is_at_least_the_best_study_period_option(T: int, taxed: bool) -> None:
    # common practice, no source: the plan's choices include every study-period option
    study = dataclasses.replace(_study(T, (CH1, CH2), 0.0, 0.0, taxed), study_period=T)
    result = run_study(study)
    feasible = [o.annual_worth for o in result.study_period_options if o.feasible]
    assert result.technology.annual_worth >= max(feasible) - 1e-7
    assert result.technology.basis == ("after-tax" if taxed else "before-tax")


def test_replace_now_and_keep_matches_the_study_present_worth() -> None:
    # "replace now with c, then keep c" has the study's PW: AW_k (P/A,i,k) of the challenger
    # (the defender sold today offsets its opportunity cost); one challenger, life 5, H = 5,
    # zero change and a plan forced to that chain by enumeration
    study = _study(5, (CH1,), 0.0, 0.0, False)
    every = enumerate_plans(study)
    result = run_study(dataclasses.replace(study, technology=None))
    aw5 = float(result.alternative("CNC lathe A").annual_worth[4])
    pa = (1 - 1.09 ** -5) / 0.09
    assert every[("CNC lathe A", "k", "k", "k", "k")] == pytest.approx(aw5 * pa, abs=1e-6)


@pytest.mark.parametrize("estimates", ["constant", "then-current"])
def test_zero_tax_after_tax_plan_equals_before_tax_plan_with_inflation(estimates: str) -> None:
    # closed-form identity: with t = 0 and the same real MARR, the after-tax flows are the
    # before-tax flows, built in then-current money and discounted at the market rate
    from core.estimates import Inflation

    base = _study(8, (CH1, CH2), -0.04, -0.06, False)
    base = dataclasses.replace(base, inflation=Inflation(0.04, estimates))
    before = technology_plan(base)
    after = technology_plan(dataclasses.replace(base, tax=Tax(0.0, base.marr)))
    assert after.present_worth == pytest.approx(before.present_worth, rel=1e-10)
    assert after.no_change_present_worth == pytest.approx(before.no_change_present_worth,
                                                          rel=1e-10)
    assert _seq(after) == _seq(before)


def test_adding_the_block_changes_no_other_figure() -> None:
    plain = dataclasses.replace(_study(6, (CH1, CH2), -0.05, -0.05, True), technology=None)
    with_plan = run_study(dataclasses.replace(plain, technology=Technology(6, -0.05, -0.05)))
    a, b = study_json(run_study(plain)), study_json(with_plan)
    plan = b.pop("technology_plan")
    assert a == {k: v for k, v in b.items() if k != "fingerprint"} | {"fingerprint":
                                                                       a["fingerprint"]}
    assert set(plan) == {"horizon", "present_worth", "annual_worth", "first_action", "policy",
                         "best_replace_now_present_worth", "best_wait_present_worth",
                         "no_change_present_worth"}
    assert set(plan["policy"][0]) == {"year", "action", "challenger", "vintage", "age_after"}


def test_growing_costs_favour_replacing_now() -> None:
    # common practice, no source: if each later model costs more, waiting is worth less
    cheaper = technology_plan(_study(8, (CH1,), -0.10, -0.10, False))
    dearer = technology_plan(_study(8, (CH1,), 0.10, 0.10, False))
    assert cheaper.value_of_change > 0 > dearer.value_of_change




def test_memo_has_the_plan_section() -> None:
    # the memo reads the result's to_json(); the figures printed are the plan's, rounded
    import io

    from pypdf import PdfReader

    from core.memo.render import money, render_memo

    result = run_study(_study(8, (CH1, CH2), -0.05, -0.07, True))
    text = " ".join(" ".join((p.extract_text() or "").split())
                    for p in PdfReader(io.BytesIO(render_memo(result))).pages)
    plan = result.technology
    assert "Technology plan: replace now or wait for a better model?" in text
    assert money(plan.present_worth) in text and money(plan.no_change_present_worth) in text
    assert money(plan.value_of_change) in text
    assert ("keep (wait)" if plan.first_action == "keep" else "replace now") in text
    plain = run_study(dataclasses.replace(result.study, technology=None))
    assert "Technology plan" not in " ".join(
        (p.extract_text() or "") for p in PdfReader(io.BytesIO(render_memo(plain))).pages)


def test_demo_asset_carries_a_plan_whose_answer_is_wait() -> None:
    # the demo's diesel forklift: the study says replace now, the plan says wait a year for a
    # cheaper electric model (docs/method.md §11; invented figures)
    from core.demo import demo_studies

    planned = [s for s in demo_studies() if s.technology is not None]
    assert len(planned) == 1
    result = run_study(planned[0])
    assert result.recommendation.action == "replace"
    assert result.technology.first_action == "keep"
    assert result.technology.best_wait_present_worth > result.technology.best_replace_now_present_worth
    assert result.technology.value_of_change > 0


@pytest.mark.parametrize("H", [6, 9])
def test_after_tax_with_inflation_equals_enumeration(H: int) -> None:
    # naive reference: then-current flows written out, depreciation not indexed, discounted at
    # the after-tax market rate; constant-money estimates, inflation 3 % a year
    from core.estimates import Inflation

    study = dataclasses.replace(_study(H, (CH1, CH2), -0.05, -0.07, True),
                                inflation=Inflation(0.03, "constant"))
    plan = technology_plan(study)
    every = enumerate_plans(study)
    assert plan.present_worth == pytest.approx(max(every.values()), abs=1e-5, rel=1e-10)
    assert every[_seq(plan)] == pytest.approx(plan.present_worth, abs=1e-5, rel=1e-10)
    flat = max(enumerate_plans(study, change=False).values())
    assert plan.no_change_present_worth == pytest.approx(flat, abs=1e-5, rel=1e-10)
    # AW over the horizon at the real after-tax MARR (constant money)
    assert plan.annual_worth == pytest.approx(plan.present_worth * 0.06 / (1 - 1.06 ** -H),
                                              rel=1e-12)
