"""Risk analysis: Monte Carlo, tornado, breakevens, two-way map (core.risk)."""

from __future__ import annotations

import copy
import json
import math

import numpy as np
import pytest

from core import factors as f
from core import risk
from core.annual_worth import annual_worth_parts, annual_worth_schedule
from core.estimates import Distribution
from core.factors import factor_table
from core.jsonout import risk_json, study_json
from core.report import format_risk
from core.risk import distributions as dists
from core.study import run_study
from core.studyfile import parse_study

# Invented demo data: Harrowgate Fabrication Ltd. (fictional), Kestrel Road site.
BASE = {
    "title": "Kestrel Road press line",
    "marr": 0.10,
    "defender": {"name": "Old press", "market_value": 20000, "max_life": 5,
                 "market_values": {"decline_rate": 0.3},
                 "operating_costs": {"first": 9000, "gradient": 2500}},
    "challengers": [
        {"name": "New press", "first_cost": 60000, "max_life": 10,
         "market_values": {"decline_rate": 0.2},
         "operating_costs": {"first": 3000, "gradient": 500}},
        {"name": "Servo press", "first_cost": 75000, "max_life": 12,
         "market_values": {"values": [60000, 52000, 46000, 41000, 37000, 33000, 30000,
                                      27000, 24000, 21000, 18000, 15000]},
         "operating_costs": {"first": 2000, "growth": 0.05},
         "extra_costs": [{"year": 6, "amount": 8000, "label": "servo rebuild"}]}],
}
INPUTS = {
    "New press.first_cost": {"triangular": [50000, 60000, 80000]},
    "Old press.operating_costs.first": {"uniform": [7000, 11000]},
    "Old press.market_values.decline_rate": {"normal": [0.3, 0.1]},
    "Servo press.operating_costs.growth": {"pert": [0.02, 0.05, 0.1]},
    "Old press.market_value": {"lognormal": [20000, 4000]},
    "Servo press.first_cost": {"normal": [75000, 9000]},
    "New press.operating_costs.gradient": {"uniform": [200, 900]},
    "marr": {"normal": [0.10, 0.03]},
}


def make(inputs=None, trials=2000, seed=7, **changes):
    obj = copy.deepcopy(BASE)
    obj.update(changes)
    obj["uncertainty"] = {"trials": trials, "seed": seed, "inputs": inputs or INPUTS}
    return parse_study(obj)


def deterministic_difference(study) -> tuple[float, str]:
    """Best challenger AW at ESL minus the defender's, from core.study.run_study."""
    res = run_study(risk.perturbed_study(study, {}))
    best = max(c.annual_worth_at_economic_life for c in res.challengers)
    return best - res.defender.annual_worth_at_economic_life, res.recommendation.action


# ------------------------------------------------------------------ the engine kernel
def test_batch_kernel_matches_the_factor_formula():
    # hand formula: AW_k = -[P(A/P,i,k) - S_k(A/F,i,k)] - [sum_{j<=k} C_j(P/F,i,j)](A/P,i,k),
    # each factor from core.factors one value at a time (themselves checked against
    # numpy-financial in test_factors.py); the risk trials use this batch kernel.
    rng = np.random.default_rng(0)
    P = rng.uniform(1e4, 1e5, 50)
    S = rng.uniform(0, 1e4, (50, 8))
    C = rng.uniform(1e3, 5e3, (50, 8))
    i = rng.uniform(0.0, 0.2, 50)
    i[0] = 0.0  # the i == 0 limit
    got = annual_worth_parts(P, S, C, factor_table(i, 8))[0]
    for r in range(50):
        for k in range(1, 9):
            pw_c = sum(C[r, j - 1] * float(f.pf(i[r], j)) for j in range(1, k + 1))
            ref = -(P[r] * float(f.ap(i[r], k)) - S[r, k - 1] * float(f.af(i[r], k))) \
                - pw_c * float(f.ap(i[r], k))
            assert got[r, k - 1] == pytest.approx(ref, rel=1e-10, abs=1e-8)
    np.testing.assert_array_equal(got, annual_worth_schedule(P, S, C, i).annual_worth)


def test_engine_at_the_estimates_is_the_deterministic_study():
    study = make()
    res = run_study(risk.perturbed_study(study, {}))
    out = risk.Model(study).evaluate({}, 1)
    for alt in res.alternatives:
        np.testing.assert_allclose(out.annual_worth[alt.name][0], alt.annual_worth, atol=1e-8)
        assert out.economic_life[alt.name][0] == alt.economic_life
    assert ("replace" if out.replace[0] else "keep") == res.recommendation.action


