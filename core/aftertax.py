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

import dataclasses
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from core import depreciation as dep
from core import inflation as infl
from core.annual_worth import economic_life
from core.estimates import Alternative, Study
from core.factors import FloatArray, ap, pf
from core.results import Recommendation, StudyOption, StudyResult


def _r(x: float, digits: int = 4) -> float:
    return round(float(x), digits)


def _list(a: ArrayLike, digits: int = 4) -> list[float]:
    return [round(float(v), digits) for v in np.asarray(a).ravel()]


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


@dataclass(frozen=True)
class CashFlowTable:
    """The after-tax cash flows of keeping an asset ``retention`` years, rows j = 0..k.

    Signed cash flows (outflows negative): ``before_tax`` is -P (or -MV) at
    year 0 and -(C_j + X_j) after; ``disposal`` the market value S_k at year
    k; ``depreciation`` the allowance claimed; ``taxable_income`` the change
    in taxable income (with the gain S_k - BV_k at k, and for the defender the
    forgone gain MV - BV_0 at year 0, negative); ``tax`` = -t x taxable income
    (positive = tax saved); ``net`` = before_tax + disposal + tax.
    """

    retention: int
    before_tax: FloatArray
    disposal: FloatArray
    depreciation: FloatArray
    book_value: FloatArray
    taxable_income: FloatArray
    tax: FloatArray
    net: FloatArray

    def to_json(self) -> dict[str, Any]:
        return {"retention": self.retention,
                "rows": [{"year": j, "before_tax": _r(self.before_tax[j], 2),
                          "disposal": _r(self.disposal[j], 2),
                          "depreciation": _r(self.depreciation[j], 2),
                          "book_value": _r(self.book_value[j], 2),
                          "taxable_income": _r(self.taxable_income[j], 2),
                          "tax": _r(self.tax[j], 2), "net": _r(self.net[j], 2)}
                         for j in range(self.retention + 1)]}


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


@dataclass(frozen=True)
class AfterTaxAlternative:
    """One alternative after tax: AW for every retention, its ESL and the cash-flow tables.

    ``annual_worth`` is in the money the study states (see core.inflation);
    ``annual_worth_constant`` the constant-money AW that sets the ESL and the
    decision (the same array when the study has no then-current inflation).
    Cash-flow tables are in then-current money when the study has inflation.
    """

    name: str
    role: str
    method: str
    basis: float
    book_value_0: float
    initial: float
    allowance: FloatArray
    book_value: FloatArray
    disposal: FloatArray
    present_worth: FloatArray
    annual_worth: FloatArray
    annual_worth_constant: FloatArray
    economic_life: int
    annual_worth_at_economic_life: float
    tables: tuple[CashFlowTable, ...]
    rank: int = 0

    @property
    def equivalent_annual_cost(self) -> FloatArray:
        return -self.annual_worth

    def to_json(self) -> dict[str, Any]:
        return {"annual_worth": _list(self.annual_worth),
                "economic_life": int(self.economic_life),
                "annual_worth_at_economic_life": _r(self.annual_worth_at_economic_life),
                "rank": self.rank,
                "annual_worth_constant_money": _list(self.annual_worth_constant),
                "present_worth": _list(self.present_worth),
                "depreciation_method": self.method, "tax_basis": _r(self.basis, 2),
                "book_value_today": _r(self.book_value_0, 2),
                "initial_outlay": _r(self.initial, 2),
                "depreciation": _list(self.allowance, 2),
                "book_value_at_disposal": _list(self.book_value, 2),
                "after_tax_disposal": _list(self.disposal, 2),
                "cash_flows": [tab.to_json() for tab in self.tables]}


