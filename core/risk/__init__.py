"""Risk analysis of the replacement decision (docs/method.md §5-6, ``uncertainty`` and ``risk``).

``analyse(study, result)`` is the engine hook (``core.study.run_study`` calls it
when the study has an ``uncertainty`` block); it returns the result with
``risk`` set to a ``RiskResult``.  The window uses ``run_risk`` with progress
and cancel callbacks.  See ``core.risk.engine`` for how inputs move the cash
flows and ``core.risk.distributions`` for the distributions and their bounds.
"""

from __future__ import annotations

from dataclasses import replace

from core.estimates import Study
from core.results import StudyResult
from core.risk.analysis import (
    RiskCancelled,
    RiskResult,
    Simulation,
    TornadoBar,
    TwoWayMap,
    breakeven,
    draw_inputs,
    resolve_seed,
    run_risk,
    search_range,
    simulate,
    tornado,
    two_way_map,
    validate,
)
from core.risk.engine import Model, Outcome, annual_worth_batch, perturbed_study

__all__ = [
    "Model", "Outcome", "RiskCancelled", "RiskResult", "Simulation", "TornadoBar", "TwoWayMap",
    "analyse", "annual_worth_batch", "breakeven", "draw_inputs", "perturbed_study",
    "resolve_seed", "run_risk", "search_range", "simulate", "tornado", "two_way_map", "validate",
]


def analyse(study: Study, result: StudyResult) -> StudyResult:
    """``result`` with ``risk`` set: Monte Carlo, tornado, breakevens and the two-way map."""
    risk = run_risk(study, best_challenger=result.recommendation.best_challenger)
    return replace(result, risk=risk)
