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

Every solve is HiGHS's: first the LP relaxation (an upper bound on any plan), then
the MIP with the assets the LP already assigns whole held there (a plan with a known
distance from that bound), and, unless that plan is within ``REL_GAP`` of the bound,
the whole MIP in the time left.  The better plan is kept; its status is "optimal"
when proven within ``REL_GAP``, else the time limit and the gap are reported.
"""

from __future__ import annotations

import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from core.errors import StudyError
from core.plan.options import AFTER, OptionTable

TIME_LIMIT = 10.0
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
                          f"needs at least {_money(float(cap[a, k].min()))} of "
                          f"{'net ' if net else ''}capital; no "
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
                              f"at least {_money(need)} of {'net ' if net else ''}capital; the "
                              f"budgets to then total "
                              f"{_money(room)}")
    return StudyError("--budget", "no plan fits the budgets (and the per-site limit): "
                      "raise a year's budget or the limit")


def solve(table: OptionTable, budgets: Sequence[float | None] | None = None, *,
          net: bool = False, per_site_limit: int | None = None,
          pins: Mapping[int, int] | None = None, first_year: int | None = None,
          time_limit: float = TIME_LIMIT, extra_plan: np.ndarray | None = None) -> Solution:
    """The plan with the largest total value that keeps every budget (see the module text).

    ``budgets`` has one amount per plan year (None = no budget that year) or is None;
    ``pins`` maps an asset row to a plan year (``AFTER`` = after the horizon);
    ``extra_plan`` (each asset's slot, e.g. the simple rule's plan) is kept if no better
    plan is found in the time.  Raises StudyError when no plan fits.

    >>> import numpy as np
    >>> t = OptionTable(1, np.array([[0.0, -5.0], [0.0, -9.0]]), np.array([[0, AFTER]] * 2),
    ...                 np.array([[10.0, 0.0]] * 2), np.array([[10.0, 0.0]] * 2),
    ...                 np.ones((2, 2), bool), np.full((2, 2), None, object), (None, None),
    ...                 np.zeros(2, bool))
    >>> s = solve(t, [10.0])      # room for one: replace the asset that loses more by waiting
    >>> s.choice.tolist(), s.objective
    ([1, 0], -5.0)
    """
    from scipy.optimize import Bounds, LinearConstraint, linprog, milp
    from scipy.sparse import csr_array, vstack

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
        return Solution(best, float(table.value[np.arange(table.size), best].sum()), "optimal",
                        0.0)
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
        # each budget row in units of its budget (HiGHS proves optimality faster on rows
        # scaled near 1; the feasible set is the same)
        limit = np.array([budgets[y] for y in budget_years], dtype=float)
        unit = np.where(limit > 0, limit, 1.0)
        mat = csr_array((cap[inside] / unit[r_idx], (r_idx, np.flatnonzero(inside))),
                        shape=(len(budget_years), m))
        blocks.append(LinearConstraint(mat, -np.inf, limit / unit))
    if per_site_limit is not None:
        sites = sorted({s or "" for s in table.site})
        code = {s: n for n, s in enumerate(sites)}
        site_of = np.array([code[s or ""] for s in table.site])[rows]
        inside = year >= 0
        r_idx = site_of[inside] * h + year[inside]
        mat = csr_array((np.ones(int(inside.sum())), (r_idx, np.flatnonzero(inside))),
                        shape=(len(sites) * h, m))
        blocks.append(LinearConstraint(mat, -np.inf, float(per_site_limit)))
    scale = float(np.max(np.abs(value))) or 1.0
    c = -value / scale
    ub_rows = vstack([b.A for b in blocks[1:]]).tocsr() if len(blocks) > 1 else None
    ub_rhs = np.concatenate([np.broadcast_to(b.ub, (b.A.shape[0],)) for b in blocks[1:]]) \
        if len(blocks) > 1 else None
    started = time.monotonic()

    def run(integral: bool, lower: np.ndarray | float = 0.0, seconds: float = time_limit
            ) -> Any:
        return milp(c, constraints=blocks, integrality=np.ones(m) if integral else None,
                    bounds=Bounds(lower, 1.0),
                    options={"time_limit": max(seconds, 0.5), "mip_rel_gap": REL_GAP,
                             "presolve": True})

    # 1. The LP relaxation: an upper bound on every plan, and prices (duals) on each
    #    year's budget.  2. The assets whose choice those prices settle clearly held at
    #    their LP choice, the rest (the "core", where the choice is close) solved as a MIP:
    #    a plan whose distance from the bound is known.  3. Unless that is within REL_GAP,
    #    the whole MIP in the time left.  The best plan found is kept (with the gap).
    lp = linprog(c, A_ub=ub_rows, b_ub=ub_rhs, A_eq=blocks[0].A, b_eq=np.ones(table.size),
                 bounds=(0.0, 1.0), method="highs") if ub_rows is not None else None
    candidates: list[tuple[float, np.ndarray]] = []
    bound = np.inf
    if lp is not None and lp.status == 0 and ub_rows is not None:
        bound = -float(lp.fun) * scale
        reduced = c - ub_rows.T @ lp.ineqlin.marginals - blocks[0].A.T @ lp.eqlin.marginals
        core = _core(rows, reduced, lp.x, table.size, max(60, 40 * h))
        hold = (lp.x > 0.5) & ~core[rows]
        first = run(True, np.where(hold, 1.0, 0.0), time_limit / 2)
        if first.x is not None:
            candidates.append((-float(first.fun) * scale, first.x > 0.5))
    elif lp is not None and lp.status == 2:
        raise _explain_infeasible(table, allowed, budgets, net, first_year)
    if extra_plan is not None:
        x_extra = cols == np.asarray(extra_plan)[rows]
        if np.array_equal(np.bincount(rows[x_extra], minlength=table.size),
                          np.ones(table.size, dtype=np.int64)):
            candidates.append((float(value[x_extra].sum()), x_extra))
    proven = False
    if not candidates or _gap(bound, max(v for v, _ in candidates)) > REL_GAP:
        left = time_limit - (time.monotonic() - started)
        full = run(True, 0.0, left)
        if full.x is not None:
            candidates.append((-float(full.fun) * scale, full.x > 0.5))
            if full.status == 0:
                proven = True
            dual = getattr(full, "mip_dual_bound", None)
            if dual is not None and np.isfinite(dual):
                bound = min(bound, -float(dual) * scale)
        elif full.status == 2:
            raise _explain_infeasible(table, allowed, budgets, net, first_year)
    if not candidates:
        raise StudyError("plan", "the solver found no plan in the time allowed; give more "
                                 "time with --time-limit")
    found, x = max(candidates, key=lambda item: item[0])
    choice = best.copy()
    choice[rows[x]] = cols[x]
    objective = float(table.value[np.arange(table.size), choice].sum())
    gap = 0.0 if proven else _gap(bound, found)
    if gap <= REL_GAP:
        return Solution(choice, objective, "optimal", 0.0)
    return Solution(choice, objective, f"stopped at the time limit (gap {gap:.4%})", gap)


def _core(rows: np.ndarray, reduced: np.ndarray, x: np.ndarray, assets: int, size: int
          ) -> np.ndarray:
    """The assets whose LP choice is least settled: split ones, and those whose next-best
    option costs least in reduced terms (reduced costs of a minimisation, >= 0 off the LP
    choice)."""
    chosen = x > 0.5
    margin = np.full(assets, np.inf)
    off = ~chosen
    np.minimum.at(margin, rows[off], reduced[off])
    split = np.zeros(assets, dtype=bool)
    split[rows[(x > 1e-9) & (x < 1 - 1e-9)]] = True
    order = np.argsort(margin, kind="stable")[:size]
    core = split.copy()
    core[order] = True
    return core


def _gap(bound: float, found: float) -> float:
    """Relative distance of a plan's worth from the bound, as HiGHS measures it."""
    return max(0.0, bound - found) / max(abs(found), 1e-9)


__all__ = ["AFTER", "Solution", "allowed_mask", "check_feasible", "solve"]
