"""Discrete compound-interest factors, vectorised over numpy arrays.

All factors use end-of-period cash flows and discrete compounding at rate
``i`` per period (a decimal: 0.10 for 10 %).  ``i`` must be greater than -1;
``i == 0`` returns the mathematical limit instead of dividing by zero.  Every
argument broadcasts with numpy rules, so a whole table of factors comes from
one call.

Reference: the standard factor definitions of engineering economy (notation
(X/Y,i,n): "find X given Y"), as used in any compound-interest table.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

FloatArray = NDArray[np.float64]

_ZERO = 1e-12
_SERIES = 1e-4


def _check_rate(i: ArrayLike) -> FloatArray:
    rate = np.asarray(i, dtype=float)
    if np.any(~np.isfinite(rate)):
        raise ValueError("interest rate must be a finite number")
    if np.any(rate <= -1.0):
        raise ValueError("interest rate must be greater than -1 (-100 %)")
    return rate


def _zero_mask(rate: FloatArray) -> NDArray[np.bool_]:
    return np.abs(rate) < _ZERO


def fp(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Single-payment compound amount (F/P,i,n) = (1+i)^n.

    >>> round(float(fp(0.10, 5)), 4)
    1.6105
    """
    rate = _check_rate(i)
    return np.power(1.0 + rate, np.asarray(n, dtype=float))


