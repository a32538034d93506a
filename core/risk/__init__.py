"""Risk analysis of the replacement decision (docs/method.md §12, ``uncertainty`` and ``risk``).

``run_risk`` is what ``core.study.run_studies`` calls for a study with an ``uncertainty``
block (the window calls it with progress and cancel callbacks).  See ``core.risk.engine``
for how inputs move the cash flows and ``core.risk.distributions`` for the distributions
and their bounds.  The records (``RiskResult`` ...) live in ``core.results``.
"""

from __future__ import annotations

from core.results import RiskResult, Simulation, TornadoBar, TwoWayMap
from core.risk.analysis import (
    RiskCancelled,
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
from core.risk.engine import Model, Outcome, perturbed_study

__all__ = [
    "Model", "Outcome", "RiskCancelled", "RiskResult", "Simulation", "TornadoBar", "TwoWayMap",
    "breakeven", "draw_inputs", "perturbed_study", "resolve_seed", "run_risk", "search_range",
    "simulate", "tornado", "two_way_map", "validate",
]
