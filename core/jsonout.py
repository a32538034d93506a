"""The JSON objects of study results (docs/method.md §6): ``tenure study --json``, the
workbook's stored results and the export read these.

Money is rounded to 4 decimals in arrays and AW figures, to 2 in the recommendation and
the after-tax money figures; rates to 10.  The keys are a public format: keep them.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator, Sequence
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from core.results import (
    AlternativeResult,
    CashFlowTable,
    OneMoreYear,
    Recommendation,
    RiskResult,
    StudyOption,
    StudyResult,
    TechnologyPlan,
)


def _r(x: float | None, digits: int = 4) -> float | None:
    return None if x is None else round(float(x), digits)


def _f(x: float | None, digits: int) -> float | None:
    """Rounded, None when missing or not finite (the risk figures)."""
    if x is None or not math.isfinite(x):
        return None
    return round(float(x), digits)


def _list(a: ArrayLike, digits: int = 4) -> list[float]:
    """``[round(float(v), digits) for v in a]``, vectorised.

    np.round (x * 10^d, rint, / 10^d) gives the same double as Python's correctly rounded
    ``round`` unless x * 10^d lies within a few ulps of a half (or beyond 2^52), so those
    few elements are rounded by Python.

    >>> _list(np.array([41943.78005, -29413.33365, 0.123456, 2.5e12]))
    [41943.7801, -29413.3337, 0.1235, 2500000000000.0]
    """
    x = np.asarray(a, dtype=float).ravel()
    scaled = x * 10.0**digits
    values = np.round(x, digits).tolist()
    tolerance = 4.0 * np.abs(np.spacing(scaled))
    risky = ~(np.abs(scaled - np.floor(scaled) - 0.5) > tolerance) | ~(np.abs(scaled) < 2.0**52)
    for k in np.flatnonzero(risky).tolist():
        values[k] = round(float(x[k]), digits)
    return values


def option_json(o: StudyOption) -> dict[str, Any]:
    return {"defender_years": o.defender_years, "challenger": o.challenger,
            "challenger_years": o.challenger_years,
            "annual_worth": _r(o.annual_worth), "feasible": o.feasible,
            "reason": o.reason}


def one_more_year_json(check: OneMoreYear) -> dict[str, Any]:
    return {"year": check.year,
            "defender_marginal_cost": _r(check.defender_marginal_cost, 2),
            "challenger_annual_cost": _r(check.challenger_annual_cost, 2),
            "keep_next_year": check.keep_next_year}


def recommendation_json(rec: Recommendation) -> dict[str, Any]:
    return {"action": rec.action, "challenger": rec.challenger,
            "defender_years": rec.defender_years,
            "replacement_value": _r(rec.replacement_value, 2),
            "basis": rec.basis, "reason": rec.reason,
            "best_challenger": rec.best_challenger,
            "planned_defender_years": rec.planned_defender_years,
            "study_period": rec.study_period,
            "one_more_year": one_more_year_json(rec.one_more_year)}


def cash_flow_json(tab: CashFlowTable) -> dict[str, Any]:
    return {"retention": tab.retention,
            "rows": [{"year": j, "before_tax": _r(tab.before_tax[j], 2),
                      "disposal": _r(tab.disposal[j], 2),
                      "depreciation": _r(tab.depreciation[j], 2),
                      "book_value": _r(tab.book_value[j], 2),
                      "taxable_income": _r(tab.taxable_income[j], 2),
                      "tax": _r(tab.tax[j], 2), "net": _r(tab.net[j], 2)}
                     for j in range(tab.retention + 1)]}


def after_tax_alternative_json(alt: AlternativeResult) -> dict[str, Any]:
    """The ``after_tax`` object of one alternative (``alt`` from ``result.after_tax``)."""
    tax = alt.tax
    assert tax is not None
    return {"annual_worth": _list(alt.annual_worth),
            "economic_life": int(alt.economic_life),
            "annual_worth_at_economic_life": _r(alt.annual_worth_at_economic_life),
            "rank": alt.rank,
            "annual_worth_constant_money": _list(alt.annual_worth_constant),
            "present_worth": _list(alt.present_worth),
            "depreciation_method": tax.method, "tax_basis": _r(tax.tax_basis, 2),
            "book_value_today": _r(tax.book_value_0, 2),
            "initial_outlay": _r(tax.initial, 2),
            "depreciation": _list(tax.allowance, 2),
            "book_value_at_disposal": _list(tax.book_value, 2),
            "after_tax_disposal": _list(tax.disposal, 2),
            "cash_flows": [cash_flow_json(t) for t in tax.tables]}


#: The arrays of a before-tax alternative, by JSON key (in the order written).
_ARRAYS = (("annual_worth", "annual_worth"), ("capital_recovery", "capital_recovery"),
           ("operating_annual_worth", "operating"), ("marginal_cost", "marginal_cost"),
           ("market_values", "market_values"), ("operating_costs", "operating_costs"),
           ("extra_costs", "extra_costs"))


def _rounded_lists(alts: Sequence[AlternativeResult]) -> list[dict[str, list[float]]]:
    """``_list`` of every array of every alternative, rounded in one pass per key (one numpy
    pass over a fleet instead of some hundred thousand small ones), then cut apart."""
    if not alts:
        return []
    lives = [a.max_life for a in alts]
    ends = np.cumsum(lives).tolist()
    starts = [0] + ends[:-1]
    out: list[dict[str, list[float]]] = [{} for _ in alts]
    for key, field in _ARRAYS:
        arrays = [getattr(a, field) for a in alts]
        flat = _list(np.concatenate([np.asarray(x, dtype=float) for x in arrays]))
        for k, (lo, hi) in enumerate(zip(starts, ends, strict=True)):
            out[k][key] = flat[lo:hi]
    return out


def _alternative_json(alt: AlternativeResult, lists: dict[str, list[float]],
                      after_tax: AlternativeResult | None) -> dict[str, Any]:
    out: dict[str, Any] = {
        "name": alt.name,
        "role": alt.role,
        "annual_worth": lists["annual_worth"],
        "economic_life": int(alt.economic_life),
        "annual_worth_at_economic_life": _r(alt.annual_worth_at_economic_life),
        "rank": alt.rank,
    }
    for key, _ in _ARRAYS[1:]:
        out[key] = lists[key]
    if after_tax is not None:
        out["after_tax"] = after_tax_alternative_json(after_tax)
    return out


def alternative_json(alt: AlternativeResult,
                     after_tax: AlternativeResult | None = None) -> dict[str, Any]:
    """One before-tax alternative (with its after-tax object when the study has tax)."""
    return _alternative_json(alt, _rounded_lists([alt])[0], after_tax)


def study_json(result: StudyResult) -> dict[str, Any]:
    """The docs/method.md §6 object of one study (plus a few extra, clearly named keys)."""
    return study_jsons([result])[0]


def study_jsons(results: Sequence[StudyResult]) -> list[dict[str, Any]]:
    """``study_json`` of each result, the arrays of all of them rounded in one pass."""
    lists = iter(_rounded_lists([a for r in results for a in r.before_tax.alternatives]))
    return [_study_json(r, lists) for r in results]


def _study_json(result: StudyResult, lists: Iterator[dict[str, list[float]]]
                ) -> dict[str, Any]:
    after = result.after_tax
    decision = result.decision
    alts = [_alternative_json(a, next(lists),
                              after.alternatives[k] if after is not None else None)
            for k, a in enumerate(result.before_tax.alternatives)]
    out: dict[str, Any] = {
        "title": result.study.title,
        "fingerprint": result.fingerprint,
        "marr": result.study.marr,
        "rate_used": _r(result.before_tax.rate, 10),
        "study_period": result.study.study_period,
        "alternatives": alts,
        "recommendation": recommendation_json(decision.recommendation),
        "study_period_options": [option_json(o) for o in decision.study_period_options],
        "warnings": list(result.warnings),
    }
    if after is not None:
        out["before_tax_recommendation"] = recommendation_json(result.before_tax.recommendation)
    if result.risk is not None:
        out["risk"] = risk_json(result.risk)
    if result.technology is not None:
        out["technology_plan"] = technology_json(result.technology)
    return out


def technology_json(plan: TechnologyPlan) -> dict[str, Any]:
    """The ``technology_plan`` object of a study (docs/method.md §6, §11)."""
    return {"horizon": plan.horizon, "present_worth": _f(plan.present_worth, 2),
            "annual_worth": _f(plan.annual_worth, 2), "first_action": plan.first_action,
            "policy": [{"year": s.year, "action": s.action, "challenger": s.challenger,
                        "vintage": s.vintage, "age_after": s.age_after} for s in plan.policy],
            "best_replace_now_present_worth": _f(plan.best_replace_now_present_worth, 2),
            "best_wait_present_worth": _f(plan.best_wait_present_worth, 2),
            "no_change_present_worth": _f(plan.no_change_present_worth, 2)}


def risk_json(risk: RiskResult) -> dict[str, Any]:
    """The ``risk`` object of a study (docs/method.md §12)."""
    sim = risk.simulation
    counts, edges = risk.histogram()
    summary = risk.difference_summary()
    out: dict[str, Any] = {
        "basis": risk.basis,
        "trials": sim.trials,
        "seed": sim.seed,
        "decision_rule": risk.decision_rule,
        "probability_replace": _f(risk.probability_replace, 6),
        "probability_replace_standard_error": _f(sim.probability_standard_error, 6),
        "base_case": {"action": risk.base_action,
                      "annual_worth_difference": _f(risk.base_difference, 2)},
        "annual_worth_difference": {k: _f(v, 2) for k, v in summary.items()},
        "annual_worth_difference_histogram": {
            "bin_edges": [round(float(e), 2) for e in edges],
            "counts": [int(c) for c in counts]},
        "economic_life_distribution": {
            name: {str(k + 1): c for k, c in enumerate(row)}
            for name, row in risk.economic_life_counts().items()},
        "best_challenger_distribution": risk.best_challenger_counts(),
        "inputs": [{"input": s.address, "distribution": s.distribution.kind,
                    "parameters": list(s.distribution.params), "estimate": s.estimate,
                    "mean": _f(s.mean, 6), "p10": _f(s.p10, 6), "p90": _f(s.p90, 6),
                    "physical_range": s.bounds} for s in risk.inputs],
        "tornado": [{"input": b.address, "low_value": _f(b.low_value, 6),
                     "high_value": _f(b.high_value, 6),
                     "annual_worth_difference_at_low": _f(b.difference_at_low, 2),
                     "annual_worth_difference_at_high": _f(b.difference_at_high, 2),
                     "swing": _f(b.swing, 2)} for b in risk.tornado],
        "breakeven": {k: _f(v, 8) for k, v in risk.breakeven.items()},
        "breakeven_search_range": {k: [_f(lo, 8), _f(hi, 8)]
                                   for k, (lo, hi) in risk.breakeven_ranges.items()},
        "notes": list(risk.notes),
    }
    if risk.two_way is not None:
        m = risk.two_way
        out["two_way"] = {
            "x_input": m.x_input, "x_estimate": _f(m.x_estimate, 6),
            "x_values": [_f(v, 6) for v in m.x_values],
            "y_input": m.y_input, "y_estimate": _f(m.y_estimate, 6),
            "y_values": [_f(v, 6) for v in m.y_values],
            "annual_worth_difference": [[_f(v, 2) for v in row] for row in m.difference],
            "replace": [[bool(v) for v in row] for row in m.replace]}
    return out


def dumps_compact(doc: dict[str, Any]) -> str:
    return json.dumps(doc, ensure_ascii=False, allow_nan=False)


def studies_json_text(results: Sequence[StudyResult]) -> str:
    """The §6 objects of ``results`` as compact JSON texts joined by ",\\n" (one study a
    line: the indenting encoder is pure Python, ~5x slower)."""
    return ",\n".join(dumps_compact(d) for d in study_jsons(results))
