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

from core.factors import FactorTable, FloatArray, factor_table, pf


@dataclass(frozen=True)
class AWSchedule:
    """AW by retention year; every array has shape (..., n), index k-1 for k years."""

    annual_worth: FloatArray
    capital_recovery: FloatArray
    operating: FloatArray
    marginal_cost: FloatArray
    present_worth: FloatArray


def running_sum(values: FloatArray) -> FloatArray:
    """sum_{j<=k} x_j along the last axis, in place (the additions of ``np.cumsum``, in order).

    Over many short rows a column-at-a-time add is about 3x faster than ``np.cumsum``;
    both add left to right, so the sums are the same doubles.

    >>> running_sum(np.array([[1.0, 2.0, 3.0]])).tolist()
    [[1.0, 3.0, 6.0]]
    >>> running_sum(np.ones((2, 3, 2))).tolist()[1]
    [[1.0, 2.0], [1.0, 2.0], [1.0, 2.0]]
    """
    if values.ndim > 2 and values.flags.c_contiguous:  # a block of row batches
        running_sum(values.reshape(-1, values.shape[-1]))
        return values
    if values.ndim == 2 and values.shape[0] > values.shape[1]:
        for j in range(1, values.shape[1]):
            np.add(values[:, j - 1], values[:, j], out=values[:, j])
        return values
    return np.cumsum(values, axis=-1, out=values)


def annual_worth_parts(price: ArrayLike, market_values: ArrayLike, costs: ArrayLike,
                       factors: FactorTable,
                       out: tuple[FloatArray, FloatArray, FloatArray] | None = None
                       ) -> tuple[FloatArray, FloatArray, FloatArray]:
    """(AW_k, CR_k, OP_k) for k = 1..n from a factor table (equations in the module docstring).

    ``price`` (...), ``market_values`` and ``costs`` (..., n), ``factors`` (..., n) or (n,):
    the kernel under ``annual_worth_schedule``, the batch of studies and the risk trials.
    ``out``: three arrays of the full batch shape to write (AW, CR, OP) into, in any memory
    layout (the risk engine passes batch-contiguous ones); the values are the same.

    >>> from core.factors import factor_table
    >>> aw, cr, op = annual_worth_parts(10000.0, [7000.0, 5000.0], [1000.0, 1500.0],
    ...                                 factor_table(0.10, 2))
    >>> aw.round(2).tolist(), cr.round(2).tolist()
    ([-5000.0, -4619.05], [4000.0, 3380.95])
    >>> bufs = tuple(np.empty((2, 1)).T for _ in range(3))
    >>> aw = annual_worth_parts([10000.0], [[7000.0, 5000.0]], [1000.0, 1500.0],
    ...                         factor_table(0.10, 2), out=bufs)[0]
    >>> aw is bufs[0], aw.round(2).tolist()
    (True, [[-5000.0, -4619.05]])
    """
    P_col = np.asarray(price, dtype=float)[..., None]
    S = np.asarray(market_values, dtype=float)
    C = np.asarray(costs, dtype=float)
    cap = factors.capital_recovery
    # Three arrays of the full batch shape, every step in place (a large batch, e.g. risk
    # trials, spends its time allocating otherwise); the same operations in the same order.
    shape = np.broadcast_shapes(P_col.shape, cap.shape, S.shape, C.shape,
                                factors.sinking_fund.shape, factors.discount.shape)
    if out is None:
        annual_worth, capital_recovery, operating = (np.empty(shape) for _ in range(3))
    else:
        annual_worth, capital_recovery, operating = out
        if any(a.shape != shape for a in out):
            raise ValueError(f"out arrays must have the batch shape {shape}")
    np.multiply(P_col, cap, out=capital_recovery)
    np.multiply(S, factors.sinking_fund, out=operating)
    capital_recovery -= operating
    np.multiply(C, factors.discount, out=operating)
    running_sum(operating)
    np.negative(operating, out=operating)
    operating *= cap
    np.subtract(operating, capital_recovery, out=annual_worth)  # -CR + OP, the same double
    return annual_worth, capital_recovery, operating


def marginal_cost(price: ArrayLike, market_values: ArrayLike, costs: ArrayLike,
                  rate: ArrayLike) -> FloatArray:
    """MC_j = (S_{j-1} - S_j) + i S_{j-1} + C_j + X_j with S_0 = P, for j = 1..n.

    >>> marginal_cost(10000.0, [7000.0, 5000.0], [1000.0, 1500.0], 0.10).round(2).tolist()
    [5000.0, 4200.0]
    """
    P = np.asarray(price, dtype=float)
    S = np.asarray(market_values, dtype=float)
    C = np.asarray(costs, dtype=float)
    i_col = np.asarray(rate, dtype=float)[..., None]
    S_prev = np.concatenate([np.broadcast_to(P[..., None], S.shape[:-1] + (1,)), S[..., :-1]],
                            axis=-1)
    return (S_prev - S) + i_col * S_prev + C


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
    S = np.asarray(market_values, dtype=float)
    C = np.asarray(costs, dtype=float)
    n = S.shape[-1]
    if C.shape[-1] != n:
        raise ValueError("market_values and costs must have the same number of years")
    factors = factor_table(rate, n)
    annual_worth, capital_recovery, operating = annual_worth_parts(price, S, C, factors)
    return AWSchedule(annual_worth=annual_worth, capital_recovery=capital_recovery,
                      operating=operating, marginal_cost=marginal_cost(price, S, C, rate),
                      present_worth=annual_worth / factors.capital_recovery)


def present_worth_of_keeping(marginal_cost: ArrayLike, rate: ArrayLike) -> FloatArray:
    """PW of keeping 1..n years from marginal costs: PW_k = -sum_{j<=k} MC_j (P/F,i,j).

    >>> present_worth_of_keeping([5000.0, 4200.0], 0.10).round(2).tolist()
    [-4545.45, -8016.53]
    """
    mc = np.asarray(marginal_cost, dtype=float)
    i = np.asarray(rate, dtype=float)[..., None]
    years = np.arange(1, mc.shape[-1] + 1, dtype=float)
    return -np.cumsum(mc * pf(i, years), axis=-1)
