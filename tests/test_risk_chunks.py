"""The Monte Carlo's chunked, trial-contiguous, buffer-reusing path against plain computations.

``core.risk.simulate`` runs the trials in chunks whose (trials x years) arrays are laid out
trial-contiguous and reused from chunk to chunk (``Model.evaluate(..., workspace)``).  None of
that may change a figure: the checks here are exact (bit for bit), against

- the naive loop: ``core.study.run_study`` on each perturbed study (the per-study engine), for
  studies before tax, after tax, after tax with inflation, and a single trial;
- the kernels called the plain way (new row-major arrays, no ``out=``) and ``np.argmax`` (numpy
  as the outside reference for "first index of the largest");
- the same simulation on one CPU (every chunk on the calling thread) for the run on two threads.
"""

from __future__ import annotations

import copy
import os
import threading

import numpy as np
import pytest
import test_risk_aftertax as aftertax_cases  # tests/ is on sys.path (pytest rootdir insertion)
from test_risk import BASE, INPUTS

from core import risk
from core.cashflows import declining_market_values, geometric_costs, gradient_costs
from core.decision import economic_life, first_best
from core.factors import FactorTable, factor_table
from core.risk.analysis import chunk_trials
from core.risk.engine import Workspace
from core.study import run_study
from core.studyfile import parse_study

TRIALS = 120


def before_tax(trials: int = TRIALS, **changes):
    obj = copy.deepcopy(BASE)
    obj.update(changes)
    obj["uncertainty"] = {"trials": trials, "seed": 7, "inputs": INPUTS}
    return parse_study(obj)


def study_for(case: str, trials: int = TRIALS):
    if case == "before tax":
        return before_tax(trials)
    if case == "after tax":
        return aftertax_cases.make(True, None, None, trials=trials)
    assert case == "after tax, inflation"
    return aftertax_cases.make(True, {"rate": 0.03, "estimates": "then-current"}, None,
                               trials=trials)


def naive(study, values: dict[str, float]) -> tuple[float, bool, dict[str, int]]:
    """Best challenger's AW at its ESL minus the defender's (constant money, on the basis the
    study decides on), whether to replace, and every ESL, from core.study.run_study on the
    perturbed study."""
    res = run_study(risk.perturbed_study(study, values))
    basis = res.after_tax if study.tax is not None else res.decision
    aw = {a.name: a.annual_worth_constant[a.economic_life - 1] for a in basis.alternatives}
    best = max(aw[c.name] for c in study.challengers)
    return (best - aw[study.defender.name], res.recommendation.action == "replace",
            {a.name: a.economic_life for a in basis.alternatives})


# ------------------------------------------------------------------ the whole simulation
@pytest.mark.parametrize("case", ["before tax", "after tax", "after tax, inflation"])
def test_chunked_trials_are_bit_for_bit_the_naive_loop(case):
    # Reference: the per-study engine (core.study.run_study) on each perturbed study.
    study = study_for(case)
    draws = risk.draw_inputs(study, TRIALS, 7 if case == "before tax" else 11)
    sim = risk.simulate(study, chunk=37)  # several chunks, the last one short
    for t in range(TRIALS):
        difference, replace, esl = naive(study, {a: float(v[t]) for a, v in draws.items()})
        assert sim.difference[t] == difference  # exact: the same doubles
        assert sim.replace[t] == replace
        for name, life in esl.items():
            assert sim.economic_life[name][t] == life


@pytest.mark.parametrize("case", ["before tax", "after tax", "after tax, inflation"])
def test_one_trial_is_bit_for_bit_the_naive_study(case):
    # Reference: core.study.run_study on the perturbed study of the single draw.
    study = study_for(case, trials=1)
    seed = 7 if case == "before tax" else 11
    draws = risk.draw_inputs(study, 1, seed)
    sim = risk.simulate(study)
    difference, replace, esl = naive(study, {a: float(v[0]) for a, v in draws.items()})
    assert sim.trials == 1 and sim.difference[0] == difference and sim.replace[0] == replace
    assert {name: int(v[0]) for name, v in sim.economic_life.items()} == esl


@pytest.mark.parametrize("inflation", [{"rate": 0.03, "estimates": "then-current"},
                                       {"rate": 0.03, "estimates": "constant"}])
@pytest.mark.parametrize("period", [None, 8])
def test_chunk_size_and_buffer_reuse_change_nothing_with_inflation(inflation, period):
    # Reference: one plain evaluation of every trial at once (new arrays, no workspace) and a
    # size-1 evaluation per trial (no batch layout at all); before tax with inflation the
    # engine states flows in constant money by year factors, as run_study does up to the
    # last bits (checked to 1e-9 in test_risk_aftertax), so the reference is the engine's own.
    study = before_tax(inflation=inflation, study_period=period)
    draws = risk.draw_inputs(study, TRIALS, 7)
    whole = risk.Model(study).evaluate(draws, TRIALS)
    for chunk in (1, 37, None):
        sim = risk.simulate(study, chunk=chunk)
        np.testing.assert_array_equal(sim.difference, whole.difference)
        np.testing.assert_array_equal(sim.replace, whole.replace)
        for name, life in whole.economic_life.items():
            np.testing.assert_array_equal(sim.economic_life[name], life)
    model = risk.Model(study)
    workspace = Workspace()
    for t in range(0, TRIALS, 7):
        one = model.evaluate({a: v[t:t + 1] for a, v in draws.items()}, 1, workspace)
        assert one.difference[0] == whole.difference[t] or (
            np.isnan(one.difference[0]) and np.isnan(whole.difference[t]))
        for name, aw in whole.annual_worth.items():
            np.testing.assert_array_equal(one.annual_worth[name][0], aw[t])