@dataclass(frozen=True)
class AfterTaxResult:
    """The after-tax study: rates, each alternative, options and both recommendations."""

    tax_rate: float
    after_tax_marr: float
    rate: float
    discount_rate: float
    money: str
    description: str
    alternatives: tuple[AfterTaxAlternative, ...]
    recommendation: Recommendation
    before_tax_recommendation: Recommendation
    study_period_options: tuple[StudyOption, ...]
    before_tax_study_period_options: tuple[StudyOption, ...]

    def alternative(self, name: str) -> AfterTaxAlternative:
        for alt in self.alternatives:
            if alt.name == name:
                return alt
        raise KeyError(name)

    def to_json(self) -> dict[str, Any]:
        return {"tax_rate": self.tax_rate, "after_tax_marr": self.after_tax_marr,
                "rate_used": _r(self.rate, 10), "discount_rate": _r(self.discount_rate, 10),
                "money": self.money, "conventions": self.description,
                "alternatives": [{"name": a.name, "role": a.role,
                                  "economic_life": a.economic_life,
                                  "annual_worth_at_economic_life":
                                      _r(a.annual_worth_at_economic_life),
                                  "rank": a.rank} for a in self.alternatives],
                "recommendation": self.recommendation.to_json(),
                "study_period_options": [o.to_json() for o in self.study_period_options],
                "before_tax_study_period_options":
                    [o.to_json() for o in self.before_tax_study_period_options]}

    def format_text(self) -> str:
        from core.report import table
        from core.study import money, years

        out = [f"After tax: effective tax rate {self.tax_rate:.2%}, after-tax MARR "
               f"{self.after_tax_marr:.2%}; AW in {self.money}.", self.description]
        for alt in self.alternatives:
            rows = []
            for k in range(len(alt.annual_worth)):
                mark = " *" if k + 1 == alt.economic_life else ""
                rows.append([f"{k + 1}{mark}", money(alt.allowance[k]), money(alt.book_value[k]),
                             money(alt.disposal[k]), money(alt.present_worth[k]),
                             money(alt.annual_worth[k])])
            price = "market value today" if alt.role == "defender" else "first cost"
            out += ["", f"After tax, {alt.role} {alt.name} ({alt.method}, tax basis "
                        f"{money(alt.basis)}, book value today {money(alt.book_value_0)}; "
                        f"year-0 outlay after tax {money(alt.initial)}, from its {price})",
                    table(["year k", "depreciation D_k", "book value at disposal",
                           "after-tax disposal", "PW_k", "AW_k"], rows),
                    f"(* after-tax economic service life: {years(alt.economic_life)}, AW "
                    f"{money(alt.annual_worth_at_economic_life)})"]
            tab = alt.tables[alt.economic_life - 1]
            out += [f"After-tax cash flows of keeping {alt.name} {years(tab.retention)}:",
                    table(["year", "before tax", "disposal", "depreciation", "book value",
                           "taxable income", "tax", "net"],
                          [[str(j), money(tab.before_tax[j]), money(tab.disposal[j]),
                            money(tab.depreciation[j]), money(tab.book_value[j]),
                            money(tab.taxable_income[j]), money(tab.tax[j]), money(tab.net[j])]
                           for j in range(tab.retention + 1)])]
        ranked = sorted(self.alternatives, key=lambda a: a.rank)
        out += ["", "After-tax ranking at each economic service life:",
                table(["rank", "alternative", "role", "ESL (years)", "AW at ESL"],
                      [[str(a.rank), a.name, a.role, str(a.economic_life),
                        money(a.annual_worth_at_economic_life)] for a in ranked])]
        if self.study_period_options:
            out += ["", "After-tax study-period options:",
                    table(["defender years", "then challenger", "challenger years", "AW",
                           "feasible"],
                          [[str(o.defender_years), o.challenger or "-", str(o.challenger_years),
                            money(o.annual_worth) if o.annual_worth is not None else "-",
                            "yes" if o.feasible else f"no: {o.reason}"]
                           for o in self.study_period_options])]
        bt = self.before_tax_recommendation
        out += ["", f"Before-tax recommendation: {bt.action.upper()}. {bt.reason}"]
        return "\n".join(out)


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