# ------------------------------------------------------------------ reproducibility
def test_same_seed_same_answer_whatever_the_chunking():
    study = make(trials=3000)
    a = risk.simulate(study)
    b = risk.simulate(study, chunk=257)
    np.testing.assert_array_equal(a.difference, b.difference)
    np.testing.assert_array_equal(a.replace, b.replace)
    c = risk.simulate(study, seed=8)
    assert not np.array_equal(a.difference, c.difference)
    assert a.seed == 7 and c.seed == 8


def test_no_seed_records_the_seed_used():
    study = make(trials=500, seed=None)
    sim = risk.simulate(study)
    again = risk.simulate(study, seed=sim.seed)
    np.testing.assert_array_equal(sim.difference, again.difference)


# ------------------------------------------------------------------ degenerate draws
def test_degenerate_distributions_give_the_deterministic_answer():
    inputs = {
        "New press.first_cost": {"triangular": [60000, 60000, 60000]},
        "Old press.operating_costs.first": {"uniform": [9000, 9000]},
        "Old press.market_values.decline_rate": {"normal": [0.3, 0]},
        "Servo press.operating_costs.growth": {"pert": [0.05, 0.05, 0.05]},
        "Old press.market_value": {"lognormal": [20000, 0]},
        "marr": {"normal": [0.10, 0.0]},
    }
    study = make(inputs, trials=300)
    diff, action = deterministic_difference(study)
    result = run_study(study).risk
    assert result.probability_replace == (1.0 if action == "replace" else 0.0)
    np.testing.assert_allclose(result.simulation.difference, diff, atol=1e-6)
    summary = result.difference_summary()
    assert summary["p10"] == pytest.approx(diff, abs=1e-6)
    assert summary["p90"] == pytest.approx(diff, abs=1e-6)
    assert result.base_difference == pytest.approx(diff, abs=1e-9)


# ------------------------------------------------------------------ linearity
def test_mean_aw_equals_aw_at_mean_where_linear():
    # A challenger's AW_k is linear in its first cost when its market values are explicit:
    # AW_k = -P (A/P,i,k) + (terms without P).  Hand calculation: E[AW_k] = AW_k(E[P]).
    # Tolerance: 4 Monte Carlo standard errors of each sample mean.
    dist = {"triangular": [60000, 70000, 95000]}
    study = make({"Servo press.first_cost": dist}, trials=4000)
    draws = risk.draw_inputs(study, 4000, 7)
    model = risk.Model(study)
    aw = model.evaluate(draws, 4000).annual_worth["Servo press"]
    mean_p = (60000 + 70000 + 95000) / 3
    at_mean = model.evaluate({"Servo press.first_cost": [mean_p]}, 1).annual_worth["Servo press"]
    se = aw.std(axis=0, ddof=1) / math.sqrt(4000)
    assert np.all(np.abs(aw.mean(axis=0) - at_mean[0]) <= 4 * se + 1e-9)
    # the draws themselves follow the triangular mean
    assert abs(draws["Servo press.first_cost"].mean() - mean_p) < 4 * np.std(
        draws["Servo press.first_cost"]) / math.sqrt(4000)


# ------------------------------------------------------------------ breakevens
def test_each_breakeven_makes_the_two_best_aws_equal_to_the_cent():
    study = make(trials=200)
    result = run_study(study).risk
    found = {k: v for k, v in result.breakeven.items() if v is not None}
    assert len(found) >= 4
    for address, value in found.items():
        lo, hi = result.breakeven_ranges[address]
        assert lo <= value <= hi
        diff, _ = deterministic_difference(risk.perturbed_study(study, {address: value}))
        assert abs(diff) <= 0.01, (address, value, diff)


def test_breakeven_is_null_when_the_decision_does_not_flip():
    # New press is never the deciding challenger: Servo press wins either way.
    study = make({"New press.first_cost": {"uniform": [55000, 65000]}}, trials=100)
    assert run_study(study).risk.breakeven["New press.first_cost"] is None


def test_breakeven_of_the_best_challengers_first_cost_is_where_aw_ties():
    # With Servo press alone, a dearer Servo press eventually loses to keeping the old one.
    study = make({"Servo press.first_cost": {"uniform": [60000, 90000]}}, trials=100,
                 challengers=BASE["challengers"][1:])
    value = run_study(study).risk.breakeven["Servo press.first_cost"]
    assert value is not None and 75000 < value < 750000
    diff, _ = deterministic_difference(risk.perturbed_study(study, {"Servo press.first_cost":
                                                                    value}))
    assert abs(diff) <= 0.01