def test_reused_buffers_are_only_reused_when_asked():
    study = before_tax()
    model = risk.Model(study)
    a = model.evaluate({"New press.first_cost": np.array([50000.0, 60000.0])}, 2)
    kept = a.annual_worth["New press"].copy()
    model.evaluate({"New press.first_cost": np.array([90000.0, 99000.0])}, 2)
    np.testing.assert_array_equal(a.annual_worth["New press"], kept)


# ------------------------------------------------------------------ two threads
class Spy:
    """Wraps ``Model.evaluate``: the thread of each call, the error state it ran under, and
    whether two calls at once ever shared a workspace (they must not)."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.threads: list[int] = []
        self.errors: list[dict[str, str]] = []
        self.shared = False
        self._busy: set[int] = set()
        self._lock = threading.Lock()
        original = risk.Model.evaluate

        def evaluate(model, values, size, workspace=None):
            with self._lock:
                self.threads.append(threading.get_ident())
                self.errors.append(np.geterr())
                self.shared |= id(workspace) in self._busy
                self._busy.add(id(workspace))
            try:
                return original(model, values, size, workspace)
            finally:
                with self._lock:
                    self._busy.discard(id(workspace))

        monkeypatch.setattr(risk.Model, "evaluate", evaluate)


def simulate_on(cpus: int, monkeypatch: pytest.MonkeyPatch, study, **options):
    """``risk.simulate`` on a machine with ``cpus`` CPUs; (simulation, spy)."""
    monkeypatch.setattr(os, "cpu_count", lambda: cpus)
    spy = Spy(monkeypatch)
    sim = risk.simulate(study, **options)
    monkeypatch.undo()
    return sim, spy


STUDY_CASES = {
    "before tax": lambda trials: before_tax(trials),
    "after tax": lambda trials: study_for("after tax", trials),
    "after tax, inflation": lambda trials: study_for("after tax, inflation", trials),
    "before tax, inflation": lambda trials: before_tax(
        trials, inflation={"rate": 0.03, "estimates": "then-current"}),
    "before tax, study period": lambda trials: before_tax(trials, study_period=8),
    "after tax, study period": lambda trials: aftertax_cases.make(True, None, 8, trials=trials),
}


@pytest.mark.parametrize("chunk", [1, 37, None])
@pytest.mark.parametrize("case", list(STUDY_CASES))
def test_two_threads_are_bit_for_bit_one_thread(case, chunk, monkeypatch):
    # Reference: the same simulation on one CPU, every chunk evaluated on the calling thread
    # (itself bit for bit the naive run_study loop, above).  Default chunks: a little over two.
    trials = TRIALS if chunk else 2 * chunk_trials(STUDY_CASES[case](1)) + 123
    study = STUDY_CASES[case](trials)
    one, alone = simulate_on(1, monkeypatch, study, chunk=chunk)
    two, spy = simulate_on(2, monkeypatch, study, chunk=chunk)
    me = threading.get_ident()
    assert set(alone.threads) == {me}
    assert me not in spy.threads and len(spy.threads) == len(alone.threads) > 1
    assert not spy.shared
    assert (two.trials, two.seed) == (one.trials, one.seed) == (trials, one.seed)
    np.testing.assert_array_equal(two.difference, one.difference)  # NaN where NaN
    assert two.difference.tobytes() == one.difference.tobytes()   # to the last bit
    np.testing.assert_array_equal(two.replace, one.replace)
    np.testing.assert_array_equal(two.best_challenger, one.best_challenger)
    for name, life in one.economic_life.items():
        np.testing.assert_array_equal(two.economic_life[name], life)


@pytest.mark.parametrize("case", list(STUDY_CASES))
def test_one_trial_or_one_chunk_stays_on_the_calling_thread(case, monkeypatch):
    # Reference: the one-CPU run (a single chunk is never handed to a thread).
    for trials in (1, TRIALS):
        study = STUDY_CASES[case](trials)
        one, _ = simulate_on(1, monkeypatch, study)
        two, spy = simulate_on(2, monkeypatch, study)
        assert spy.threads == [threading.get_ident()]
        assert two.difference.tobytes() == one.difference.tobytes()
        np.testing.assert_array_equal(two.replace, one.replace)


def test_progress_is_reported_in_order_on_the_calling_thread(monkeypatch):
    # Hand calculation: 5 chunks of 1,000 out of 5,000 trials -> 0.2, 0.4, ..., 1.0, in order,
    # from the calling thread (the window's worker emits its signal from there).
    seen: list[tuple[float, int]] = []
    study = before_tax(5000)
    _, spy = simulate_on(2, monkeypatch, study, chunk=1000,
                         progress=lambda f: seen.append((f, threading.get_ident())))
    assert [f for f, _ in seen] == [0.2, 0.4, 0.6, 0.8, 1.0]
    assert {t for _, t in seen} == {threading.get_ident()}
    assert threading.get_ident() not in spy.threads


def test_cancelling_a_threaded_run_stops_at_the_chunks_already_drawn(monkeypatch):
    # Hand calculation: cancelled() is asked before each chunk is drawn and says yes the fifth
    # time; 4 chunks of 1,000 were handed out, at most two run at once, so chunks 1 and 2
    # have been reported (0.02, 0.04 of 50,000) when the 5th is refused, and nothing after.
    calls: list[int] = []
    seen: list[float] = []

    def cancelled() -> bool:
        calls.append(1)
        return len(calls) > 4

    monkeypatch.setattr(os, "cpu_count", lambda: 2)
    spy = Spy(monkeypatch)
    with pytest.raises(risk.RiskCancelled, match="after 2000 of 50000"):
        risk.simulate(before_tax(50_000), chunk=1000, progress=seen.append, cancelled=cancelled)
    assert len(calls) == 5
    assert len(spy.threads) == 4 and threading.get_ident() not in spy.threads
    assert seen == [0.02, 0.04]


def test_the_threads_run_under_the_callers_numpy_error_state(monkeypatch):
    # Reference: np.geterr on the calling thread (numpy keeps it per context, and a new thread
    # starts from the defaults unless the context is passed on).
    monkeypatch.setattr(os, "cpu_count", lambda: 2)
    spy = Spy(monkeypatch)
    with np.errstate(over="raise", under="ignore"):
        want = np.geterr()
        risk.simulate(before_tax(5000), chunk=1000)
    assert want != np.geterr() and spy.errors == [want] * 5
    assert threading.get_ident() not in spy.threads


# ------------------------------------------------------------------ the kernels, out= and layout
def test_factor_table_into_trial_contiguous_buffers_is_bit_for_bit_the_plain_table():
    # Reference: factor_table called the plain way (new row-major arrays).  4,099 rates make
    # numpy's vector loops long enough for its shortcuts for x**2 and x**-1 with a constant
    # exponent, which would change the rounding if the exponents were not laid out in full.
    rates = np.random.default_rng(3).normal(0.09, 0.05, 4099)
    rates[::97] = 0.0
    plain = factor_table(rates, 25)
    out = FactorTable(*(np.empty((25, rates.size)).T for _ in range(4)))
    into = factor_table(rates, 25, out=out)
    assert into.discount is out.discount and into.capital_recovery is out.capital_recovery
    for name in ("discount", "annuity", "capital_recovery", "sinking_fund"):
        np.testing.assert_array_equal(getattr(into, name), getattr(plain, name))


def test_schedules_into_trial_contiguous_buffers_are_bit_for_bit_the_plain_ones():
    # Reference: the same kernels called the plain way.
    rng = np.random.default_rng(4)
    m = 4099
    price = rng.uniform(1e4, 2e5, (m, 1))
    rate = rng.uniform(0.05, 0.2, (m, 1))
    years = np.arange(1.0, 26.0)

    def buffer():
        return np.empty((25, m)).T

    np.testing.assert_array_equal(declining_market_values(price, rate, years, out=buffer()),
                                  declining_market_values(price, rate, years))
    np.testing.assert_array_equal(geometric_costs(price, rate, years - 1.0, out=buffer()),
                                  geometric_costs(price, rate, years - 1.0))
    np.testing.assert_array_equal(gradient_costs(price, rate, years - 1.0, out=buffer()),
                                  gradient_costs(price, rate, years - 1.0))


def test_first_best_on_trial_contiguous_arrays_is_numpys_argmax():
    # Reference: np.argmax on the amounts rounded to the cent (first index of the largest;
    # a NaN counts as the largest), numpy's documented rule.
    rng = np.random.default_rng(5)
    scores = np.round(rng.normal(-1e4, 50.0, (5000, 25)), 1)  # many ties to the cent
    scores[7, 3] = np.nan
    scores[8, :] = -np.inf
    scores[9, 4:6] = np.inf
    tall = np.asfortranarray(scores)
    want = np.argmax(np.round(scores, 2), axis=-1)
    np.testing.assert_array_equal(first_best(tall), want)
    np.testing.assert_array_equal(first_best(tall, work=np.empty((25, 5000)).T), want)
    np.testing.assert_array_equal(economic_life(tall), want + 1)
    valid = rng.random((5000, 25)) < 0.8
    np.testing.assert_array_equal(
        first_best(tall, valid), np.argmax(np.where(valid, np.round(scores, 2), -np.inf), -1))