def _alternative(study: Study, alt: Alternative, t: float, discount: float, decision: float,
                 report: float) -> tuple[AfterTaxAlternative, dict[str, Any]]:
    price, S, C = infl.then_current_arrays(study, alt)
    sched = dep.alternative_schedule(alt)
    defender = alt.role == "defender"
    s = after_tax_annual_worth(price, S, C, sched.allowance, sched.book_value_0, t, discount,
                               disposal_fraction=sched.disposal_fraction, defender=defender)
    k = np.arange(1, alt.max_life + 1)
    aw_decision = s.present_worth * ap(decision, k)
    aw_report = s.present_worth * ap(report, k)
    esl = int(economic_life(aw_decision))
    tables = tuple(cash_flow_table(j, price, S, C, sched, t, defender)
                   for j in range(1, alt.max_life + 1))
    out = AfterTaxAlternative(
        name=alt.name, role=alt.role, method=alt.depreciation.method if alt.depreciation else "",
        basis=float(sched.basis), book_value_0=float(sched.book_value_0),
        initial=float(s.initial), allowance=sched.allowance, book_value=s.book_value,
        disposal=s.disposal, present_worth=s.present_worth, annual_worth=aw_report,
        annual_worth_constant=aw_decision, economic_life=esl,
        annual_worth_at_economic_life=float(aw_report[esl - 1]), tables=tables)
    return out, {"price": price, "S": S, "C": C, "sched": sched}


def _conventions(study: Study) -> str:
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


def analyse(study: Study, result: StudyResult) -> StudyResult:
    """Add the after-tax study to ``result`` and make its recommendation the one given.

    Sets each ``AlternativeResult.after_tax`` (an ``AfterTaxAlternative``),
    ``result.after_tax`` (an ``AfterTaxResult``) and replaces
    ``recommendation`` (basis "after-tax") and ``study_period_options`` with
    the after-tax ones; ``before_tax_recommendation`` keeps the before-tax one.
    """
    from core.study import decide, solve_replacement_value

    if study.tax is None:
        return result
    t = float(study.tax.rate)
    decision, discount, report = rates(study)
    built = {alt.name: _alternative(study, alt, t, discount, decision, report)
             for alt in study.alternatives}
    aw = {name: b[0].annual_worth_constant for name, b in built.items()}
    d_alt = study.defender
    d_in = built[d_alt.name][1]
    k = np.arange(1, d_alt.max_life + 1)

    # The replacement-value search asks for the defender's best AW at many trial market
    # values; only the year-0 term depends on it, so the rest of after_tax_annual_worth
    # is computed once (same operations in the same order: the same numbers).
    sc = d_in["sched"]
    running, tail = _after_tax_parts(d_in["S"], d_in["C"], sc.allowance, sc.book_value_0, t,
                                     discount, sc.disposal_fraction)
    ap_k = ap(decision, k)
    b0, t_arr = np.asarray(sc.book_value_0, dtype=float), np.asarray(t, dtype=float)

    def defender_best(mv: float) -> float:
        p = np.asarray(mv, dtype=float)
        initial = p - t_arr * (p - b0)
        return float(np.max((-initial[..., None] + running + tail) * ap_k))

    def rv(target: float) -> float | None:
        return solve_replacement_value(defender_best, target, float(d_alt.price))

    rec, options, _ = decide(study, aw, decision, "after-tax", rv)
    order = sorted(aw, key=lambda n: -round(float(aw[n][built[n][0].economic_life - 1]), 2))
    alts = {name: dataclasses.replace(b[0], rank=order.index(name) + 1)
            for name, b in built.items()}
    summary = AfterTaxResult(
        tax_rate=t, after_tax_marr=float(study.tax.after_tax_marr), rate=decision,
        discount_rate=discount, money=infl.money_label(study), description=_conventions(study),
        alternatives=tuple(alts[a.name] for a in study.alternatives), recommendation=rec,
        before_tax_recommendation=result.before_tax_recommendation,
        study_period_options=tuple(options),
        before_tax_study_period_options=result.study_period_options)
    new_alts = tuple(dataclasses.replace(a, after_tax=alts[a.name]) for a in result.alternatives)
    return dataclasses.replace(result, alternatives=new_alts, recommendation=rec,
                               study_period_options=tuple(options), after_tax=summary)
