"""Monte Carlo simulation, one-way sensitivity (tornado), breakevens and a two-way map.

All of it runs on ``core.risk.engine.Model``: one vectorised evaluation per
chunk of trials (or per grid), never a Python loop over trials.
"""

from __future__ import annotations

import contextvars
import math
import os
from collections import deque
from collections.abc import Callable, Mapping
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import nullcontext

import numpy as np
from scipy.optimize import brentq

from core.errors import StudyError
from core.estimates import Distribution, Study
from core.results import (
    Basis,
    InputSummary,
    RiskResult,
    Simulation,
    TornadoBar,
    TwoWayMap,
)
from core.risk import distributions as dists
from core.risk.engine import Model, Outcome, Workspace
from core.studyfile import split_address

Progress = Callable[[float], None]
Cancelled = Callable[[], bool]

#: Trials per vectorised chunk are chosen so that one (trials x years) array holds about
#: this many numbers (800 kB): the arrays of a chunk then stay in the processor's cache
#: from one step to the next, and the chunk's few one-byte temporaries stay small enough
#: to be reused by the allocator (a larger chunk is slower, not faster).
CHUNK_ELEMENTS = 100_000
#: Threads that evaluate the chunks at once (at most one per CPU).
THREADS = 2
GRID_POINTS = 241
MAP_POINTS = 41
RATE_INPUTS = ("marr", "market_values.decline_rate", "operating_costs.growth")


class RiskCancelled(Exception):
    """Raised by ``simulate`` / ``run_risk`` when ``cancelled()`` returns True."""


# --------------------------------------------------------------------------- validation
def validate(study: Study) -> None:
    """Refuse uncertain inputs whose distribution does not fit the input's physical bounds
    (a ``StudyError`` naming ``$.uncertainty.inputs["<address>"].<kind>``)."""
    if study.uncertainty is None:
        return
    for address, dist in study.uncertainty.inputs:
        where = f"$.uncertainty.inputs[\"{address}\"].{dist.kind}"
        try:
            split_address(address, study)
        except KeyError:
            raise StudyError(where, "not an input of this study") from None
        dists.check(dist, dists.bounds_for(address), where)


# --------------------------------------------------------------------------- draws
class _Draws:
    """One seeded stream per uncertain input (children of one SeedSequence, in input
    order), so a draw does not depend on chunking or on the other inputs."""

    def __init__(self, study: Study, seed: int) -> None:
        assert study.uncertainty is not None
        self.inputs = study.uncertainty.inputs
        children = np.random.SeedSequence(seed).spawn(len(self.inputs))
        self.generators = [np.random.default_rng(c) for c in children]
        self.bounds = [dists.bounds_for(a) for a, _ in self.inputs]

    def next(self, size: int) -> dict[str, np.ndarray]:
        return {address: dists.draw(dist, gen, size, bounds)
                for (address, dist), gen, bounds in zip(self.inputs, self.generators,
                                                       self.bounds, strict=True)}


def resolve_seed(study: Study, seed: int | None = None) -> int:
    """The seed to use: the argument, else the study's, else fresh entropy (recorded)."""
    if seed is not None:
        return int(seed)
    if study.uncertainty is not None and study.uncertainty.seed is not None:
        return int(study.uncertainty.seed)
    entropy = np.random.SeedSequence().entropy
    assert isinstance(entropy, int)
    return entropy


def draw_inputs(study: Study, trials: int, seed: int) -> dict[str, np.ndarray]:
    """Exactly the input values ``simulate(study, trials, seed)`` uses, address -> (trials,)."""
    return _Draws(study, seed).next(trials)


