"""The best plan under a budget: a mixed-integer program solved by HiGHS (scipy.optimize.milp).

Choose exactly one allowed option x_(a,k) in {0, 1} per asset to

    maximise   sum_(a,k) V_(a,k) x_(a,k)
    subject to sum_k x_(a,k) = 1                                   for every asset a
               sum_(a,k: year = y) K_(a,k) x_(a,k) <= B_y           for every budgeted year y
               sum_(a at site s, k: year = y) x_(a,k) <= N          (optional per-site limit)

with K the gross capital (or the net capital with ``net``).  Must-replace assets
may only take a plan-year-0 option, a pinned asset only options of its pinned
year.  Reference: the multiple-choice knapsack problem; scipy.optimize.milp
documentation (HiGHS branch and cut).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from core.errors import StudyError
from core.plan.options import AFTER, OptionTable

TIME_LIMIT = 60.0
REL_GAP = 1e-6  #: HiGHS stops when (bound - best) / |best| falls below this; reported


def dominated(table: OptionTable, allowed: np.ndarray, net: bool) -> np.ndarray:
    """Options no optimal plan needs: inside the horizon, using capital >= 0, and worth no
    more than the same asset's allowed after-the-horizon option (which uses none)."""
    after = np.where(allowed & (table.year == AFTER), table.value, -np.inf).max(axis=1)
    cap = table.net_capital if net else table.capital
    return (table.year >= 0) & (cap >= 0) & (table.value <= after[:, None])


@dataclass(frozen=True)
class Solution:
    """The chosen slot of every asset, the objective, the solver status and its gap."""

    choice: np.ndarray
    objective: float
    status: str
    gap: float


def allowed_mask(table: OptionTable, pins: Mapping[int, int] | None = None) -> np.ndarray:
    """Options each asset may take: valid, plan year 0 when forced, the pinned year when pinned."""
    ok = table.valid & ~(table.forced[:, None] & (table.year != 0))
    for a, y in (pins or {}).items():
        ok[a] &= table.year[a] == y
    return ok


def _label(y: int, first_year: int | None) -> str:
    return f"plan year {y}" + (f" ({first_year + y})" if first_year is not None else "")


def _money(x: float) -> str:
    return f"{x:,.0f}"


def check_feasible(table: OptionTable, allowed: np.ndarray, budgets: Sequence[float | None],
                   net: bool, first_year: int | None) -> None:
    """Refuse, with a clear message, a plan whose fixed assets alone break a budget."""
    for a in np.flatnonzero(~allowed.any(axis=1)).tolist():
        why = "must be replaced now" if table.forced[a] else "is pinned to a year"
        raise StudyError(f"asset '{table.title[a] if table.title else a}'",
                         f"{why} but has no option in that year")
    cap = table.net_capital if net else table.capital
    years = np.where(allowed, table.year, -2)
    fixed = (years == years.max(axis=1, keepdims=True)) & allowed
    one_year = fixed.sum(axis=1) == allowed.sum(axis=1)
    need = np.zeros(table.horizon)
    for a in np.flatnonzero(one_year).tolist():
        y = int(years[a][allowed[a]][0])
        if y >= 0:
            need[y] += float(np.min(cap[a][allowed[a]]))
    for y, b in enumerate(budgets):
        if b is not None and need[y] > b + 0.005:
            who = "must-replace" if y == 0 and table.forced.any() else "fixed (must-replace or pinned)"
            raise StudyError("--budget", f"{_label(y, first_year)}: the {who} assets need "
                             f"{_money(need[y])} of {'net ' if net else ''}capital; the budget "
                             f"is {_money(b)}")


def _explain_infeasible(table: OptionTable, allowed: np.ndarray,
                        budgets: Sequence[float | None], net: bool,
                        first_year: int | None) -> StudyError:
    """Why no plan fits: the first year by which assets that cannot wait need more than
    the budgets up to that year allow (each asset at its cheapest allowed option)."""
    cap = table.net_capital if net else table.capital
    limit = np.array([np.inf if b is None else b for b in budgets] + [np.inf])
    fits = allowed & (cap <= limit[table.year] + 0.005)   # year AFTER (-1) reads the inf
    for a in np.flatnonzero(~fits.any(axis=1)).tolist():
        k = np.flatnonzero(allowed[a])
        years = sorted({int(y) for y in table.year[a, k] if y >= 0})
        span = (_label(years[0], first_year) if len(years) == 1 else
                f"{_label(years[0], first_year)} to {_label(years[-1], first_year)}")
        name = table.title[a] if table.title else str(a)
        return StudyError("--budget", f"no plan fits: '{name}' must be replaced in {span} and "
                          f"needs at least {_money(float(cap[a, k].min()))} of capital; no "
                          f"year's budget in that span is that large")
    last = np.where(allowed, table.year, -2).max(axis=1)
    cheapest = np.where(allowed, cap, np.inf).min(axis=1)
    for y in range(table.horizon):
        due = (last >= 0) & (last <= y)
        need = float(cheapest[due].sum())
        room = sum(b for b in budgets[:y + 1] if b is not None)
        if all(b is not None for b in budgets[:y + 1]) and need > room + 0.005:
            return StudyError("--budget", f"no plan fits: by {_label(y, first_year)}, "
                              f"{int(due.sum())} assets reach the end of their life and need "
                              f"at least {_money(need)} of capital; the budgets to then total "
                              f"{_money(room)}")
    return StudyError("--budget", "no plan fits the budgets (and the per-site limit): "
                      "raise a year's budget or the limit")


