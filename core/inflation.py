"""General inflation: real and market rates, constant and then-current money.

Conventions (docs/method.md §4, README "After-tax and inflation")
------------------------------------------------------------
- ``marr`` (and ``tax.after_tax_marr``) in a study file are *real* rates i:
  the return required above inflation.  With inflation f the market
  (inflation-including) rate is i_f = i + f + i f.
- Estimates are stated either in *constant* money (today's purchasing power)
  or in *then-current* money (the amounts actually paid in year j).  The two
  statements of one cash flow are related by  then_current_j =
  constant_j (1+f)^j, and discounting constant money at i gives the same
  present worth as discounting then-current money at i_f.
- The decision basis is constant money at the real rate: every ESL, every
  comparison, the study-period options and the replacement value are
  computed from AW_k = PW_k (A/P,i,k) (a level annuity in today's money, the
  only basis on which repeating an asset "at the same cost" is meaningful
  under inflation).  So a study stated either way reaches the same decision
  and the same ESLs.  The recommendation's amounts and the study-period
  options stay in constant money.
- AW is *reported* in the money the study states: a then-current study's
  AW_k = PW_k (A/P,i_f,k), a level then-current annuity with the same present
  worth.  Because (A/P,i_f,k)/(A/P,i,k) changes with k, the largest reported
  then-current AW need not sit at the ESL; the ESL is the constant-money one.
  Marginal costs and market values are restated the same way
  (MC_j then-current = MC_j constant (1+f)^j, an exact identity).
- After tax, depreciation is fixed in then-current money (it is not indexed),
  so the after-tax flows are built in then-current money and discounted at
  the after-tax market rate (see core.aftertax).

Reference: the real/market rate relation (the Fisher relation, exact form)
and constant versus then-current ("actual") money, standard in engineering
economy.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from core.estimates import Alternative, Inflation, Study
from core.factors import FloatArray, ap


def market_rate(real: ArrayLike, inflation: ArrayLike) -> FloatArray:
    """Market rate i_f = i + f + i f from the real rate i and inflation f (decimals per year).

    >>> round(float(market_rate(0.10, 0.05)), 6)
    0.155
    >>> market_rate([0.0, 0.08], 0.0).tolist()
    [0.0, 0.08]
    """
    i = np.asarray(real, dtype=float)
    f = np.asarray(inflation, dtype=float)
    return i + f + i * f


def real_rate(market: ArrayLike, inflation: ArrayLike) -> FloatArray:
    """Real rate i = (1 + i_f)/(1 + f) - 1, the inverse of ``market_rate``.

    >>> round(float(real_rate(0.155, 0.05)), 6)
    0.1
    """
    return (1.0 + np.asarray(market, dtype=float)) / (1.0 + np.asarray(inflation, dtype=float)) \
        - 1.0


def to_then_current(constant: ArrayLike, inflation: ArrayLike,
                    years: ArrayLike | None = None) -> FloatArray:
    """Restate constant (today's) money in then-current money: A_j = A'_j (1+f)^j.

    ``years`` defaults to 1..n along the last axis of ``constant``.

    >>> to_then_current([100.0, 100.0], 0.10).round(2).tolist()
    [110.0, 121.0]
    """
    a = np.asarray(constant, dtype=float)
    return a * _growth(inflation, a.shape[-1], years)


def to_constant(then_current: ArrayLike, inflation: ArrayLike,
                years: ArrayLike | None = None) -> FloatArray:
    """Restate then-current money in constant (today's) money: A'_j = A_j (1+f)^-j.

    >>> to_constant([110.0, 121.0], 0.10).round(6).tolist()
    [100.0, 100.0]
    """
    a = np.asarray(then_current, dtype=float)
    return a / _growth(inflation, a.shape[-1], years)


def _growth(inflation: ArrayLike, n: int, years: ArrayLike | None) -> FloatArray:
    """(1+f)^j for j = 1..n (or the given years); f broadcasts over leading batch dims."""
    j = np.arange(1, n + 1, dtype=float) if years is None else np.asarray(years, dtype=float)
    f = np.asarray(inflation, dtype=float)
    return np.power(1.0 + (f[..., None] if f.ndim else f), j)


def before_tax_rate(study: Study) -> float:
    """The rate the before-tax decision discounts at: the real MARR (constant-money basis).

    >>> from core.estimates import Alternative, Inflation, Study
    >>> a = Alternative("A", "defender", 1.0, 1)
    >>> before_tax_rate(Study("s", 0.08, a, (a,), inflation=Inflation(0.03, "then-current")))
    0.08
    """
    return float(study.marr)


def before_tax_arrays(study: Study, alt: Alternative) -> tuple[float, np.ndarray, np.ndarray]:
    """(price, S_1..S_n, C_j + X_j) in constant money (then-current estimates are deflated).

    >>> from core.estimates import Alternative, Inflation, MarketValues, OperatingCosts, Study
    >>> a = Alternative("A", "defender", 100.0, 2, MarketValues(values=(110.0, 121.0)),
    ...                 OperatingCosts(values=(11.0, 12.1)))
    >>> s = Study("s", 0.08, a, (a,), inflation=Inflation(0.10, "then-current"))
    >>> p, S, C = before_tax_arrays(s, a)
    >>> p, S.round(6).tolist(), C.round(6).tolist()
    (100.0, [100.0, 100.0], [10.0, 10.0])
    """
    price, s, c = float(alt.price), alt.market_value_array(), alt.cost_array()
    if study.inflation is None or study.inflation.estimates == "constant":
        return price, s, c
    f = study.inflation.rate
    return price, to_constant(s, f), to_constant(c, f)


def then_current_arrays(study: Study, alt: Alternative) -> tuple[float, np.ndarray, np.ndarray]:
    """(price, S_1..S_n, C_j + X_j) in then-current money (constant estimates are inflated).

    Without inflation in the study, the estimates as stated.
    """
    price, s, c = float(alt.price), alt.market_value_array(), alt.cost_array()
    if study.inflation is None or study.inflation.estimates == "then-current":
        return price, s, c
    f = study.inflation.rate
    return price, to_then_current(s, f), to_then_current(c, f)


def reporting_factor(study: Study, real: float, n: int) -> FloatArray:
    """Multiplier from constant-money AW_k to the reported AW_k, k = 1..n.

    1 for constant studies; (A/P,i_f,k)/(A/P,i,k) for then-current studies
    (same PW_k restated as a level then-current annuity).

    >>> reporting_factor(_demo_study("then-current"), 0.10, 1).round(6).tolist()
    [1.05]
    """
    k = np.arange(1, n + 1)
    if study.inflation is None or study.inflation.estimates == "constant":
        return np.ones(n)
    f = study.inflation.rate
    return ap(float(market_rate(real, f)), k) / ap(real, k)


def _demo_study(basis: str) -> Study:
    a = Alternative("A", "defender", 1.0, 1)
    return Study("s", 0.10, a, (a,), inflation=Inflation(0.05, basis))  # type: ignore[arg-type]


def money_label(study: Study) -> str:
    """'constant (today's) money' or 'then-current money': the money AW is reported in."""
    if study.inflation is not None and study.inflation.estimates == "then-current":
        return "then-current money"
    return "constant (today's) money"


def describe(study: Study) -> str:
    """One line for the CLI, window and memo: rates and the money AW is reported in.

    >>> print(describe(_demo_study("constant")))
    Inflation 5.00% a year: MARR 10.00% is the real rate (market rate 15.50%); estimates are in constant (today's) money, discounted at the real rate; AW is in constant (today's) money.
    """
    if study.inflation is None:
        return "No inflation adjustment: estimates and MARR are taken as stated."
    f = study.inflation.rate
    i = study.marr
    text = (f"Inflation {f:.2%} a year: MARR {i:.2%} is the real rate "
            f"(market rate {float(market_rate(i, f)):.2%}); ")
    if study.inflation.estimates == "constant":
        text += ("estimates are in constant (today's) money, discounted at the real rate; "
                 "AW is in constant (today's) money.")
    else:
        text += ("estimates are in then-current money, discounted at the market rate; AW is "
                 "in then-current money (a level annuity at the market rate); ESLs and the "
                 "decision are set in constant money at the real rate, so they do not depend "
                 "on how the estimates are stated; the recommendation's amounts and the "
                 "study-period options are in constant (today's) money.")
    if study.tax is not None:
        at = study.tax.after_tax_marr
        text += (f" After tax: after-tax MARR {at:.2%} is real (market "
                 f"{float(market_rate(at, f)):.2%}); depreciation is in then-current money.")
    return text