# --------------------------------------------------------------------------- Monte Carlo
def chunk_trials(study: Study) -> int:
    years = max(a.max_life for a in study.alternatives)
    return max(256, CHUNK_ELEMENTS // years)


def simulate(study: Study, trials: int | None = None, seed: int | None = None,
             progress: Progress | None = None, cancelled: Cancelled | None = None,
             chunk: int | None = None, model: Model | None = None) -> Simulation:
    """Monte Carlo on the replacement decision: draw every uncertain input per trial,
    recompute every AW schedule, every ESL and the decision (``core.risk.engine``).

    Vectorised across trials in chunks of ``chunk`` (default from ``CHUNK_ELEMENTS``);
    seeded and reproducible (the same seed gives the same draws whatever the chunk).
    The chunks are drawn in order on the calling thread and, with two or more CPUs and
    more than one chunk, evaluated on two threads (numpy releases the GIL in its array
    loops), each with its own ``Workspace`` and writing its own slice of the results, so
    the figures are bit for bit those of one thread.  ``cancelled()`` is asked before
    each chunk is drawn (True raises ``RiskCancelled``); ``progress(fraction)`` is called
    on the calling thread as the chunks finish, in order.
    """
    unc = study.uncertainty
    if unc is None:
        raise ValueError("the study has no uncertainty block")
    validate(study)
    trials = int(unc.trials if trials is None else trials)
    if trials < 1:
        raise ValueError("trials must be at least 1")
    seed = resolve_seed(study, seed)
    model = Model(study) if model is None else model
    draws = _Draws(study, seed)
    step = chunk or chunk_trials(study)
    starts = range(0, trials, step)
    threads = min(THREADS, os.cpu_count() or 1) if len(starts) > 1 else 1
    workspaces = [Workspace() for _ in range(threads)]
    replace = np.empty(trials, dtype=bool)
    difference = np.empty(trials)
    best = np.empty(trials, dtype=np.int32)
    esl = {a.name: np.empty(trials, dtype=np.int16) for a in study.alternatives}

    def evaluate(sl: slice, values: dict[str, np.ndarray], workspace: Workspace) -> int:
        """One chunk of trials into its slice of the results; the chunk's end."""
        out = model.evaluate(values, sl.stop - sl.start, workspace)
        replace[sl] = out.replace
        difference[sl] = out.difference
        best[sl] = out.best_challenger
        for name, years in out.economic_life.items():
            esl[name][sl] = years
        return sl.stop

    def finished(end: int) -> None:
        if progress is not None:
            progress(end / trials)

    done = 0
    with ThreadPoolExecutor(threads) if threads > 1 else nullcontext() as pool:
        running: deque[Future[int]] = deque()
        for k, start in enumerate(starts):
            if cancelled is not None and cancelled():
                raise RiskCancelled(f"cancelled after {done} of {trials} trials")
            sl = slice(start, min(start + step, trials))
            values = draws.next(sl.stop - sl.start)
            if pool is None:  # one thread: the calling one
                done = evaluate(sl, values, workspaces[0])
                finished(done)
                continue
            if len(running) == threads:  # chunk k - threads, whose workspace chunk k takes
                done = running.popleft().result()
                finished(done)
            # the chunk runs in a copy of the caller's context (numpy's error state is in it)
            running.append(pool.submit(contextvars.copy_context().run, evaluate, sl, values,
                                       workspaces[k % threads]))
        while running:
            done = running.popleft().result()
            finished(done)
    return Simulation(trials, seed, replace, difference, esl, best)


# --------------------------------------------------------------------------- sensitivity
def tornado(model: Model, inputs: tuple[tuple[str, Distribution], ...]) -> list[TornadoBar]:
    """Tornado data, widest swing first."""
    bars = []
    for address, dist in inputs:
        bounds = dists.bounds_for(address)
        low, high = (float(v) for v in dists.ppf(dist, [0.10, 0.90], bounds))
        out = model.evaluate({address: np.array([low, high])}, 2)
        bars.append(TornadoBar(address, low, high, float(out.difference[0]),
                               float(out.difference[1])))
    return sorted(bars, key=lambda b: -b.swing)


def search_range(model: Model, address: str) -> tuple[float, float]:
    """Where a breakeven is looked for (docs/method.md §6: a tenfold range).

    Money inputs: [x/10, 10x] around the estimate x (for x < 0, [10x, x/10]; for x = 0,
    plus or minus ten times the alternative's price, at least 10,000).  Rates:
    MARR from 0 to max(10x, 50%); decline rate from 0 to 99%; growth from -50% to
    max(10x, 50%); each widened to include the estimate itself.
    """
    x = model.estimate(address)
    alt, suffix = split_address(address, model.study)
    if suffix == "marr":
        lo, hi = min(0.0, 10.0 * x), max(10.0 * x, 0.5)
    elif suffix == "market_values.decline_rate":
        lo, hi = min(0.0, 10.0 * x), 0.99
    elif suffix == "operating_costs.growth":
        lo, hi = min(-0.5, 10.0 * x), max(10.0 * x, 0.5)
    elif x > 0:
        lo, hi = x / 10.0, 10.0 * x
    elif x < 0:
        lo, hi = 10.0 * x, x / 10.0
    else:
        scale = 10.0 * max(abs(alt.price) if alt is not None else 0.0, 1000.0)
        lo, hi = -scale, scale
    bounds = dists.bounds_for(address)
    lo = max(lo, -0.99) if bounds.low == -1.0 else max(lo, bounds.low)
    return lo, min(hi, 0.99) if bounds.high == 1.0 else hi


def breakeven(model: Model, address: str) -> float | None:
    """The value of one input (the rest at their estimates) at which the recommendation
    flips: the root of ``difference`` (best challenger AW minus defender AW, both at their
    ESL) nearest the estimate within ``search_range``, refined with brentq to well under a
    cent; ``None`` where it does not flip in that range.
    """
    x0 = model.estimate(address)
    lo, hi = search_range(model, address)
    grid = np.unique(np.concatenate([np.linspace(lo, hi, GRID_POINTS), [x0]]))
    diff = model.evaluate({address: grid}, grid.size).difference
    if np.isnan(diff).all():
        return None
    above = diff > 0
    flips = np.nonzero((above[:-1] != above[1:]) & np.isfinite(diff[:-1])
                       & np.isfinite(diff[1:]))[0]
    if flips.size == 0:
        return None
    centre = 0.5 * (grid[flips] + grid[flips + 1])
    k = flips[np.argmin(np.abs(centre - x0))]

    def f(x: float) -> float:
        return float(model.evaluate({address: np.array([x])}, 1).difference[0])

    a, b = float(grid[k]), float(grid[k + 1])
    if f(a) == 0.0:
        return a
    if f(b) == 0.0:
        return b
    return float(brentq(f, a, b, xtol=1e-12, rtol=4 * np.finfo(float).eps, maxiter=200))


def two_way_map(model: Model, x_input: str, y_input: str = "marr",
                inputs: Mapping[str, Distribution] | None = None,
                points: int = MAP_POINTS,
                include: Mapping[str, float | None] | None = None) -> TwoWayMap:
    """The decision over a grid: by default the best challenger's first cost from 50% to
    150% of its estimate against MARR from 50% to 150% of its estimate (MARR 0: 0 to
    20%), each widened to its distribution's 5th-95th percentiles when it is uncertain
    and to 110% of the distance to any value in ``include`` (e.g. its breakeven).
    """
    inputs = inputs or {}
    include = include or {}

    def axis(address: str) -> np.ndarray:
        x = model.estimate(address)
        if address == "marr" and x == 0:
            lo, hi = 0.0, 0.2
        elif x == 0:
            lo, hi = 0.0, 1000.0
        else:
            lo, hi = sorted((0.5 * x, 1.5 * x))
        if address in inputs:
            p5, p95 = dists.ppf(inputs[address], [0.05, 0.95], dists.bounds_for(address))
            lo, hi = min(lo, float(p5)), max(hi, float(p95))
        extra = include.get(address)
        if extra is not None and math.isfinite(extra):
            lo, hi = min(lo, x + 1.1 * (extra - x)), max(hi, x + 1.1 * (extra - x))
        bounds = dists.bounds_for(address)
        if bounds.low > -math.inf:
            lo = max(lo, bounds.low + (1e-6 if bounds.low_open else 0.0))
        return np.linspace(lo, hi, points)

    xs, ys = axis(x_input), axis(y_input)
    gx, gy = np.meshgrid(xs, ys)
    out = model.evaluate({x_input: gx.ravel(), y_input: gy.ravel()}, gx.size)
    return TwoWayMap(x_input, xs, y_input, ys, out.difference.reshape(gx.shape),
                     out.replace.reshape(gx.shape), model.estimate(x_input),
                     model.estimate(y_input))


# --------------------------------------------------------------------------- the result
# --------------------------------------------------------------------------- assembly
def _basis(model: Model) -> tuple[Basis, list[str]]:
    notes = []
    unc = model.study.uncertainty
    if model.after_tax is not None and unc is not None and any(a == "marr" for a, _ in unc.inputs):
        notes.append("After tax, a 'marr' input moves the after-tax MARR in proportion "
                     "(after-tax MARR x sampled MARR / MARR).")
    if model.study.inflation is not None:
        notes.append("With inflation, AW differences are in constant (today's) money, the "
                     "basis of every decision.")
    notes += marr_notes(model.study)
    return model.basis, notes


def marr_notes(study: Study) -> list[str]:
    """Cautions on a MARR distribution that reaches negative or extreme rates.

    The MARR's physical bound is only "> -100 %"; a wide normal can draw rates at which
    every discount factor is extreme (common practice, no source: a MARR sits well above
    zero).  The trials are still run; the note says how many draws are affected.
    """
    dist = dict(study.uncertainty.inputs if study.uncertainty else ()).get("marr")
    if dist is None:
        return []
    bounds = dists.bounds_for("marr")
    notes = []
    negative = dists.share_below(dist, 0.0, bounds)
    if negative >= 0.01:
        notes.append(f"{negative:.0%} of the MARR draws are below zero (a negative required "
                     "return); check that the MARR distribution is meant to reach there.")
    low = float(dists.ppf(dist, [0.001], bounds)[0])
    if low < -0.5:
        notes.append(f"The MARR draws reach {low:.0%} (0.1 % quantile): at rates that far below "
                     "zero every discount factor is extreme and the AW figures of those trials "
                     "mean little; narrow the MARR distribution.")
    return notes


def decision_rule(study: Study) -> str:
    if study.study_period is None:
        return ("no study period: replace when the best challenger's AW at its ESL beats the "
                "defender's AW at its ESL by more than a cent")
    return (f"study period of {study.study_period} years: replace when the best option starts "
            "the challenger now; AW difference = best replace-now option minus best option "
            "keeping the defender at least a year")


def run_risk(study: Study, trials: int | None = None, seed: int | None = None,
             progress: Progress | None = None, cancelled: Cancelled | None = None,
             best_challenger: str | None = None, chunk: int | None = None) -> RiskResult:
    """Everything of the risk analysis.  ``progress`` runs 0..1 (the simulation takes the
    first 90%); ``cancelled()`` aborts with ``RiskCancelled``."""
    unc = study.uncertainty
    if unc is None:
        raise ValueError("the study has no uncertainty block")
    validate(study)
    try:
        model = Model(study)
    except NotImplementedError as exc:
        raise StudyError("$.uncertainty", str(exc)) from None
    sim = simulate(study, trials, seed, None if progress is None else
                   (lambda f: progress(0.9 * f)), cancelled, chunk=chunk,
                   model=model)
    if cancelled is not None and cancelled():
        raise RiskCancelled("cancelled during the sensitivity analysis")
    base = model.evaluate({}, 1)
    basis, notes = _basis(model)
    inputs = []
    for address, dist in unc.inputs:
        bounds = dists.bounds_for(address)
        p10, p90 = dists.ppf(dist, [0.10, 0.90], bounds)
        inputs.append(InputSummary(address, dist, model.estimate(address),
                                   dists.mean(dist, bounds), float(p10), float(p90),
                                   bounds.describe()))
    bars = tornado(model, unc.inputs)
    be = {address: breakeven(model, address) for address, _ in unc.inputs}
    ranges = {address: search_range(model, address) for address, _ in unc.inputs}
    if best_challenger is None:
        best_challenger = study.challengers[int(base.best_challenger[0])].name
    x_input = f"{best_challenger}.first_cost"
    two_way = two_way_map(model, x_input, "marr", dict(unc.inputs),
                          include={x_input: be.get(x_input), "marr": be.get("marr")})
    if study.study_period is not None and not np.isfinite(base.difference[0]):
        notes.append("With this study period there is no feasible 'replace now' option or no "
                     "feasible 'keep' option, so the AW difference is undefined.")
    if progress is not None:
        progress(1.0)
    return RiskResult(
        basis=basis, decision_rule=decision_rule(study),
        alternatives=tuple((a.name, a.max_life) for a in study.alternatives),
        challengers=tuple(c.name for c in study.challengers), simulation=sim,
        base_difference=float(base.difference[0]),
        base_action="replace" if bool(base.replace[0]) else "keep",
        inputs=tuple(inputs), tornado=tuple(bars), breakeven=be, breakeven_ranges=ranges,
        two_way=two_way, notes=tuple(notes))


def base_outcome(study: Study) -> Outcome:
    """The engine's decision at the estimates (the deterministic answer)."""
    return Model(study).evaluate({}, 1)
