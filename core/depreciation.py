"""Tax depreciation allowances: straight line, MACRS (GDS, half-year) and declining balance.

Every function returns allowances as money per tax year (currency units,
positive = a deduction) or as fractions of the basis, vectorised over a
leading batch of bases.  Tax year y = 1 is the year the asset was placed in
service; a defender of ``age`` a continues from tax year a+1 (docs/method.md §4).

Conventions
-----------
- Straight line: full-year convention, D_y = (B - SV)/N for y = 1..N.
- MACRS GDS half-year convention (classes 3, 5, 7, 10, 15, 20): generated
  from the rule -- 200 % declining balance for classes 3-10, 150 % for 15 and
  20, switching to straight line in the first year straight line over the
  remaining recovery period gives at least as much; half a year in year 1 and
  in year N+1; each year's percentage rounded as Publication 946 prints it,
  which reproduces IRS Publication 946, Table A-1 (the test holds them to it).  Disposal in recovery
  year y < N+1 allows only half of year y's allowance (the half-year rule in
  the year of disposal).
- Declining balance at rate r per year on the opening book value, switching
  to straight line over the years left when that gives more, to zero book
  value at year N; full-year convention (for non-US capital allowances).

Reference: IRS Publication 946 (How To Depreciate Property), chapter 4 and
Appendix A, Table A-1; the declining-balance-with-switch rule is common
practice.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal
from functools import cache

import numpy as np
from numpy.typing import ArrayLike

from core.estimates import Alternative, Depreciation
from core.factors import FloatArray

MACRS_CLASSES = (3, 5, 7, 10, 15, 20)


@cache
def _macrs_rates(macrs_class: int, exact: bool = False) -> tuple[float, ...]:
    n = macrs_class
    factor = Decimal("1.5") if n in (15, 20) else Decimal(2)
    db = factor / n
    # Publication 946 prints percentages to 2 decimals (3 for 20-year property); rounding each
    # year's percentage half-up and carrying the rounded balance reproduces Table A-1 exactly.
    step = Decimal("0.001") if n == 20 else Decimal("0.01")
    remaining = Decimal(100)
    rates = []
    switched = False
    for year in range(1, n + 2):
        if year == n + 1:
            d = remaining
        else:
            if year == 1:
                d = db * remaining / 2
            else:
                sl = remaining / (Decimal(n) + Decimal("1.5") - year)  # years left
                dbd = db * remaining
                switched = switched or sl >= dbd
                d = sl if switched else dbd
            if not exact:
                d = d.quantize(step, rounding=ROUND_HALF_UP)
        rates.append(d)
        remaining -= d
    return tuple(float(r / 100) for r in rates)


def macrs_rates(macrs_class: int, exact: bool = False) -> FloatArray:
    """MACRS GDS half-year-convention allowance fractions r_1..r_{N+1} for class N.

    Generated from the rule: 200 % declining balance for classes 3-10 (150 %
    for 15 and 20) on the remaining basis, switching to straight line over
    the recovery years left (N + 1.5 - y at the start of year y) once that is
    at least as large; half a year in year 1; year N+1 takes what is left.
    Each year's percentage is rounded half-up to the precision Publication 946
    prints (0.01 %, 0.001 % for 20-year property) and the rounded balance is
    carried, which gives Table A-1 digit for digit; ``exact=True`` skips the
    rounding.  The fractions sum to 1.  Units: fraction of the unadjusted
    basis per tax year.  Reference: IRS Publication 946, Table A-1.

    >>> (macrs_rates(3) * 100).round(2).tolist()
    [33.33, 44.45, 14.81, 7.41]
    >>> (macrs_rates(3, exact=True) * 100).round(3).tolist()
    [33.333, 44.444, 14.815, 7.407]
    >>> len(macrs_rates(20)), round(float(macrs_rates(20).sum()), 12)
    (21, 1.0)
    """
    if macrs_class not in MACRS_CLASSES:
        raise ValueError(f"MACRS class must be one of {MACRS_CLASSES}, not {macrs_class}")
    return np.array(_macrs_rates(int(macrs_class), bool(exact)))


def straight_line(basis: ArrayLike, years: int, salvage: ArrayLike = 0.0,
                  horizon: int | None = None) -> FloatArray:
    """Straight-line allowances D_1..D_H, full-year convention: D_y = (B - SV)/N for y <= N.

    ``basis`` B and ``salvage`` SV (tax salvage) in currency units broadcast
    over leading batch dimensions; ``horizon`` H (default N) pads with zeros
    after year N.  Reference: IRS Publication 946, chapter 4 (straight line
    method); the full-year convention is common practice outside the US.

    >>> straight_line(10000.0, 4, 2000.0, horizon=5).tolist()
    [2000.0, 2000.0, 2000.0, 2000.0, 0.0]
    >>> straight_line([100.0, 200.0], 2).tolist()
    [[50.0, 50.0], [100.0, 100.0]]
    """
    b = np.asarray(basis, dtype=float)
    sv = np.asarray(salvage, dtype=float)
    h = years if horizon is None else horizon
    per_year = ((b - sv) / years)[..., None]
    mask = (np.arange(1, h + 1) <= years).astype(float)
    return per_year * mask


def declining_balance(basis: ArrayLike, years: int, rate: float,
                      horizon: int | None = None) -> FloatArray:
    """Declining balance at ``rate`` r with a switch to straight line, D_1..D_H.

    D_y = max(r BV_{y-1}, BV_{y-1}/(N - y + 1)) for y <= N, BV_0 = B, so the
    book value reaches 0 at year N; zeros after N.  Full-year convention.
    Units: currency units per tax year; r per year as a decimal.
    Reference: declining balance with switch to straight line, common
    practice (e.g. pool-free capital allowances), no single source.

    >>> declining_balance(1000.0, 4, 0.5).round(2).tolist()
    [500.0, 250.0, 125.0, 125.0]
    >>> declining_balance(1000.0, 5, 0.25).round(2).tolist()
    [250.0, 187.5, 187.5, 187.5, 187.5]
    """
    h = years if horizon is None else horizon
    fractions = []
    remaining = 1.0
    for y in range(1, min(years, h) + 1):
        d = max(rate * remaining, remaining / (years - y + 1))
        d = min(d, remaining)
        fractions.append(d)
        remaining -= d
    f = np.zeros(h)
    f[:len(fractions)] = fractions
    return np.asarray(basis, dtype=float)[..., None] * f


def macrs(basis: ArrayLike, macrs_class: int, horizon: int | None = None) -> FloatArray:
    """MACRS GDS half-year allowances D_y = B r_y for tax years y = 1..H (default N+1).

    Units: currency units per tax year.  Reference: IRS Publication 946, Table A-1.

    >>> macrs(10000.0, 3).round(2).tolist()
    [3333.0, 4445.0, 1481.0, 741.0]
    """
    r = macrs_rates(macrs_class)
    h = len(r) if horizon is None else horizon
    f = np.zeros(h)
    m = min(h, len(r))
    f[:m] = r[:m]
    return np.asarray(basis, dtype=float)[..., None] * f


@dataclass(frozen=True)
class DepreciationSchedule:
    """One asset's remaining allowances over the study years j = 1..n.

    ``allowance`` (..., n): the full allowance D_j claimed in study year j
    (tax year age + j); ``disposal_fraction`` (n,): the share of D_k allowed
    when the asset is disposed of in study year k (0.5 under the MACRS
    half-year rule for tax years < N+1, else 1); ``book_value_0`` (...): book
    value today (basis less the ``age`` years already claimed); ``basis`` (...).
    """

    basis: FloatArray
    book_value_0: FloatArray
    allowance: FloatArray
    disposal_fraction: FloatArray

    def book_value_at_disposal(self) -> FloatArray:
        """BV_k if disposed of in year k: BV_0 - sum_{j<k} D_j - h_k D_k (shape (..., n))."""
        claimed = np.cumsum(self.allowance, axis=-1)
        return self.book_value_0[..., None] - claimed + (1.0 - self.disposal_fraction) * \
            self.allowance


def schedule(dep: Depreciation, basis: ArrayLike, horizon: int) -> DepreciationSchedule:
    """The allowances of ``dep`` for study years 1..horizon, continuing from ``dep.age``.

    ``basis`` broadcasts over a leading batch (a challenger's basis may follow
    its sampled first cost).  Units: currency units.

    >>> from core.estimates import Depreciation
    >>> s = schedule(Depreciation("straight_line", years=5, age=2), 10000.0, 4)
    >>> float(s.book_value_0), s.allowance.tolist()
    (6000.0, [2000.0, 2000.0, 2000.0, 0.0])
    >>> s = schedule(Depreciation("macrs", macrs_class=3), 10000.0, 2)
    >>> s.disposal_fraction.tolist(), s.book_value_at_disposal().round(2).tolist()
    ([0.5, 0.5], [8333.5, 4444.5])
    """
    b = np.asarray(basis, dtype=float)
    recovery = int(dep.macrs_class or 0) + 1 if dep.method == "macrs" else int(dep.years or 1)
    age = min(dep.age, recovery)        # past the recovery period nothing more is allowed
    total = age + horizon
    if dep.method == "straight_line":
        d = straight_line(b, int(dep.years or 1), dep.salvage, horizon=total)
        fraction = np.ones(horizon)
    elif dep.method == "declining_balance":
        d = declining_balance(b, int(dep.years or 1), float(dep.rate or 0.0), horizon=total)
        fraction = np.ones(horizon)
    elif dep.method == "macrs":
        n = int(dep.macrs_class or 0)
        d = macrs(b, n, horizon=total)
        tax_years = dep.age + np.arange(1, horizon + 1)
        fraction = np.where(tax_years < n + 1, 0.5, 1.0)
    else:  # pragma: no cover - the study file refuses other methods
        raise ValueError(f"unknown depreciation method {dep.method!r}")
    claimed = d[..., :age].sum(axis=-1)
    return DepreciationSchedule(basis=b, book_value_0=b - claimed, allowance=d[..., age:],
                                disposal_fraction=fraction)


def basis_of(alt: Alternative) -> float:
    """The tax basis: as given, else (a challenger) its first cost."""
    dep = alt.depreciation
    if dep is not None and dep.basis is not None:
        return float(dep.basis)
    return float(alt.price)


def alternative_schedule(alt: Alternative, horizon: int | None = None) -> DepreciationSchedule:
    """``schedule`` for an alternative with depreciation, over its max_life by default."""
    if alt.depreciation is None:
        raise ValueError(f"{alt.name} has no depreciation")
    return schedule(alt.depreciation, basis_of(alt), alt.max_life if horizon is None else horizon)
