"""Backward induction over the states (plan year y, machine m, vintage t, age a).

At the start of plan year y (y = 0..H-1) the machine in service is the
defender at age a = y (vintage none), or challenger c of vintage t = y - a at
age a >= 1.  Either keep it (only while a + 1 <= its max life) or sell it and
buy challenger c' of vintage y.  At H the machine in service is sold.  With
G the present worths of ``core.technology.vintages`` (at time 0, sale
included), the reward of a step is what it adds to the plan's present worth:

    keep:     G_{m,t,a+1} - G_{m,t,a}        (one more year, sale one year later)
    replace:  G_{c',y,1}                     (the old machine's sale is already in G)

so the rewards of a whole plan add up to sum over its machines of G_{m,t,k}:
its present worth.  Bellman's recursion, V_H = 0,

    V_y(m,t,a) = max( keep + V_{y+1}(m,t,a+1),  max_c' [G_{c',y,1} + V_{y+1}(c',y,1)] )

is solved for every age (hence every vintage) of a machine at once with numpy.
Reference: R. Bellman (1955), "Equipment replacement policy", J. SIAM 3(3), 133-136.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from core.factors import FloatArray


@dataclass(frozen=True)
class Induction:
    """The solved programme.

    ``defender_value`` V_y(D, y) (H+1,), -inf where the defender cannot be in
    service; ``challenger_values[c]`` V_y(c, y-a, a) (H+1, n_c+1) by year and age;
    ``buy_value`` max_c' [G_{c',y,1} + V_{y+1}(c',y,1)] (H,) and ``buy_choice`` its c';
    ``keep_defender`` (H,) and ``keep_challenger[c]`` (H, n_c+1): True where keeping
    is at least as good as replacing (ties keep); ``keep_defender_value`` the value
    of keeping the defender in year y (-inf where it cannot be kept).
    """

    defender_value: FloatArray
    challenger_values: tuple[FloatArray, ...]
    buy_value: FloatArray
    buy_choice: np.ndarray
    keep_defender: np.ndarray
    keep_challenger: tuple[np.ndarray, ...]
    keep_defender_value: FloatArray

    @property
    def present_worth(self) -> float:
        """V_0(D, 0): the best plan's present worth."""
        return float(self.defender_value[0])

    @property
    def wait_value(self) -> float:
        """The best plan that keeps the defender in year 0 (-inf if it cannot be kept)."""
        return float(self.keep_defender_value[0])


def solve(defender: FloatArray, challengers: Sequence[FloatArray], horizon: int) -> Induction:
    """Solve the programme for the defender's G_k (n_D+1,) and each challenger's G_{t,k} (H, n_c+1).

    >>> d = np.array([0.0, -500.0, -1000.0])              # keep 1 year: -500; 2 years: -1000
    >>> c = np.array([[np.nan, -600.0], [np.nan, -300.0]])  # vintage 0 or 1, life 1
    >>> r = solve(d, [c], 2)
    >>> r.present_worth, r.wait_value, float(r.buy_value[0])   # keep, then the cheaper model
    (-800.0, -800.0, -900.0)
    """
    n_d = len(defender) - 1
    big = [np.full((horizon + 1, g.shape[1] + 1), -np.inf) for g in challengers]
    for v in big:
        v[horizon, 1:-1] = 0.0                       # V_H = 0: sold at H (sale is in G)
    v_d = np.full(horizon + 1, -np.inf)
    if n_d >= horizon:
        v_d[horizon] = 0.0
    keep_d_value = np.full(horizon + 1, -np.inf)
    buy_value = np.full(horizon, -np.inf)
    buy_choice = np.zeros(horizon, dtype=int)
    keep_d = np.zeros(horizon, dtype=bool)
    keep_c = [np.zeros((horizon, g.shape[1]), dtype=bool) for g in challengers]
    for y in range(horizon - 1, -1, -1):
        buys = np.array([g[y, 1] + big[c][y + 1, 1] for c, g in enumerate(challengers)])
        choice = int(np.argmax(buys))
        buy_choice[y], buy_value[y] = choice, buys[choice]
        for c, g in enumerate(challengers):
            n_c = g.shape[1] - 1
            ages = np.arange(1, min(n_c, y) + 1)      # vintages y - a >= 0
            if ages.size == 0:
                continue
            vint = y - ages
            nxt = np.minimum(ages + 1, n_c)
            keep = np.where(ages + 1 <= n_c,
                            g[vint, nxt] - g[vint, ages] + big[c][y + 1, ages + 1], -np.inf)
            keep_c[c][y, ages] = keep >= buy_value[y]
            big[c][y, ages] = np.maximum(keep, buy_value[y])
        if y <= n_d:
            keep_def = (float(defender[y + 1] - defender[y] + v_d[y + 1]) if y + 1 <= n_d
                        else -np.inf)
            keep_d_value[y] = keep_def
            keep_d[y] = keep_def >= buy_value[y]
            v_d[y] = max(keep_def, buy_value[y])
    return Induction(defender_value=v_d, challenger_values=tuple(v[:, :-1] for v in big),
                     buy_value=buy_value, buy_choice=buy_choice, keep_defender=keep_d,
                     keep_challenger=tuple(keep_c), keep_defender_value=keep_d_value)
