"""Annual worth of keeping one asset k = 1..n years, and its economic service life.

Sign convention (docs/method.md §1): outflows negative, so AW is normally negative
and the best retention is the one with the largest AW (least equivalent
annual cost, EAC = -AW).  Costs are passed as positive numbers.

For a price P (first cost, or the defender's market value today), market
values S_1..S_n and yearly costs C_j + X_j at MARR i:

    CR_k = P(A/P,i,k) - S_k(A/F,i,k)                        capital recovery (a cost)
    OP_k = -[sum_{j<=k} (C_j+X_j)(P/F,i,j)](A/P,i,k)         operating part (negative)
    AW_k = -CR_k + OP_k
    MC_j = (S_{j-1} - S_j) + i S_{j-1} + C_j + X_j,  S_0 = P   marginal cost of year j

and AW_k = -[sum_{j<=k} MC_j (P/F,i,j)](A/P,i,k), which the tests hold equal.
Reference: the capital-recovery and marginal-cost forms of equivalent annual
cost, standard in engineering economy.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from core.factors import FloatArray, af, ap, pf


@dataclass(frozen=True)
class AWSchedule:
    """AW by retention year; every array has shape (..., n), index k-1 for k years."""

    annual_worth: FloatArray
    capital_recovery: FloatArray
    operating: FloatArray
    marginal_cost: FloatArray
    present_worth: FloatArray


def annual_worth_schedule(price: ArrayLike, market_values: ArrayLike, costs: ArrayLike,
                          rate: ArrayLike) -> AWSchedule:
    """AW_k, CR_k, operating part, MC_j and PW_k for k = 1..n (equations in the module docstring).

    Broadcasts over leading batch dimensions: ``price`` (...), ``market_values``
    and ``costs`` (..., n), ``rate`` (...).  Money in currency units, rate per
    year as a decimal.

    >>> s = annual_worth_schedule(10000.0, [7000.0, 5000.0], [1000.0, 1500.0], 0.10)
    >>> s.annual_worth.round(2).tolist()
    [-5000.0, -4619.05]
    >>> s.marginal_cost.round(2).tolist()
    [5000.0, 4200.0]
    """
    P = np.asarray(price, dtype=float)
    S = np.asarray(market_values, dtype=float)
    C = np.asarray(costs, dtype=float)
    i = np.asarray(rate, dtype=float)
    n = S.shape[-1]
    if C.shape[-1] != n:
        raise ValueError("market_values and costs must have the same number of years")
    years = np.arange(1, n + 1, dtype=float)
    i_col = i[..., None]
    disc = pf(i_col, years)                       # (P/F,i,j)
    cap = ap(i_col, years)                        # (A/P,i,k)
    sink = af(i_col, years)                       # (A/F,i,k)
    P_col = P[..., None]
    capital_recovery = P_col * cap - S * sink
    pw_costs = np.cumsum(C * disc, axis=-1)
    operating = -pw_costs * cap
    annual_worth = -capital_recovery + operating
    S_prev = np.concatenate([np.broadcast_to(P_col, S.shape[:-1] + (1,)), S[..., :-1]], axis=-1)
    marginal = (S_prev - S) + i_col * S_prev + C
    present_worth = annual_worth / cap
    return AWSchedule(annual_worth=annual_worth, capital_recovery=capital_recovery,
                      operating=operating, marginal_cost=marginal, present_worth=present_worth)


def economic_life(annual_worth: ArrayLike) -> np.ndarray:
    """Economic service life: the k (1-based) with the largest AW; exact ties (to the cent) go
    to the shorter life.  Vectorised over leading dimensions.

    >>> int(economic_life([-5000.0, -4761.9, -4761.904]))
    2
    >>> economic_life([[-3.0, -2.0], [-1.0, -1.001]]).tolist()
    [2, 1]
    """
    aw = np.round(np.asarray(annual_worth, dtype=float), 2)
    return np.argmax(aw, axis=-1) + 1


def present_worth_of_keeping(marginal_cost: ArrayLike, rate: ArrayLike) -> FloatArray:
    """PW of keeping 1..n years from marginal costs: PW_k = -sum_{j<=k} MC_j (P/F,i,j).

    >>> present_worth_of_keeping([5000.0, 4200.0], 0.10).round(2).tolist()
    [-4545.45, -8016.53]
    """
    mc = np.asarray(marginal_cost, dtype=float)
    i = np.asarray(rate, dtype=float)[..., None]
    years = np.arange(1, mc.shape[-1] + 1, dtype=float)
    return -np.cumsum(mc * pf(i, years), axis=-1)