# ------------------------------------------------------------------ convergence
def test_share_standard_error_shrinks_like_one_over_root_n():
    study = make({"Old press.operating_costs.first": {"uniform": [4000, 9000]}})
    small = risk.simulate(study, trials=2000, seed=1)
    large = risk.simulate(study, trials=32000, seed=2)
    assert 0.05 < large.probability_replace < 0.95
    ratio = small.probability_standard_error / large.probability_standard_error
    assert ratio == pytest.approx(4.0, rel=0.15)  # sqrt(32000/2000) = 4
    joint = math.hypot(small.probability_standard_error, large.probability_standard_error)
    assert abs(small.probability_replace - large.probability_replace) < 4 * joint


# ------------------------------------------------------------------ naive reference
@pytest.mark.parametrize("period", [None, 8])
def test_vectorised_trials_match_a_naive_loop_of_run_study(period):
    study = make(trials=40, study_period=period)
    draws = risk.draw_inputs(study, 40, 7)
    sim = risk.simulate(study)
    for t in range(40):
        case = risk.perturbed_study(study, {a: float(v[t]) for a, v in draws.items()})
        res = run_study(case)
        assert sim.replace[t] == (res.recommendation.action == "replace"
                                  and res.recommendation.defender_years in (None, 0))
        for alt in res.alternatives:
            assert sim.economic_life[alt.name][t] == alt.economic_life
        if period is None:
            best = max(c.annual_worth_at_economic_life for c in res.challengers)
            assert sim.difference[t] == pytest.approx(
                best - res.defender.annual_worth_at_economic_life, abs=1e-6)
        else:
            feasible = [o for o in res.study_period_options if o.feasible]
            now = max(o.annual_worth for o in feasible if o.defender_years == 0 and o.challenger)
            keep = max(o.annual_worth for o in feasible
                       if not (o.defender_years == 0 and o.challenger))
            assert sim.difference[t] == pytest.approx(now - keep, abs=1e-6)


# ------------------------------------------------------------------ distributions
def test_truncated_normal_respects_physical_bounds():
    d = Distribution("normal", (2000.0, 5000.0))
    x = dists.draw(d, np.random.default_rng(3), 20000, dists.bounds_for("A.first_cost"))
    assert x.min() >= 0.0
    r = dists.draw(Distribution("normal", (0.8, 0.3)), np.random.default_rng(3), 20000,
                   dists.bounds_for("A.market_values.decline_rate"))
    assert r.max() < 1.0


def test_lognormal_has_the_given_mean_and_sd():
    # Moment conversion (common practice, no source): sigma^2 = ln(1 + sd^2/mean^2).
    x = dists.draw(Distribution("lognormal", (20000.0, 4000.0)), np.random.default_rng(5),
                   200000)
    assert x.mean() == pytest.approx(20000, rel=0.005)
    assert x.std() == pytest.approx(4000, rel=0.02)


def test_pert_mean_and_quantiles():
    # Beta-PERT (lambda 4) mean (low + 4 mode + high)/6, from memory.
    d = Distribution("pert", (0.0, 1.0, 8.0))
    x = dists.draw(d, np.random.default_rng(9), 200000)
    assert x.mean() == pytest.approx(2.0, rel=0.01)
    p10, p90 = dists.ppf(d, [0.1, 0.9])
    assert np.mean(x < p10) == pytest.approx(0.1, abs=0.005)
    assert np.mean(x < p90) == pytest.approx(0.9, abs=0.005)


def test_triangular_quantiles_by_hand():
    # Hand calculation: triangular(0, 5, 10) is symmetric; F(2.5) = 2.5^2 / (10*5) = 0.125.
    d = Distribution("triangular", (0.0, 5.0, 10.0))
    assert float(dists.ppf(d, 0.5)) == pytest.approx(5.0)
    assert float(dists.ppf(d, 0.125)) == pytest.approx(2.5)


# ------------------------------------------------------------------ output
def test_json_keys_and_text():
    study = make(trials=1000)
    res = run_study(study)
    out = study_json(res)["risk"]
    for key in ("probability_replace", "probability_replace_standard_error",
                "annual_worth_difference", "breakeven", "tornado",
                "economic_life_distribution", "annual_worth_difference_histogram",
                "trials", "seed", "basis", "two_way", "inputs", "base_case"):
        assert key in out
    for key in ("p5", "p10", "p50", "p90", "p95", "mean", "mean_standard_error"):
        assert key in out["annual_worth_difference"]
    assert set(out["breakeven"]) == set(INPUTS)
    assert out["trials"] == 1000 and out["seed"] == 7 and out["basis"] == "before-tax"
    assert sum(out["annual_worth_difference_histogram"]["counts"]) == 1000
    assert sum(out["economic_life_distribution"]["Old press"].values()) == 1000
    grid = out["two_way"]
    assert len(grid["replace"]) == len(grid["y_values"])
    assert len(grid["replace"][0]) == len(grid["x_values"])
    json.dumps(out, allow_nan=False)
    text = format_risk(res.risk)
    assert "Tornado" in text and "Breakeven" in text and "Replace wins in" in text


