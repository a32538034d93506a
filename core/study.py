"""The replacement study (docs/method.md §3): ESLs, the decision, study-period options, replacement value.

``run_study`` is the one entry point; ``decide`` holds the decision rules and
works from AW arrays alone, so the after-tax analysis reuses it unchanged.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence

import numpy as np

from core.annual_worth import annual_worth_schedule, economic_life
from core.errors import StudyError
from core.estimates import Alternative, Study
from core.factors import ap, pa, pf
from core.results import AlternativeResult, Basis, Recommendation, StudyOption, StudyResult
from core.studyfile import fingerprint

CENT = 0.005


def money(x: float) -> str:
    """Format an amount for a sentence: thousands separators, no decimals, minus sign kept.

    >>> money(-12345.6), money(0.4)
    ('-12,346', '0')
    """
    value = round(float(x))
    return f"{value:,.0f}" if value != 0 else "0"


def years(n: int) -> str:
    """'1 year', '3 years'.

    >>> years(1), years(4)
    ('1 year', '4 years')
    """
    return f"{n} year" if n == 1 else f"{n} years"


def study_rate(study: Study) -> float:
    """The interest rate the before-tax study discounts at (the MARR; see core.inflation)."""
    if study.inflation is not None:
        from core import inflation

        return inflation.before_tax_rate(study)
    return study.marr


def alternative_arrays(study: Study, alt: Alternative) -> tuple[float, np.ndarray, np.ndarray]:
    """(price, S_1..S_n, C_j + X_j) in the money the study discounts in."""
    if study.inflation is not None:
        from core import inflation

        return inflation.before_tax_arrays(study, alt)
    return alt.price, alt.market_value_array(), alt.cost_array()


def keep_values(defender_aw: np.ndarray, challenger_aw: float | np.ndarray,
                rate: float | np.ndarray) -> np.ndarray:
    """Worth of keeping the defender j = 0..n years, then the challenger repeated forever,
    relative to replacing now:  V_j = PW_D(j) - AW_c (P/A,i,j),  V_0 = 0.

    Vectorised over leading batch dimensions: ``defender_aw`` (..., n) with
    ``challenger_aw`` and ``rate`` (...) gives (..., n + 1) (the capital plan values a
    whole fleet at once; NaN padding stays NaN).

    >>> keep_values(np.array([-100.0, -120.0]), -110.0, 0.0).round(2).tolist()
    [0.0, 10.0, -20.0]
    >>> keep_values(np.array([[-100.0], [-90.0]]), np.array([-110.0, -80.0]), 0.0).tolist()
    [[0.0, 10.0], [0.0, -10.0]]
    """
    d = np.asarray(defender_aw, dtype=float)
    years = np.arange(1, d.shape[-1] + 1)
    c = np.asarray(challenger_aw, dtype=float)
    i = np.asarray(rate, dtype=float)
    if d.ndim > 1:
        c, i = c[..., None], i[..., None]
    factor = pa(i, years)
    pw = d * factor
    return np.concatenate([np.zeros(d.shape[:-1] + (1,)), pw - c * factor], axis=-1)


def study_period_options(study: Study, aw: Mapping[str, np.ndarray], rate: float,
                         period: int) -> list[StudyOption]:
    """Every "keep the defender j years, then challenger c for T-j years" option.

    AW_option = [PW_D(j) + (P/F,i,j) PW_c(T-j)] (A/P,i,T), PW_x(k) = AW_x,k (P/A,i,k).
    """
    defender = study.defender
    d_aw = aw[defender.name]
    options: list[StudyOption] = []

    def pw_d(j: int) -> float:
        return 0.0 if j == 0 else float(d_aw[j - 1] * pa(rate, j))

    last_j = min(defender.max_life, period)
    for j in range(0, last_j + 1):
        rest = period - j
        if rest == 0:
            value = pw_d(j) * float(ap(rate, period))
            options.append(StudyOption(j, None, 0, value, True,
                                       f"keep {defender.name} for the whole study period"))
            continue
        for ch in study.challengers:
            if rest > ch.max_life:
                options.append(StudyOption(
                    j, ch.name, rest, None, False,
                    f"{ch.name} lasts at most {ch.max_life} years; {rest} are needed"))
                continue
            pw_c = float(aw[ch.name][rest - 1] * pa(rate, rest))
            value = (pw_d(j) + float(pf(rate, j)) * pw_c) * float(ap(rate, period))
            options.append(StudyOption(j, ch.name, rest, value, True, ""))
    if defender.max_life < period:
        options.append(StudyOption(
            period, None, 0, None, False,
            f"{defender.name} lasts at most {defender.max_life} years; {period} are needed"))
    return options


def _best_challenger(study: Study, aw_at_esl: Mapping[str, float]) -> str:
    best = study.challengers[0].name
    for ch in study.challengers[1:]:
        if round(aw_at_esl[ch.name], 2) > round(aw_at_esl[best], 2):
            best = ch.name
    return best


def no_period_recommendation(study: Study, best: str, esl: Mapping[str, int],
                             aw_at_esl: Mapping[str, float], rv: float | None, planned: int,
                             check: dict, basis: Basis = "before-tax") -> Recommendation:
    """Keep or replace without a study period: the best challenger at its ESL against the
    defender at its ESL (replace only when better by more than a cent), with its sentence."""
    d_name = study.defender.name
    c_aw, d_best = aw_at_esl[best], aw_at_esl[d_name]
    tag = " (after tax)" if basis == "after-tax" else ""
    if round(c_aw, 2) > round(d_best, 2):
        reason = (f"Replace {d_name} now with {best}: its equivalent annual cost{tag} of "
                  f"{money(-c_aw)} over its economic life of {years(esl[best])} is "
                  f"{money(c_aw - d_best)} a year less than the defender's best, "
                  f"{money(-d_best)} over {years(esl[d_name])}.")
        return Recommendation("replace", best, None, rv, basis, reason, best, 0, check)
    reason = (f"Keep {d_name}: its equivalent annual cost{tag} of {money(-d_best)} over "
              f"its best remaining life of {years(esl[d_name])} is "
              f"{money(d_best - c_aw)} a year less than the best challenger, {best} "
              f"({money(-c_aw)} over {years(esl[best])}); keep it next year only while its "
              f"marginal cost stays below {money(-c_aw)}, and restudy each year.")
    return Recommendation("keep", None, None, rv, basis, reason, best, max(planned, 1), check)


def decide(study: Study, aw: Mapping[str, np.ndarray], rate: float, basis: Basis,
           replacement_value: Callable[[float], float | None] | None = None,
           ) -> tuple[Recommendation, list[StudyOption], dict[str, int]]:
    """The recommendation from each alternative's AW array (docs/method.md §3).

    No study period: the best challenger at its ESL against the defender at its
    ESL; replace now only if the challenger is better by more than a cent.  The
    one-more-year check compares the defender's marginal cost next year
    (MC_1 = -AW_D,1) with the best challenger's EAC.  ``planned_defender_years``
    is the j maximising ``keep_values`` (the year to replace under today's
    estimates).  With a study period the best feasible option wins.

    Returns the recommendation, the study-period options and each ESL.
    """
    esl = {name: int(economic_life(values)) for name, values in aw.items()}
    aw_at_esl = {name: float(aw[name][esl[name] - 1]) for name in aw}
    defender = study.defender
    d_name = defender.name
    best = _best_challenger(study, aw_at_esl)
    c_aw = aw_at_esl[best]
    rv = replacement_value(c_aw) if replacement_value is not None else None

    values = keep_values(aw[d_name], c_aw, rate)
    planned = int(np.argmax(np.round(values, 2)))
    mc_next = -float(aw[d_name][0])
    keep_next = mc_next < -c_aw - CENT
    check = {"year": 1, "defender_marginal_cost": mc_next,
             "challenger_annual_cost": -c_aw, "keep_next_year": bool(keep_next)}
    tag = " (after tax)" if basis == "after-tax" else ""
    options: list[StudyOption] = []
    period = study.study_period
    if period is None:
        rec = no_period_recommendation(study, best, esl, aw_at_esl, rv, planned, check, basis)
        return rec, options, esl

    options = study_period_options(study, aw, rate, period)
    feasible = [o for o in options if o.feasible and o.annual_worth is not None]
    if not feasible:
        raise StudyError("study_period", f"no option fills {years(period)}: the defender lasts "
                         f"at most {years(defender.max_life)} and no challenger covers the rest")
    top = feasible[0]
    for option in feasible[1:]:
        if round(option.annual_worth, 2) > round(top.annual_worth, 2):
            top = option
    if top.challenger is None:
        reason = (f"Keep {d_name} for the whole {period}-year study period: that option's "
                  f"annual worth{tag} of {money(top.annual_worth)} is the best of "
                  f"{len(feasible)} feasible options.")
        rec = Recommendation("keep", None, period, rv, basis, reason, best, period, check, period)
    elif top.defender_years == 0:
        reason = (f"Replace {d_name} now with {top.challenger} for the {period}-year study "
                  f"period: annual worth{tag} {money(top.annual_worth)}, the best of "
                  f"{len(feasible)} feasible options.")
        rec = Recommendation("replace", top.challenger, 0, rv, basis, reason, best, 0, check,
                             period)
    else:
        reason = (f"Keep {d_name} {top.defender_years} more year"
                  f"{'s' if top.defender_years != 1 else ''}, then replace it with "
                  f"{top.challenger} for the remaining {top.challenger_years} years of the "
                  f"{period}-year study period: annual worth{tag} {money(top.annual_worth)}, "
                  f"the best of {len(feasible)} feasible options.")
        rec = Recommendation("keep", top.challenger, top.defender_years, rv, basis, reason,
                             best, top.defender_years, check, period)
    return rec, options, esl


def solve_replacement_value(best_aw: Callable[[float], float], target: float,
                            start: float) -> float | None:
    """The price P at which ``best_aw(P) == target`` (brentq on a decreasing function).

    >>> round(solve_replacement_value(lambda p: -0.2 * p - 100.0, -300.0, 0.0), 6)
    1000.0
    """
    from scipy.optimize import brentq  # imported here: scipy is slow to load at start-up

    def gap(p: float) -> float:
        return best_aw(p) - target

    scale = max(abs(start), abs(target), 1000.0)
    lo, hi = start - scale, start + scale
    for _ in range(60):
        if gap(lo) > 0 > gap(hi):
            break
        lo -= scale
        hi += scale
        scale *= 2.0
    else:
        return None
    return float(brentq(gap, lo, hi, xtol=1e-6, rtol=1e-12, maxiter=200))


def _warnings(study: Study, arrays: Mapping[str, tuple[float, np.ndarray, np.ndarray]]
              ) -> list[str]:
    notes = []
    for alt in study.alternatives:
        price, s, c = arrays[alt.name]
        if alt.role == "defender" and price < 0:
            notes.append(f"{alt.name}: market value today is negative (a net removal cost).")
        negative = [k + 1 for k, v in enumerate(s) if v < 0]
        if negative:
            notes.append(f"{alt.name}: market value is negative in year(s) "
                         f"{', '.join(map(str, negative))} (a net removal cost).")
        if np.any(c < 0):
            notes.append(f"{alt.name}: some yearly costs are negative (net income).")
    if study.marr < 0:
        notes.append("MARR is negative.")
    return notes


def run_study(study: Study) -> StudyResult:
    """Compute every AW, ESL, the recommendation, study-period options and the replacement value.

    >>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
    >>> d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
    ...                 OperatingCosts(first=9000.0, gradient=2500.0))
    >>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
    ...                 OperatingCosts(first=3000.0, gradient=500.0))
    >>> r = run_study(Study("Press line", 0.10, d, (c,)))
    >>> r.recommendation.action, r.defender.economic_life, r.challengers[0].economic_life
    ('replace', 1, 8)
    >>> round(r.recommendation.replacement_value, 2)
    18062.4
    """
    if not study.challengers:
        raise StudyError("challengers", "a study needs at least one challenger")
    rate = study_rate(study)
    arrays = {alt.name: alternative_arrays(study, alt) for alt in study.alternatives}
    schedules = {name: annual_worth_schedule(p, s, c, rate) for name, (p, s, c) in arrays.items()}
    aw = {name: sch.annual_worth for name, sch in schedules.items()}
    defender = study.defender
    d_price, d_s, d_c = arrays[defender.name]

    def defender_best(price: float) -> float:
        return float(np.max(annual_worth_schedule(price, d_s, d_c, rate).annual_worth))

    def rv(target: float) -> float | None:
        return solve_replacement_value(defender_best, target, d_price)

    rec, options, esl = decide(study, aw, rate, "before-tax", rv)
    aw_at_esl = {n: float(aw[n][esl[n] - 1]) for n in aw}
    order = sorted(aw, key=lambda n: -round(aw_at_esl[n], 2))
    results = []
    for alt in study.alternatives:
        sch = schedules[alt.name]
        results.append(AlternativeResult(
            name=alt.name, role=alt.role, price=float(arrays[alt.name][0]),
            max_life=alt.max_life, market_values=arrays[alt.name][1],
            operating_costs=alt.operating_cost_array(), extra_costs=alt.extra_cost_array(),
            annual_worth=sch.annual_worth, capital_recovery=sch.capital_recovery,
            operating=sch.operating, marginal_cost=sch.marginal_cost,
            economic_life=esl[alt.name], annual_worth_at_economic_life=aw_at_esl[alt.name],
            rank=order.index(alt.name) + 1))
    result = StudyResult(study=study, rate=rate, alternatives=tuple(results),
                         recommendation=rec, before_tax_recommendation=rec,
                         study_period_options=tuple(options),
                         warnings=tuple(_warnings(study, arrays)),
                         fingerprint=fingerprint(study))
    if study.inflation is not None:
        from core import inflation

        result = inflation.restate(study, result)  # report AW in the money the study states
    if study.tax is not None:
        from core import aftertax

        result = aftertax.analyse(study, result)
    if study.uncertainty is not None:
        from core import risk

        result = risk.analyse(study, result)
    from core import technology

    return technology.analyse(study, result)


def run_studies(studies: Sequence[Study]) -> list[StudyResult]:
    """``run_study`` for each study, in order."""
    return [run_study(s) for s in studies]
