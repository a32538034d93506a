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

from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from core.errors import StudyError
from core.estimates import Study
from core.factors import ap
from core.technology import induction, settings, vintages

Action = Literal["keep", "replace"]


def _r(x: float, digits: int = 2) -> float:
    return round(float(x), digits)


@dataclass(frozen=True)
class PlanStep:
    """One plan year: ``action`` at its start; the machine then in service and its age at its end.

    ``challenger`` and ``vintage`` are None while the defender stays in service.
    """

    year: int
    action: Action
    challenger: str | None
    vintage: int | None
    age_after: int

    def to_json(self) -> dict[str, Any]:
        return {"year": self.year, "action": self.action, "challenger": self.challenger,
                "vintage": self.vintage, "age_after": self.age_after}


@dataclass(frozen=True)
class PlanSegment:
    """One machine's time in service within the plan: plan years ``start`` to ``end`` (exclusive)."""

    name: str
    role: Literal["defender", "challenger"]
    vintage: int | None
    start: int
    end: int


@dataclass(frozen=True)
class TechnologyPlan:
    """The optimal plan over the horizon and the comparisons the report needs.

    Money in the study's currency at time 0 (constant money); ``annual_worth``
    is ``present_worth`` (A/P,``rate``,H).  ``change_rates``: (name, gP, gC)
    per challenger.
    """

    horizon: int
    basis: Literal["before-tax", "after-tax"]
    rate: float
    defender: str
    present_worth: float
    annual_worth: float
    policy: tuple[PlanStep, ...]
    best_replace_now_present_worth: float
    best_wait_present_worth: float
    no_change_present_worth: float
    change_rates: tuple[tuple[str, float, float], ...]

    @property
    def first_action(self) -> Action:
        return self.policy[0].action

    @property
    def value_of_change(self) -> float:
        """Best PW with the change rates minus best PW if every future model were today's."""
        return self.present_worth - self.no_change_present_worth

    @property
    def waiting_gain(self) -> float:
        """Best plan that waits minus best plan that replaces now (positive: waiting pays)."""
        return self.best_wait_present_worth - self.best_replace_now_present_worth

    def segments(self) -> tuple[PlanSegment, ...]:
        """The machines of the plan in order, each with its years in service."""
        out: list[PlanSegment] = []
        start, name, role, vintage = 0, self.defender, "defender", None
        for step in self.policy:
            if step.action == "replace":
                if step.year > start:
                    out.append(PlanSegment(name, role, vintage, start, step.year))
                start, name, role, vintage = step.year, step.challenger, "challenger", step.vintage
        out.append(PlanSegment(name, role, vintage, start, self.horizon))  # type: ignore[arg-type]
        return tuple(out)

    def to_json(self) -> dict[str, Any]:
        """The ``technology_plan`` object of ``tenure study --json`` (docs/method.md §6, §11)."""
        return {"horizon": self.horizon, "present_worth": _r(self.present_worth),
                "annual_worth": _r(self.annual_worth), "first_action": self.first_action,
                "policy": [s.to_json() for s in self.policy],
                "best_replace_now_present_worth": _r(self.best_replace_now_present_worth),
                "best_wait_present_worth": _r(self.best_wait_present_worth),
                "no_change_present_worth": _r(self.no_change_present_worth)}

    def format_text(self) -> str:
        """The short section of the readable output."""
        from core.report import table
        from core.study import money, years

        tag = " (after tax)" if self.basis == "after-tax" else ""
        rates = "; ".join(f"{n}: first cost {gp:+.1%}, operating cost {gc:+.1%} a year"
                          for n, gp, gc in self.change_rates)
        rows = [[str(s.year), s.action, s.challenger or self.defender,
                 "-" if s.vintage is None else str(s.vintage), str(s.age_after)]
                for s in self.policy]
        first = ("REPLACE NOW" if self.first_action == "replace" else "KEEP (wait)")
        return "\n".join([
            f"Technology plan over {years(self.horizon)}{tag}: each year's model changes "
            f"({rates}).",
            table(["plan year", "action", "machine in service", "vintage", "age at year end"],
                  rows),
            f"First action: {first}. Best plan PW {money(self.present_worth)}, AW over the "
            f"horizon {money(self.annual_worth)}.",
            f"Best plan that replaces now: PW {money(self.best_replace_now_present_worth)}; "
            f"best plan that waits: PW {money(self.best_wait_present_worth)}.",
            f"Value of waiting for better models: {money(self.value_of_change)} in PW against "
            f"the best plan if every future model were today's (PW "
            f"{money(self.no_change_present_worth)})."])


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
