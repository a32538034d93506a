"""The simple rule a planner might use instead of the optimiser, for comparison.

Year by year, the assets that are due (their best year has come, or they were
deferred) are funded in order of value per unit of capital until the year's
budget is spent; the rest wait a year.  The "value" of funding an asset in year
y is what it would lose by waiting: V(y) - max over its later options of V.
Must-replace assets are funded first; an asset with no later option is funded
whatever it costs (and the rule fails when that breaks the budget).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from core.plan.options import AFTER, OptionTable
from core.plan.solve import allowed_mask


def simple_rule(table: OptionTable, budgets: Sequence[float | None] | None, *,
                net: bool = False, per_site_limit: int | None = None,
                pins: Mapping[int, int] | None = None) -> np.ndarray | None:
    """Each asset's slot under the simple rule, or None when the rule cannot keep a budget.

    >>> t = OptionTable(1, np.array([[0.0, -60.0], [0.0, -45.0], [0.0, -45.0]]),
    ...                 np.array([[0, AFTER]] * 3), np.array([[60.0, 0], [50, 0], [50, 0]]),
    ...                 np.array([[60.0, 0], [50, 0], [50, 0]]), np.ones((3, 2), bool),
    ...                 np.full((3, 2), None, object), (None,) * 3, np.zeros(3, bool))
    >>> simple_rule(t, [100.0]).tolist()   # 60/60 = 1.0 first; then 50 does not fit
    [0, 1, 1]
    """
    h = table.horizon
    budgets = list(budgets) if budgets is not None else [None] * h
    allowed = allowed_mask(table, pins)
    best = table.best(allowed)
    cap_all = table.net_capital if net else table.capital
    n = table.size
    choice = np.full(n, -1, dtype=np.int64)
    best_year = table.year[np.arange(n), best]
    choice[best_year == AFTER] = best[best_year == AFTER]
    for y in range(h):
        waiting = np.flatnonzero((choice < 0) & (best_year <= y) & (best_year != AFTER))
        budget = budgets[y]
        room = float(budget) if budget is not None else float(np.inf)
        per_site: dict[str | None, int] = {}
        ranked = []
        for a in waiting.tolist():
            now = np.flatnonzero(allowed[a] & (table.year[a] == y))
            if now.size == 0:
                continue
            k = int(now[np.argmax(table.value[a, now])])
            later = allowed[a] & ((table.year[a] > y) | (table.year[a] == AFTER))
            must = bool(table.forced[a]) or not later.any()
            loss = table.value[a, k] - (table.value[a][later].max() if later.any() else -np.inf)
            cap = float(cap_all[a, k])
            ratio = loss / cap if cap > 0 else np.inf
            ranked.append((not must, -ratio, a, k, cap))
        ranked.sort()
        for not_must, _r, a, k, cap in ranked:
            site = table.site[a]
            crew_ok = per_site_limit is None or per_site.get(site, 0) < per_site_limit
            if (cap <= room + 1e-9 and crew_ok) or not not_must:
                if not not_must and (cap > room + 1e-9 or not crew_ok):
                    return None
                choice[a] = k
                room -= cap
                per_site[site] = per_site.get(site, 0) + 1
    left = np.flatnonzero(choice < 0)
    for a in left.tolist():
        after = np.flatnonzero(allowed[a] & (table.year[a] == AFTER))
        if after.size == 0:
            return None
        choice[a] = int(after[0])
    return choice
