"""Present worth of every (machine, vintage, retention) from the study's own kernels.

For a challenger bought in plan year t (vintage t, t = 0..H-1), with change
rates gP (first cost, market values) and gC (operating costs) (docs/method.md §11):

    P_t = P (1+gP)^t,   S_{t,k} = S_k (1+gP)^t,   c_{t,j} = C_j (1+gC)^t + X_j

(extra costs X_j as estimated).  Its present worth, at time 0, of being kept
k years and then sold, is

    G_{t,k} = (P/F,i,t) PW_k(P_t, S_t, c_t)

where PW_k is the kernel's present worth at purchase: ``annual_worth_schedule``
before tax (constant money at the study rate), ``after_tax_annual_worth``
after tax (then-current money at the after-tax discount rate; the vintage's
tax basis scales like its first cost, and with inflation every amount of a
machine bought in year t is in money of year t + j, hence (1+f)^t more).
For the defender G_0 = 0 (sold today: its sale offsets its opportunity cost)
and G_k = PW_k of keeping it k years, the study's own figure.

Every factor comes from core.factors, every flow from the kernels
(core.annual_worth, core.aftertax, core.depreciation, core.inflation).
Reference: R. Bellman (1955), "Equipment replacement policy", J. SIAM 3(3).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Literal

import numpy as np

from core import depreciation as dep
from core import inflation as infl
from core.aftertax import after_tax_annual_worth
from core.aftertax import rates as after_tax_rates
from core.annual_worth import annual_worth_schedule
from core.errors import StudyError
from core.estimates import Alternative, Study
from core.factors import FloatArray, fp, pf

Basis = Literal["before-tax", "after-tax"]


@dataclass(frozen=True)
class Rates:
    """The rates of one plan: ``discount`` for the flows as built, ``decision`` for AW over H."""

    basis: Basis
    discount: float
    decision: float
    inflation: float


def _tax_rate(study: Study) -> float:
    if study.tax is None:
        raise StudyError("tax", "an after-tax plan needs the study's tax block")
    return float(study.tax.rate)


def plan_rates(study: Study) -> Rates:
    """Before tax: the study rate (real MARR with inflation); after tax: ``core.aftertax.rates``."""
    f = float(study.inflation.rate) if study.inflation is not None else 0.0
    if study.tax is None:
        i = float(infl.before_tax_rate(study))
        return Rates("before-tax", i, i, f)
    decision, discount, _ = after_tax_rates(study)
    return Rates("after-tax", float(discount), float(decision), f)


def _arrays(study: Study, alt: Alternative, basis: Basis) -> tuple[float, np.ndarray, np.ndarray,
                                                                    np.ndarray]:
    """(price, S, C, X) in the money the basis discounts: kernel arrays, C and X apart."""
    arrays = infl.before_tax_arrays if basis == "before-tax" else infl.then_current_arrays
    price, s, cx = arrays(study, alt)
    _, _, c = arrays(study, dataclasses.replace(alt, extra_costs=()))
    return float(price), np.asarray(s, float), np.asarray(c, float), np.asarray(cx - c, float)


def defender_present_worth(study: Study, rates: Rates) -> FloatArray:
    """G_k for the defender, k = 0..n_D (G_0 = 0): the study's PW of keeping it k years.

    >>> from core.estimates import MarketValues, OperatingCosts
    >>> d = Alternative("D", "defender", 1000.0, 2, MarketValues(values=(600.0, 300.0)),
    ...                 OperatingCosts(values=(100.0, 200.0)))
    >>> s = Study("s", 0.0, d, (d,))
    >>> defender_present_worth(s, plan_rates(s)).round(2).tolist()   # -1000-100+600; -1000-300+300
    [0.0, -500.0, -1000.0]
    """
    alt = study.defender
    price, s, c, x = _arrays(study, alt, rates.basis)
    if rates.basis == "before-tax":
        pw = annual_worth_schedule(price, s, c + x, rates.discount).present_worth
    else:
        sched = dep.alternative_schedule(alt)
        pw = after_tax_annual_worth(price, s, c + x, sched.allowance, sched.book_value_0,
                                    _tax_rate(study), rates.discount,
                                    disposal_fraction=sched.disposal_fraction,
                                    defender=True).present_worth
    return np.concatenate([[0.0], pw])


def challenger_present_worth(study: Study, alt: Alternative, horizon: int, rates: Rates,
                             first_cost_change: float, operating_cost_change: float
                             ) -> FloatArray:
    """G_{t,k} for vintages t = 0..H-1 and k = 0..n (shape (H, n+1); column 0 is unused, NaN).

    >>> from core.estimates import MarketValues, OperatingCosts
    >>> c = Alternative("C", "challenger", 1000.0, 1, MarketValues(values=(500.0,)),
    ...                 OperatingCosts(values=(100.0,)))
    >>> s = Study("s", 0.0, c, (c,))
    >>> challenger_present_worth(s, c, 2, plan_rates(s), -0.5, -0.5)[:, 1].tolist()
    [-600.0, -300.0]
    """
    price, s, c, x = _arrays(study, alt, rates.basis)
    t = np.arange(horizon, dtype=float)
    gp = fp(first_cost_change, t)[:, None]            # (1+gP)^t
    gc = fp(operating_cost_change, t)[:, None]        # (1+gC)^t
    grow = infl.to_then_current(np.ones((horizon, 1)), rates.inflation, years=t[:, None]) \
        if rates.basis == "after-tax" else np.ones((horizon, 1))   # (1+f)^t after tax
    price_t = (price * gp * grow)[:, 0]
    s_t = s[None, :] * gp * grow
    c_t = (c[None, :] * gc + x[None, :]) * grow
    if rates.basis == "before-tax":
        pw = annual_worth_schedule(price_t, s_t, c_t, rates.discount).present_worth
    else:
        basis_t = dep.basis_of(alt) * (gp * grow)[:, 0]
        if alt.depreciation is None:
            raise StudyError(f"challengers.{alt.name}.depreciation",
                             "an after-tax technology plan needs each challenger's depreciation")
        sched = dep.schedule(alt.depreciation, basis_t, alt.max_life)
        pw = after_tax_annual_worth(price_t, s_t, c_t, sched.allowance, sched.book_value_0,
                                    _tax_rate(study), rates.discount,
                                    disposal_fraction=sched.disposal_fraction).present_worth
    out = np.full((horizon, alt.max_life + 1), np.nan)
    out[:, 1:] = pw * pf(rates.discount, t)[:, None]
    return out
