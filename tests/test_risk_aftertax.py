"""Risk analysis on the after-tax basis and with inflation: the vectorised trials against
a naive loop of core.study.run_study on perturbed studies (same draws)."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from test_risk import BASE, INPUTS  # tests/ is on sys.path (pytest rootdir insertion)

from core import risk
from core.jsonout import risk_json
from core.study import run_study
from core.studyfile import parse_study


def make(tax=True, inflation=None, period=None, trials=25):
    obj = copy.deepcopy(BASE)
    obj["defender"]["depreciation"] = {"method": "straight_line", "basis": 50000, "years": 8,
                                       "age": 3}
    obj["challengers"][0]["depreciation"] = {"method": "macrs", "class": 7}
    obj["challengers"][1]["depreciation"] = {"method": "declining_balance", "years": 10,
                                             "rate": 0.2}
    if tax:
        obj["tax"] = {"rate": 0.25, "after_tax_marr": 0.07}
    if inflation:
        obj["inflation"] = inflation
    obj["study_period"] = period
    obj["uncertainty"] = {"trials": trials, "seed": 11, "inputs": INPUTS}
    return parse_study(obj)


CASES = [
    (True, None, None),
    (True, None, 8),
    (True, {"rate": 0.03, "estimates": "then-current"}, None),
    (False, {"rate": 0.03, "estimates": "then-current"}, None),
    (False, {"rate": 0.03, "estimates": "constant"}, 8),
]


@pytest.mark.parametrize(("tax", "inflation", "period"), CASES)
def test_trials_match_naive_run_study(tax, inflation, period):
    study = make(tax, inflation, period)
    sim = risk.simulate(study)
    draws = risk.draw_inputs(study, study.uncertainty.trials, 11)
    for t in range(study.uncertainty.trials):
        case = risk.perturbed_study(study, {a: float(v[t]) for a, v in draws.items()})
        res = run_study(case)
        rec = res.recommendation
        assert sim.replace[t] == (rec.action == "replace" and rec.defender_years in (None, 0))
        for alt in res.decision.alternatives:
            assert sim.economic_life[alt.name][t] == alt.economic_life
        if tax and period is None:
            aw = {a.name: a.annual_worth_constant[a.economic_life - 1]
                  for a in res.after_tax.alternatives}
            best = max(aw[c.name] for c in res.challengers)
            assert sim.difference[t] == pytest.approx(best - aw[res.defender.name], abs=1e-6)


def test_after_tax_basis_is_stated_and_breakevens_hold():
    study = make(trials=300)
    res = run_study(study)
    out = risk_json(res.risk)
    assert out["basis"] == "after-tax"
    assert res.risk.base_action == res.recommendation.action
    checked = 0
    for address, value in res.risk.breakeven.items():
        if value is None:
            continue
        r = run_study(risk.perturbed_study(study, {address: value}))
        aw = {a.name: a.annual_worth_constant[a.economic_life - 1]
              for a in r.after_tax.alternatives}
        gap = max(aw[c.name] for c in r.challengers) - aw[r.defender.name]
        assert abs(gap) <= 0.01, (address, value, gap)
        checked += 1
    assert checked >= 2


def test_inflation_decision_matches_run_study_at_the_estimates():
    study = make(tax=False, inflation={"rate": 0.04, "estimates": "then-current"}, trials=50)
    res = run_study(study)
    base = risk.Model(study).evaluate({}, 1)
    assert ("replace" if base.replace[0] else "keep") == res.recommendation.action
    assert np.isfinite(res.risk.base_difference)