def test_tornado_is_sorted_and_brackets_the_base():
    result = run_study(make(trials=200)).risk
    swings = [b.swing for b in result.tornado]
    assert swings == sorted(swings, reverse=True)
    marr = next(b for b in result.tornado if b.address == "marr")
    assert marr.low_value < 0.10 < marr.high_value


def test_two_way_map_at_the_estimates():
    study = make(trials=100)
    model = risk.Model(study)
    grid = risk.two_way_map(model, "Servo press.first_cost", "marr", points=5)
    # the middle of a 50%..150% axis is the estimate itself
    base = model.evaluate({}, 1)
    assert grid.difference[2, 2] == pytest.approx(base.difference[0], abs=1e-6)
    # cheaper challengers never make replacing less attractive
    assert np.all(np.diff(grid.difference, axis=1) <= 1e-9)


def test_progress_and_cancel():
    study = make(trials=5000)
    seen = []
    risk.simulate(study, progress=seen.append, chunk=1000)
    assert seen == sorted(seen) and seen[-1] == 1.0 and len(seen) == 5
    calls = []

    def cancelled():
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(risk.RiskCancelled):
        risk.run_risk(study, cancelled=cancelled, chunk=1000)
    assert len(calls) == 3


def test_market_values_follow_a_varying_price_only_with_a_decline_rate():
    study = make(trials=10)
    model = risk.Model(study)
    a = model.evaluate({"New press.first_cost": [60000.0, 120000.0]}, 2).annual_worth["New press"]
    b = model.evaluate({"Servo press.first_cost": [75000.0, 150000.0]}, 2)
    aw = b.annual_worth["Servo press"]
    # explicit market values: the AW shift is exactly -dP (A/P,i,k)
    from core.factors import ap
    k = np.arange(1, 13)
    np.testing.assert_allclose(aw[1] - aw[0], -75000.0 * ap(0.10, k), rtol=1e-10)
    # decline-rate market values scale with P: the shift is smaller than -dP (A/P,i,k)
    k = np.arange(1, 11)
    assert np.all(a[1] - a[0] > -60000.0 * ap(0.10, k))


def test_study_period_without_a_replace_now_option():
    # T = 14: no challenger lasts 14 years, so "replace now" cannot fill the period.
    study = make(trials=200, study_period=14)
    result = run_study(study).risk
    assert result.probability_replace == 0.0
    out = risk_json(result)
    assert out["annual_worth_difference"]["p50"] is None
    assert any("undefined" in n for n in out["notes"])
    assert all(v is None for v in out["breakeven"].values())
    json.dumps(out, allow_nan=False)
    assert "Replace wins in 0.0%" in format_risk(result)


def test_share_below_by_hand():
    # Hand calculation: uniform on [-0.02, 0.08] has 20 % below zero; a normal's share
    # below its mean is one half (symmetry).
    assert dists.share_below(Distribution("uniform", (-0.02, 0.08)), 0.0) == pytest.approx(
        0.2, abs=2e-4)
    bounds = dists.bounds_for("marr")
    assert dists.share_below(Distribution("normal", (0.1, 0.03)), 0.1, bounds) == \
        pytest.approx(0.5, abs=2e-4)
    assert dists.share_below(Distribution("uniform", (0.05, 0.08)), 0.0) == 0.0


def test_marr_drawn_below_zero_or_near_minus_one_is_noted():
    quiet = risk.run_risk(make(trials=500))
    assert not any("MARR draws" in n for n in quiet.notes)  # N(10 %, 3 %): none below 0
    wide = risk.run_risk(make({"marr": {"normal": [0.05, 0.6]}}, trials=500))
    notes = [n for n in wide.notes if "MARR draws" in n]
    assert len(notes) == 2
    assert notes[0].startswith("4") and "below zero" in notes[0]  # about 44 % below zero
    assert "narrow the MARR distribution" in notes[1]
    assert notes == [n for n in risk_json(wide)["notes"] if "MARR draws" in n]
    slightly = risk.run_risk(make({"marr": {"uniform": [-0.01, 0.09]}}, trials=500))
    assert [n for n in slightly.notes if "MARR draws" in n] == [
        "10% of the MARR draws are below zero (a negative required return); check that the "
        "MARR distribution is meant to reach there."]
