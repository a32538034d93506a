"""The multi-year replacement plan under technological change: its result and how it is made.

``technology_plan(study)`` solves the programme of ``core.technology.induction``
on the flows of ``core.technology.vintages`` twice: with the study's change
rates, and with every rate at zero (the value of waiting is the difference).
PW is at time 0 (the defender's market value today an outlay, as everywhere in
Tenure); AW over the horizon is PW (A/P,i,H) at the decision rate (constant
money).  Signs: outflows negative; the best plan has the largest PW.
Reference: R. Bellman (1955), "Equipment replacement policy", J. SIAM 3(3).
"""

from __future__ import annotations

from typing import Literal

import numpy as np

from core.errors import StudyError
from core.estimates import Study
from core.factors import ap
from core.results import PlanStep, TechnologyPlan
from core.technology import induction, settings, vintages

Action = Literal["keep", "replace"]


def _r(x: float, digits: int = 2) -> float:
    return round(float(x), digits)


def _solve(study: Study, rates: vintages.Rates, horizon: int, change: bool
           ) -> induction.Induction:
    d = vintages.defender_present_worth(study, rates)
    gs = []
    for ch in study.challengers:
        gp, gc = settings.change_rates(study, ch) if change else (0.0, 0.0)
        gs.append(vintages.challenger_present_worth(study, ch, horizon, rates, gp, gc))
    return induction.solve(d, gs, horizon)


def _policy(study: Study, sol: induction.Induction, horizon: int) -> tuple[PlanStep, ...]:
    steps: list[PlanStep] = []
    machine, vintage, age = -1, None, 0                 # -1: the defender
    for y in range(horizon):
        keeps = sol.keep_defender[y] if machine < 0 else sol.keep_challenger[machine][y, age]
        if keeps:
            age += 1
            name = None if machine < 0 else study.challengers[machine].name
            steps.append(PlanStep(y, "keep", name, vintage, age))
        else:
            machine, vintage, age = int(sol.buy_choice[y]), y, 1
            steps.append(PlanStep(y, "replace", study.challengers[machine].name, y, 1))
    return tuple(steps)


def technology_plan(study: Study) -> TechnologyPlan:
    """Solve the plan of a study with a ``technology`` block (docs/method.md §11).

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Technology
    >>> d = Alternative("Old", "defender", 1000.0, 2, MarketValues(values=(600.0, 300.0)),
    ...                 OperatingCosts(values=(100.0, 200.0)))
    >>> c = Alternative("New", "challenger", 1000.0, 1, MarketValues(values=(500.0,)),
    ...                 OperatingCosts(values=(100.0,)))
    >>> p = technology_plan(Study("s", 0.0, d, (c,), technology=Technology(2, -0.5, -0.5)))
    >>> p.first_action, p.present_worth, [s.action for s in p.policy]
    ('keep', -800.0, ['keep', 'replace'])
    """
    horizon = settings.horizon(study)
    rates = vintages.plan_rates(study)
    sol = _solve(study, rates, horizon, change=True)
    if not np.isfinite(sol.present_worth):
        raise StudyError("technology.horizon",
                         f"{years_text(horizon)} cannot be filled by any chain of machines "
                         "within their max lives")
    flat = _solve(study, rates, horizon, change=False)
    pw = sol.present_worth
    return TechnologyPlan(
        horizon=horizon, basis=rates.basis, rate=rates.decision, defender=study.defender.name,
        present_worth=pw, annual_worth=float(pw * ap(rates.decision, horizon)),
        policy=_policy(study, sol, horizon),
        best_replace_now_present_worth=float(sol.buy_value[0]),
        best_wait_present_worth=sol.wait_value,
        no_change_present_worth=flat.present_worth,
        change_rates=tuple((c.name, *settings.change_rates(study, c)) for c in study.challengers))


def years_text(n: int) -> str:
    return f"{n} year" if n == 1 else f"{n} years"