def solve(table: OptionTable, budgets: Sequence[float | None] | None = None, *,
          net: bool = False, per_site_limit: int | None = None,
          pins: Mapping[int, int] | None = None, first_year: int | None = None,
          time_limit: float = TIME_LIMIT) -> Solution:
    """The plan with the largest total value that keeps every budget (see the module text).

    ``budgets`` has one amount per plan year (None = no budget that year) or is None;
    ``pins`` maps an asset row to a plan year (``AFTER`` = after the horizon).
    Raises StudyError when no plan fits.

    >>> import numpy as np
    >>> t = OptionTable(1, np.array([[0.0, -5.0], [0.0, -9.0]]), np.array([[0, AFTER]] * 2),
    ...                 np.array([[10.0, 0.0]] * 2), np.array([[10.0, 0.0]] * 2),
    ...                 np.ones((2, 2), bool), np.full((2, 2), None, object), (None, None),
    ...                 np.zeros(2, bool))
    >>> s = solve(t, [10.0])      # room for one: replace the asset that loses more by waiting
    >>> s.choice.tolist(), s.objective
    ([1, 0], -5.0)
    """
    from scipy.optimize import LinearConstraint, milp
    from scipy.sparse import csr_array

    h = table.horizon
    budgets = list(budgets) if budgets is not None else [None] * h
    if len(budgets) != h:
        raise StudyError("--budgets", f"{len(budgets)} amounts for a {h}-year horizon")
    allowed = allowed_mask(table, pins)
    check_feasible(table, allowed, budgets, net, first_year)
    best = table.best(allowed)
    rows, cols = np.nonzero(allowed & ~dominated(table, allowed, net))
    constrained = any(b is not None for b in budgets) or per_site_limit is not None
    if not constrained or rows.size == 0:
        value = float(table.value[np.arange(table.size), best].sum())
        return Solution(best, value, "optimal", 0.0)
    m = rows.size
    value = table.value[rows, cols]
    year = table.year[rows, cols]
    cap = (table.net_capital if net else table.capital)[rows, cols]
    blocks = [LinearConstraint(csr_array((np.ones(m), (rows, np.arange(m))),
                                         shape=(table.size, m)), 1.0, 1.0)]
    budget_years = [y for y, b in enumerate(budgets) if b is not None]
    if budget_years:
        inside = np.isin(year, budget_years)
        where = {y: r for r, y in enumerate(budget_years)}
        r_idx = np.array([where[int(y)] for y in year[inside]], dtype=np.int64)
        mat = csr_array((cap[inside], (r_idx, np.flatnonzero(inside))),
                        shape=(len(budget_years), m))
        blocks.append(LinearConstraint(mat, -np.inf, np.array([budgets[y] for y in budget_years],
                                                              dtype=float)))
    if per_site_limit is not None:
        sites = sorted({s or "" for s in table.site})
        code = {s: n for n, s in enumerate(sites)}
        site_of = np.array([code[s or ""] for s in table.site])[rows]
        inside = year >= 0
        r_idx = site_of[inside] * h + year[inside]
        mat = csr_array((np.ones(int(inside.sum())), (r_idx, np.flatnonzero(inside))),
                        shape=(len(sites) * h, m))
        blocks.append(LinearConstraint(mat, -np.inf, float(per_site_limit)))
    res = milp(-value, constraints=blocks, integrality=np.ones(m),
               bounds=(0.0, 1.0), options={"time_limit": time_limit, "mip_rel_gap": REL_GAP,
                                           "presolve": True})
    if res.x is None:
        if res.status == 2:
            raise _explain_infeasible(table, allowed, budgets, net, first_year)
        raise StudyError("plan", f"the solver found no plan ({res.message})")
    x = res.x > 0.5
    choice = best.copy()
    choice[rows[x]] = cols[x]
    objective = float(table.value[np.arange(table.size), choice].sum())
    gap = float(getattr(res, "mip_gap", 0.0) or 0.0)
    status = "optimal" if res.status == 0 else f"stopped at the time limit (gap {gap:.4%})"
    return Solution(choice, objective, status, gap if res.status != 0 else 0.0)


__all__ = ["AFTER", "Solution", "allowed_mask", "check_feasible", "solve"]