def pf(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Single-payment present worth (P/F,i,n) = (1+i)^-n.

    >>> round(float(pf(0.10, 5)), 4)
    0.6209
    """
    rate = _check_rate(i)
    return np.power(1.0 + rate, -np.asarray(n, dtype=float))


def pa(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Uniform-series present worth (P/A,i,n) = ((1+i)^n - 1) / (i(1+i)^n); n at i = 0.

    >>> round(float(pa(0.10, 5)), 4), float(pa(0.0, 5))
    (3.7908, 5.0)
    """
    rate = _check_rate(i)
    periods = np.asarray(n, dtype=float)
    zero = _zero_mask(rate)
    safe = np.where(zero, 1.0, rate)
    value = (1.0 - np.power(1.0 + safe, -periods)) / safe
    return np.where(zero, periods + 0.0 * safe, value)


def ap(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Capital recovery (A/P,i,n) = i(1+i)^n / ((1+i)^n - 1); 1/n at i = 0.

    >>> round(float(ap(0.10, 5)), 5), float(ap(0.0, 4))
    (0.2638, 0.25)
    """
    periods = np.asarray(n, dtype=float)
    if np.any(periods <= 0):
        raise ValueError("number of periods must be at least 1 for (A/P,i,n)")
    return 1.0 / pa(i, periods)


def fa(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Uniform-series compound amount (F/A,i,n) = ((1+i)^n - 1)/i; n at i = 0.

    >>> round(float(fa(0.10, 5)), 4)
    6.1051
    """
    rate = _check_rate(i)
    periods = np.asarray(n, dtype=float)
    zero = _zero_mask(rate)
    safe = np.where(zero, 1.0, rate)
    value = (np.power(1.0 + safe, periods) - 1.0) / safe
    return np.where(zero, periods + 0.0 * safe, value)


def af(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Sinking fund (A/F,i,n) = i / ((1+i)^n - 1); 1/n at i = 0.

    >>> round(float(af(0.10, 5)), 5)
    0.1638
    """
    periods = np.asarray(n, dtype=float)
    if np.any(periods <= 0):
        raise ValueError("number of periods must be at least 1 for (A/F,i,n)")
    return 1.0 / fa(i, periods)


def pg(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Arithmetic-gradient present worth (P/G,i,n) = [(P/A,i,n) - n(P/F,i,n)] / i.

    The gradient series is 0, G, 2G, ..., (n-1)G at the ends of years 1..n.
    At i = 0 the limit is n(n-1)/2.

    >>> round(float(pg(0.10, 5)), 3), float(pg(0.0, 5))
    (6.862, 10.0)
    """
    rate = _check_rate(i)
    periods = np.asarray(n, dtype=float)
    # The closed form cancels catastrophically as i -> 0 (error ~ eps/i^2), so below
    # |i| = 1e-4 use the series sum (j-1)(1+i)^-j = n(n-1)/2 - i(n-1)n(n+1)/3
    # + i^2(n-1)n(n+1)(n+2)/8 - ..., whose next term is O(i^3 n^5).
    small = np.abs(rate) < _SERIES
    safe = np.where(small, 1.0, rate)
    value = (pa(safe, periods) - periods * pf(safe, periods)) / safe
    near = np.where(small, rate, 0.0)
    m = (periods - 1.0) * periods * (periods + 1.0)
    series = periods * (periods - 1.0) / 2.0 - near * m / 3.0 + near**2 * m * (periods + 2.0) / 8.0
    return np.where(small, series, value)


def ag(i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Arithmetic-gradient uniform series (A/G,i,n) = 1/i - n/((1+i)^n - 1); (n-1)/2 at i = 0.

    >>> round(float(ag(0.10, 5)), 4), float(ag(0.0, 5))
    (1.8101, 2.0)
    """
    periods = np.asarray(n, dtype=float)
    if np.any(periods <= 0):
        raise ValueError("number of periods must be at least 1 for (A/G,i,n)")
    return pg(i, periods) * ap(i, periods)


def pa_geometric(g: ArrayLike, i: ArrayLike, n: ArrayLike) -> FloatArray:
    """Geometric-gradient present worth (P/A,g,i,n) per unit first-year amount.

    The series is A_1, A_1(1+g), ..., A_1(1+g)^(n-1) at the ends of years 1..n:

        (P/A,g,i,n) = [1 - ((1+g)/(1+i))^n] / (i - g)    for g != i
                    = n / (1+i)                          for g == i

    >>> round(float(pa_geometric(0.05, 0.10, 5)), 4), round(float(pa_geometric(0.1, 0.1, 5)), 4)
    (4.1506, 4.5455)
    """
    rate = _check_rate(i)
    growth = np.asarray(g, dtype=float)
    if np.any(growth <= -1.0):
        raise ValueError("growth rate must be greater than -1 (-100 %)")
    periods = np.asarray(n, dtype=float)
    equal = np.abs(rate - growth) < _ZERO
    diff = np.where(equal, 1.0, rate - growth)
    value = (1.0 - np.power((1.0 + growth) / (1.0 + rate), periods)) / diff
    return np.where(equal, periods / (1.0 + rate), value)


@dataclass(frozen=True, slots=True)
class FactorTable:
    """The four factors every AW needs, for k = 1..n along the last axis.

    ``discount`` (P/F,i,k), ``annuity`` (P/A,i,k), ``capital_recovery`` (A/P,i,k) and
    ``sinking_fund`` (A/F,i,k); each (..., n) for a ``rate`` of shape (...).
    """

    discount: FloatArray
    annuity: FloatArray
    capital_recovery: FloatArray
    sinking_fund: FloatArray

    def head(self, n: int) -> FactorTable:
        """The factors for k = 1..n only."""
        return FactorTable(self.discount[..., :n], self.annuity[..., :n],
                           self.capital_recovery[..., :n], self.sinking_fund[..., :n])


def factor_table(i: ArrayLike, n: int, *, out: FactorTable | None = None) -> FactorTable:
    """(P/F), (P/A), (A/P) and (A/F) at rate(s) ``i`` for k = 1..n, two powers per rate.

    The floating-point steps of ``pf``, ``pa``, ``ap`` and ``af`` (every value is bit for
    bit theirs), but the (1+i)^-k of (P/A) is the (P/F) table itself:

        (P/F) = (1+i)^-k,  (P/A) = (1 - (P/F))/i,  (A/P) = 1/(P/A),
        (A/F) = 1/(F/A) = i/((1+i)^k - 1);   at i = 0: (P/A) = (F/A) = k.

    ``out``: a table of arrays of shape ``i.shape + (n,)`` to fill instead of new ones, in
    any memory layout (the risk engine passes trial-contiguous ones, reused from chunk to
    chunk); the values are the same.  The exponents are first written into ``out`` in
    full, because numpy rounds x**2 and x**-1 differently when the exponent is constant
    along its inner loop.

    >>> t = factor_table([0.10, 0.0], 2)
    >>> t.capital_recovery.round(4).tolist(), t.sinking_fund.round(4).tolist()
    ([[1.1, 0.5762], [1.0, 0.5]], [[1.0, 0.4762], [1.0, 0.5]])
    >>> bool(t.annuity[0, 1] == pa(0.10, 2)) and bool(t.sinking_fund[0, 1] == af(0.10, 2))
    True
    >>> f = factor_table([0.10, 0.0], 2, out=FactorTable(*(np.empty((2, 2)).T for _ in range(4))))
    >>> bool(np.array_equal(f.annuity, t.annuity)), bool(f.discount.flags.f_contiguous)
    (True, True)
    """
    rate = _check_rate(i)
    periods = np.arange(1, n + 1, dtype=float)
    col = rate[..., None]
    zero = _zero_mask(col)
    safe = np.where(zero, 1.0, col)
    if out is None:
        disc = np.power(1.0 + col, -periods)
        annuity = np.subtract(1.0, np.power(1.0 + safe, -periods) if zero.any() else disc)
        fund = np.power(1.0 + safe, periods)
    else:
        if any(a.shape != rate.shape + (n,) for a in
               (out.discount, out.annuity, out.capital_recovery, out.sinking_fund)):
            raise ValueError(f"out arrays must have the shape {rate.shape + (n,)}")
        disc, annuity, fund = out.discount, out.annuity, out.sinking_fund
        np.copyto(disc, -periods)
        np.power(1.0 + col, disc, out=disc)
        if zero.any():
            np.copyto(annuity, -periods)
            np.power(1.0 + safe, annuity, out=annuity)
            np.subtract(1.0, annuity, out=annuity)
        else:
            np.subtract(1.0, disc, out=annuity)
        np.copyto(fund, periods)
        np.power(1.0 + safe, fund, out=fund)
    annuity /= safe
    fund -= 1.0
    fund /= safe
    if zero.any():
        np.copyto(annuity, periods, where=zero)
        np.copyto(fund, periods, where=zero)
    cap = np.divide(1.0, annuity, out=None if out is None else out.capital_recovery)
    sink = np.divide(1.0, fund, out=fund)
    return FactorTable(disc, annuity, cap, sink)
