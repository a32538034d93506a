"""The after-tax replacement study (docs/method.md §4).

One effective income-tax rate t and an after-tax MARR.  For an asset kept k
years (k = 1..n), with before-tax costs c_j = C_j + X_j, tax allowances D_j
(core.depreciation), market values S_j and discount factor v_j = (1+i)^-j:

    year 0      challenger: -P (first cost)
                defender:   -[MV - t(MV - BV_0)]  (after-tax sale proceeds forgone)
    year j<k    -(1-t) c_j + t D_j
    year k      -(1-t) c_k + t h_k D_k  +  S_k - t(S_k - BV_k)
    BV_k        = BV_0 - sum_{j<k} D_j - h_k D_k      (book value at disposal)
    PW_k        = sum of the flows v_j,   AW_k = PW_k (A/P,i,k)

h_k is 1/2 under the MACRS half-year rule when year k is a recovery year
before N+1, else 1.  Costs enter positive; flows are signed (outflows
negative).  The after-tax ESL is the k with the best AW, ties (to the cent)
to the shorter life.

With inflation (core.inflation) the flows are built in then-current money
(depreciation is not indexed), discounted at the after-tax market rate
i_f = i + f + i f with i the (real) after-tax MARR; ESLs and the decision use
AW in constant money at i, and AW is reported in the money the study states.

Reference: after-tax cash-flow analysis with the gain/loss on disposal taxed at
the effective rate, standard in engineering economy; MACRS per IRS
Publication 946.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from core import depreciation as dep
from core import inflation as infl
from core.estimates import Alternative, Study
from core.factors import FloatArray, ap, pf
from core.results import CashFlowTable


@dataclass(frozen=True)
class AfterTaxSchedule:
    """After-tax figures by retention k (arrays (..., n), index k-1).

    ``present_worth`` PW_k, ``annual_worth`` AW_k at the given rate,
    ``book_value`` BV_k at disposal in year k, ``disposal`` the after-tax
    disposal proceeds S_k - t(S_k - BV_k), ``initial`` the year-0 outlay
    (positive: P, or the defender's MV - t(MV - BV_0)).
    """

    present_worth: FloatArray
    annual_worth: FloatArray
    book_value: FloatArray
    disposal: FloatArray
    initial: FloatArray


def after_tax_annual_worth(price: ArrayLike, market_values: ArrayLike, costs: ArrayLike,
                           allowance: ArrayLike, book_value_0: ArrayLike, tax_rate: ArrayLike,
                           rate: ArrayLike, *, disposal_fraction: ArrayLike = 1.0,
                           defender: bool = False) -> AfterTaxSchedule:
    """After-tax PW_k and AW_k for k = 1..n (equations in the module docstring).

    ``price`` (...): challenger first cost P or defender market value today MV;
    ``market_values`` S_j, ``costs`` C_j + X_j (positive = cost), ``allowance``
    D_j: (..., n); ``book_value_0`` (...): the basis for a challenger, BV today
    for the defender; ``tax_rate`` t and ``rate`` (the after-tax MARR) (...);
    ``disposal_fraction`` h_k (n,) or scalar; ``defender`` credits the tax on
    the forgone sale today.  Money in currency units, rates per year as
    decimals; all arguments broadcast over leading batch dimensions.

    Hand check: P = 10,000, S_1 = 6,000, c_1 = 1,000, D_1 = 5,000, t = 0.25,
    i = 0.10: year 1 = -750 + 1,250 + 6,000 - 0.25(6,000 - 5,000) = 6,250;
    PW = -10,000 + 6,250/1.1 = -4,318.18; AW = PW(1.1) = -4,750.

    >>> s = after_tax_annual_worth(10000.0, [6000.0], [1000.0], [5000.0], 10000.0, 0.25, 0.10)
    >>> s.annual_worth.round(2).tolist(), s.book_value.tolist()
    ([-4750.0], [5000.0])
    """
    P = np.asarray(price, dtype=float)
    B0 = np.asarray(book_value_0, dtype=float)
    t = np.asarray(tax_rate, dtype=float)
    i = np.asarray(rate, dtype=float)
    n = np.shape(market_values)[-1]
    years = np.arange(1, n + 1, dtype=float)
    initial = P - t * (P - B0) if defender else P + 0.0 * (t + B0)
    pw_running, tail, book, disposal = _after_tax_parts(
        market_values, costs, allowance, book_value_0, tax_rate, rate, disposal_fraction,
        full=True)
    pw = -initial[..., None] + pw_running + tail
    aw = pw * ap(i[..., None], years)
    return AfterTaxSchedule(present_worth=pw, annual_worth=aw, book_value=book,
                            disposal=disposal, initial=initial)


def _after_tax_parts(market_values: ArrayLike, costs: ArrayLike, allowance: ArrayLike,
                     book_value_0: ArrayLike, tax_rate: ArrayLike, rate: ArrayLike,
                     disposal_fraction: ArrayLike, full: bool = False) -> tuple[FloatArray, ...]:
    """The terms of after-tax PW_k that do not depend on the year-0 outlay.

    PW_k = -initial + running_k + tail_k (see ``after_tax_annual_worth``), with
    running_k = sum_{j<=k} [-(1-t)c_j + t D_j](P/F,i,j) and tail_k the after-tax
    disposal at k discounted.  Returns (running, tail), and with ``full`` also the
    book values and disposal proceeds.

    >>> running, tail = _after_tax_parts([6000.0], [1000.0], [5000.0], 10000.0, 0.25, 0.10, 1.0)
    >>> round(float(-10000.0 + running[0] + tail[0]), 2)
    -4318.18
    """
    S = np.asarray(market_values, dtype=float)
    C = np.asarray(costs, dtype=float)
    D = np.asarray(allowance, dtype=float)
    B0 = np.asarray(book_value_0, dtype=float)
    t = np.asarray(tax_rate, dtype=float)
    i = np.asarray(rate, dtype=float)
    n = S.shape[-1]
    h = np.asarray(disposal_fraction, dtype=float)
    years = np.arange(1, n + 1, dtype=float)
    t_col = t[..., None]
    v = pf(i[..., None], years)
    flows = -(1.0 - t_col) * C + t_col * D
    pw_running = np.cumsum(flows * v, axis=-1)
    book = B0[..., None] - np.cumsum(D, axis=-1) + (1.0 - h) * D
    disposal = S - t_col * (S - book)
    tail = (disposal - t_col * (1.0 - h) * D) * v
    return (pw_running, tail, book, disposal) if full else (pw_running, tail)


def cash_flow_table(k: int, price: float, S: np.ndarray, C: np.ndarray,
                    sched: dep.DepreciationSchedule, t: float, defender: bool) -> CashFlowTable:
    """The rows of keeping ``k`` years (scalar inputs; see ``CashFlowTable``).

    >>> from core.estimates import Depreciation
    >>> sc = dep.schedule(Depreciation("straight_line", years=2), 1000.0, 2)
    >>> tab = cash_flow_table(1, 1000.0, np.array([600.0, 300.0]), np.array([100.0, 100.0]),
    ...                       sc, 0.5, False)
    >>> tab.net.round(2).tolist()   # year 1: -100 + 600 - 0.5(-100 - 500 + 600 - 500)
    [-1000.0, 750.0]
    """
    D = np.asarray(sched.allowance, dtype=float)
    h = np.asarray(sched.disposal_fraction, dtype=float)
    bv0 = float(sched.book_value_0)
    d = np.concatenate([[0.0], D[:k]])
    d[k] *= h[k - 1]
    before = np.concatenate([[-price], -C[:k]])
    disposal = np.zeros(k + 1)
    disposal[k] = S[k - 1]
    book = bv0 - np.cumsum(d)
    taxable = before[:] + 0.0
    taxable[0] = -(price - bv0) if defender else 0.0
    taxable[1:] = -C[:k] - d[1:]
    taxable[k] += S[k - 1] - book[k]
    tax = -t * taxable
    if not defender:
        tax[0] = 0.0
    net = before + disposal + tax
    return CashFlowTable(k, before, disposal, d, book, taxable, tax, net)


# --------------------------------------------------------------------------- the study
def rates(study: Study) -> tuple[float, float, float]:
    """(decision rate i, discount rate of the then-current flows, reporting rate), after tax.

    Without inflation all three are the after-tax MARR.  With inflation f the
    after-tax MARR i is real: flows in then-current money are discounted at
    i_f = i + f + i f; AW is reported at i (constant studies) or i_f
    (then-current studies).
    """
    assert study.tax is not None
    i = float(study.tax.after_tax_marr)
    if study.inflation is None:
        return i, i, i
    i_f = float(infl.market_rate(i, study.inflation.rate))
    report = i_f if study.inflation.estimates == "then-current" else i
    return i, i_f, report


def decision_annual_worth(study: Study, alt: Alternative, price: ArrayLike | None = None,
                          market_values: ArrayLike | None = None,
                          costs: ArrayLike | None = None) -> FloatArray:
    """After-tax AW_k (..., n) on the decision basis (constant money at the real after-tax MARR).

    For batch use (risk trials): ``price`` (...), ``market_values`` and
    ``costs`` (C_j + X_j) (..., n) are in the money the study states and
    default to the estimates.  A challenger without an explicit tax basis
    depreciates its (sampled) first cost.  ESL = ``core.annual_worth.economic_life``.

    >>> from core.estimates import Alternative, Depreciation, MarketValues, OperatingCosts, Tax
    >>> c = Alternative("C", "challenger", 10000.0, 1, MarketValues(values=(6000.0,)),
    ...                 OperatingCosts(values=(1000.0,)), depreciation=Depreciation(
    ...                 "straight_line", years=2))
    >>> s = Study("s", 0.1, c, (c,), tax=Tax(0.25, 0.10))
    >>> decision_annual_worth(s, c, [10000.0, 12000.0]).round(2).tolist()
    [[-4750.0], [-6450.0]]
    """
    decision, discount, _ = rates(study)
    P = np.asarray(alt.price if price is None else price, dtype=float)
    S = alt.market_value_array() if market_values is None else np.asarray(market_values, float)
    C = alt.cost_array() if costs is None else np.asarray(costs, dtype=float)
    if study.inflation is not None and study.inflation.estimates == "constant":
        S, C = infl.to_then_current(S, study.inflation.rate), \
            infl.to_then_current(C, study.inflation.rate)
    dep_spec = alt.depreciation
    if dep_spec is None:
        raise ValueError(f"{alt.name} has no depreciation")
    basis = dep_spec.basis if dep_spec.basis is not None else P
    sched = dep.schedule(dep_spec, basis, alt.max_life)
    t = float(study.tax.rate) if study.tax is not None else 0.0
    s = after_tax_annual_worth(P, S, C, sched.allowance, sched.book_value_0, t, discount,
                               disposal_fraction=sched.disposal_fraction,
                               defender=alt.role == "defender")
    return s.present_worth * ap(decision, np.arange(1, alt.max_life + 1))


def conventions(study: Study) -> str:
    """The after-tax conventions sentence shown with the after-tax figures."""
    text = ("One effective tax rate on every flow (a loss is a credit against other income); "
            "gain or loss on disposal taxed at that rate; MACRS half-year rule in the year of "
            "disposal; straight line and declining balance use the full-year convention.")
    if study.inflation is not None:
        assert study.tax is not None
        i, i_f, _ = rates(study)
        text += (f" With inflation, depreciation is fixed in then-current money: after-tax flows "
                 f"are built in then-current money and discounted at the after-tax market rate "
                 f"{i_f:.2%} (real after-tax MARR {i:.2%}).")
    return text
