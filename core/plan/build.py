"""Make a capital plan from plan inputs: option table, optimum, comparison plans, totals."""

from __future__ import annotations

from collections import Counter
from collections.abc import Mapping, Sequence

import numpy as np

from core.errors import StudyError
from core.plan.inputs import AssetInput
from core.plan.options import AFTER, OptionTable, option_table
from core.plan.result import NO_SITE, CapitalPlan, PlannedAsset, SiteCapital
from core.plan.rule import simple_rule
from core.plan.solve import TIME_LIMIT, Solution, allowed_mask, solve

DEFAULT_HORIZON = 10


def basis_note(assets: Sequence[AssetInput]) -> str:
    """One sentence on the bases and rates the values rest on.

    >>> basis_note([])
    'No assets.'
    """
    if not assets:
        return "No assets."
    count = Counter(a.basis for a in assets)
    parts = [f"{n} {'study' if n == 1 else 'studies'} {b}" for b, n in sorted(count.items())]
    return ("Each asset is valued on its study's decision basis (" + ", ".join(parts) +
            "), at that basis's rate, relative to replacing it now; capital in each study's "
            "money.")


def _year(code: int) -> int | None:
    return None if code == AFTER else int(code)


def _by_year(table: OptionTable, choice: np.ndarray, money: np.ndarray) -> np.ndarray:
    rows = np.arange(table.size)
    years = table.year[rows, choice]
    amounts = money[rows, choice]
    inside = years >= 0
    return np.bincount(years[inside], weights=amounts[inside], minlength=table.horizon)


def make_plan(assets: Sequence[AssetInput], *, horizon: int = DEFAULT_HORIZON,
              budgets: Sequence[float | None] | None = None, net: bool = False,
              per_site_limit: int | None = None, pins: Mapping[int, int] | None = None,
              first_year: int = 0, table: OptionTable | None = None,
              solution: Solution | None = None, time_limit: float = TIME_LIMIT) -> CapitalPlan:
    """The capital plan of ``assets`` (docs/method.md §10); see core.plan.solve for the model.

    ``pins`` maps an asset's position to a plan year (``AFTER`` = after the horizon).
    """
    if not assets:
        raise StudyError("plan", "no asset to plan")
    if per_site_limit is not None and per_site_limit < 1:
        raise StudyError("--per-site-limit", "must be at least 1")
    table = option_table(assets, horizon) if table is None else table
    budgets = list(budgets) if budgets is not None else [None] * table.horizon
    for y, b in enumerate(budgets):
        if b is not None and not (np.isfinite(b) and b >= 0):
            raise StudyError("--budget", f"plan year {y}: the budget must be a number >= 0")
    rule = simple_rule(table, budgets, net=net, per_site_limit=per_site_limit, pins=pins)
    sol = solution or solve(table, budgets, net=net, per_site_limit=per_site_limit, pins=pins,
                            first_year=first_year, time_limit=time_limit, extra_plan=rule)
    allowed = allowed_mask(table, pins)
    best = table.best(allowed)
    rows = np.arange(table.size)
    chosen_value = table.value[rows, sol.choice]
    best_value = table.value[rows, best]
    unconstrained = float(best_value.sum())
    rule_objective = None if rule is None else float(table.value[rows, rule].sum())
    by_year = _by_year(table, sol.choice, table.capital)
    net_by_year = _by_year(table, sol.choice, table.net_capital)
    sites = sorted({a.site or NO_SITE for a in assets})
    site_rows = []
    for site in sites:
        mask = np.array([(a.site or NO_SITE) == site for a in assets])
        sub = np.where(mask[:, None], table.capital, 0.0)
        site_rows.append(SiteCapital(site, tuple(float(v) for v in _by_year(table, sol.choice,
                                                                            sub))))
    pins = pins or {}
    planned = []
    for a, inp in enumerate(assets):
        k, b = int(sol.choice[a]), int(best[a])
        planned.append(PlannedAsset(
            title=inp.title, tag=inp.tag, site=inp.site, challenger=table.challenger[a, k],
            year=_year(int(table.year[a, k])), capital=float(table.capital[a, k]),
            net_capital=float(table.net_capital[a, k]), value=float(chosen_value[a]),
            best_year=_year(int(table.year[a, b])), best_value=float(best_value[a]),
            deferral_cost=max(0.0, float(best_value[a] - chosen_value[a])),
            forced=bool(table.forced[a]), forced_reason=inp.must_reason if inp.must else "",
            pinned=a in pins,
            rule_year=None if rule is None else _year(int(table.year[a, rule[a]])),
            basis=inp.basis))
    return CapitalPlan(
        first_year=first_year, horizon=table.horizon, budgets=tuple(budgets), net=net,
        per_site_limit=per_site_limit, basis_note=basis_note(assets), status=sol.status,
        gap=sol.gap, objective=sol.objective, unconstrained_objective=unconstrained,
        budget_cost=unconstrained - sol.objective, rule_objective=rule_objective,
        rule_gap=None if rule_objective is None else sol.objective - rule_objective,
        capital_by_year=tuple(float(v) for v in by_year),
        net_capital_by_year=tuple(float(v) for v in net_by_year),
        unconstrained_capital_by_year=tuple(float(v) for v in _by_year(table, best,
                                                                      table.capital)),
        capital_by_site=tuple(site_rows), assets=tuple(planned))


def override_cost(assets: Sequence[AssetInput], plan: CapitalPlan) -> float:
    """What the pins of ``plan`` cost: the optimum without them less ``plan``'s objective."""
    free = make_plan(assets, horizon=plan.horizon, budgets=plan.budgets, net=plan.net,
                     per_site_limit=plan.per_site_limit, first_year=plan.first_year)
    return free.objective - plan.objective
