"""Monte Carlo simulation, one-way sensitivity (tornado), breakevens and a two-way map.

All of it runs on ``core.risk.engine.Model``: one vectorised evaluation per
chunk of trials (or per grid), never a Python loop over trials.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq

from core.errors import StudyError
from core.estimates import Distribution, Study
from core.risk import distributions as dists
from core.risk.engine import Model, Outcome
from core.risk.labels import input_label
from core.studyfile import split_address

Progress = Callable[[float], None]
Cancelled = Callable[[], bool]

PERCENTILES = (5, 10, 50, 90, 95)
#: Trials per vectorised chunk are chosen so that one (trials x years) array holds about
#: this many numbers (a few MB), which bounds memory for any trial count.
CHUNK_ELEMENTS = 1_000_000
HISTOGRAM_BINS = 40
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
    return int(np.random.SeedSequence().entropy)


def draw_inputs(study: Study, trials: int, seed: int) -> dict[str, np.ndarray]:
    """Exactly the input values ``simulate(study, trials, seed)`` uses, address -> (trials,)."""
    return _Draws(study, seed).next(trials)


# --------------------------------------------------------------------------- Monte Carlo
@dataclass(frozen=True)
class Simulation:
    """Per-trial results of a Monte Carlo run (arrays of length ``trials``)."""

    trials: int
    seed: int
    replace: np.ndarray
    difference: np.ndarray
    economic_life: dict[str, np.ndarray]
    best_challenger: np.ndarray

    @property
    def probability_replace(self) -> float:
        return float(np.mean(self.replace))

    @property
    def probability_standard_error(self) -> float:
        p = self.probability_replace
        return math.sqrt(p * (1.0 - p) / self.trials)


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
    ``progress(fraction)`` is called after each chunk; ``cancelled()`` before each one
    (True raises ``RiskCancelled``).
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
    replace = np.empty(trials, dtype=bool)
    difference = np.empty(trials)
    best = np.empty(trials, dtype=np.int32)
    esl = {a.name: np.empty(trials, dtype=np.int16) for a in study.alternatives}
    done = 0
    while done < trials:
        if cancelled is not None and cancelled():
            raise RiskCancelled(f"cancelled after {done} of {trials} trials")
        size = min(step, trials - done)
        out = model.evaluate(draws.next(size), size)
        sl = slice(done, done + size)
        replace[sl] = out.replace
        difference[sl] = out.difference
        best[sl] = out.best_challenger
        for name, years in out.economic_life.items():
            esl[name][sl] = years
        done += size
        if progress is not None:
            progress(done / trials)
    return Simulation(trials, seed, replace, difference, esl, best)


# --------------------------------------------------------------------------- sensitivity
@dataclass(frozen=True)
class TornadoBar:
    """One input swept from its distribution's 10th to 90th percentile, the rest fixed."""

    address: str
    low_value: float
    high_value: float
    difference_at_low: float
    difference_at_high: float

    @property
    def swing(self) -> float:
        return abs(self.difference_at_high - self.difference_at_low)


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


@dataclass(frozen=True)
class TwoWayMap:
    """Where replacing wins over a grid of two inputs (rows: y, columns: x)."""

    x_input: str
    x_values: np.ndarray
    y_input: str
    y_values: np.ndarray
    difference: np.ndarray   # (len(y), len(x))
    replace: np.ndarray      # (len(y), len(x)) bool
    x_estimate: float = math.nan
    y_estimate: float = math.nan


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
@dataclass(frozen=True)
class InputSummary:
    address: str
    distribution: Distribution
    estimate: float
    mean: float
    p10: float
    p90: float
    bounds: str


@dataclass(frozen=True)
class RiskResult:
    """Monte Carlo, tornado, breakevens and two-way map of one study (``to_json`` for views)."""

    basis: str
    decision_rule: str
    alternatives: tuple[tuple[str, int], ...]        # (name, max_life)
    challengers: tuple[str, ...]
    simulation: Simulation
    base_difference: float
    base_action: str
    inputs: tuple[InputSummary, ...]
    tornado: tuple[TornadoBar, ...]
    breakeven: dict[str, float | None]
    breakeven_ranges: dict[str, tuple[float, float]]
    two_way: TwoWayMap | None
    notes: tuple[str, ...] = field(default_factory=tuple)

    # ---------------------------------------------------------------- statistics
    @property
    def probability_replace(self) -> float:
        return self.simulation.probability_replace

    def difference_summary(self) -> dict[str, float | None]:
        d = self.simulation.difference
        d = d[np.isfinite(d)]
        if d.size == 0:
            return {f"p{p}": None for p in PERCENTILES} | {
                "mean": None, "mean_standard_error": None, "standard_deviation": None,
                "min": None, "max": None}
        q = np.percentile(d, PERCENTILES)
        sd = float(np.std(d, ddof=1)) if d.size > 1 else 0.0
        out: dict[str, float | None] = {f"p{p}": float(v) for p, v in zip(PERCENTILES, q,
                                                                          strict=True)}
        out |= {"mean": float(np.mean(d)), "mean_standard_error": sd / math.sqrt(d.size),
                "standard_deviation": sd, "min": float(d.min()), "max": float(d.max())}
        return out

    def histogram(self, bins: int = HISTOGRAM_BINS) -> tuple[np.ndarray, np.ndarray]:
        d = self.simulation.difference
        d = d[np.isfinite(d)]
        if d.size == 0:
            return np.zeros(0, dtype=int), np.zeros(0)
        lo, hi = float(d.min()), float(d.max())
        if hi - lo < 0.01:
            lo, hi = lo - 0.5, hi + 0.5
        counts, edges = np.histogram(d, bins=bins, range=(lo, hi))
        return counts, edges

    def economic_life_counts(self) -> dict[str, list[int]]:
        """Per alternative: how many trials had ESL 1, 2, ..., max_life."""
        return {name: np.bincount(self.simulation.economic_life[name],
                                  minlength=life + 1)[1:].tolist()
                for name, life in self.alternatives}

    def best_challenger_counts(self) -> dict[str, int]:
        counts = np.bincount(self.simulation.best_challenger, minlength=len(self.challengers))
        return {name: int(c) for name, c in zip(self.challengers, counts, strict=True)}

    # ---------------------------------------------------------------- output
    def to_json(self) -> dict:
        sim = self.simulation
        counts, edges = self.histogram()
        summary = self.difference_summary()
        out = {
            "basis": self.basis,
            "trials": sim.trials,
            "seed": sim.seed,
            "decision_rule": self.decision_rule,
            "probability_replace": _r(self.probability_replace, 6),
            "probability_replace_standard_error": _r(sim.probability_standard_error, 6),
            "base_case": {"action": self.base_action,
                          "annual_worth_difference": _r(self.base_difference, 2)},
            "annual_worth_difference": {k: _r(v, 2) for k, v in summary.items()},
            "annual_worth_difference_histogram": {
                "bin_edges": [round(float(e), 2) for e in edges],
                "counts": [int(c) for c in counts]},
            "economic_life_distribution": {
                name: {str(k + 1): c for k, c in enumerate(row)}
                for name, row in self.economic_life_counts().items()},
            "best_challenger_distribution": self.best_challenger_counts(),
            "inputs": [{"input": s.address, "distribution": s.distribution.kind,
                        "parameters": list(s.distribution.params), "estimate": s.estimate,
                        "mean": _r(s.mean, 6), "p10": _r(s.p10, 6), "p90": _r(s.p90, 6),
                        "physical_range": s.bounds} for s in self.inputs],
            "tornado": [{"input": b.address, "low_value": _r(b.low_value, 6),
                         "high_value": _r(b.high_value, 6),
                         "annual_worth_difference_at_low": _r(b.difference_at_low, 2),
                         "annual_worth_difference_at_high": _r(b.difference_at_high, 2),
                         "swing": _r(b.swing, 2)} for b in self.tornado],
            "breakeven": {k: _r(v, 8) for k, v in self.breakeven.items()},
            "breakeven_search_range": {k: [_r(lo, 8), _r(hi, 8)]
                                       for k, (lo, hi) in self.breakeven_ranges.items()},
            "notes": list(self.notes),
        }
        if self.two_way is not None:
            m = self.two_way
            out["two_way"] = {
                "x_input": m.x_input, "x_estimate": _r(m.x_estimate, 6),
                "x_values": [_r(v, 6) for v in m.x_values],
                "y_input": m.y_input, "y_estimate": _r(m.y_estimate, 6),
                "y_values": [_r(v, 6) for v in m.y_values],
                "annual_worth_difference": [[_r(v, 2) for v in row] for row in m.difference],
                "replace": [[bool(v) for v in row] for row in m.replace]}
        return out

    def format_text(self) -> str:
        from core.report import table
        from core.study import money

        sim = self.simulation
        s = self.difference_summary()

        def m(v: float | None) -> str:
            return "-" if v is None or not math.isfinite(v) else money(v)

        lines = [f"Risk ({self.basis}; {sim.trials:,} Monte Carlo trials, seed {sim.seed})",
                 f"Replace wins in {self.probability_replace:.1%} of trials "
                 f"(standard error {sim.probability_standard_error:.2%}).",
                 "AW difference = best challenger's AW minus the defender's "
                 f"({'each at its ESL' if self.decision_rule.startswith('no study') else 'study-period options'}); "
                 "positive favours replacing.",
                 f"  base case {m(self.base_difference)} ({self.base_action}); mean "
                 f"{m(s['mean'])} (standard error {m(s['mean_standard_error'])})",
                 "  percentiles: " + ", ".join(f"p{p} {m(s[f'p{p}'])}" for p in PERCENTILES)]
        lines += ["", "Tornado (each input from its 10th to 90th percentile, the rest at "
                  "their estimates):",
                  table(["input", "low", "high", "AW difference at low", "at high", "swing"],
                        [[input_label(b.address), _fmt(b.low_value), _fmt(b.high_value),
                          m(b.difference_at_low), m(b.difference_at_high),
                          m(b.swing)] for b in self.tornado])]
        lines += ["", "Breakeven (the value at which the recommendation flips, the rest at "
                  "their estimates):",
                  table(["input", "estimate", "breakeven", "searched"],
                        [[input_label(s_.address), _fmt(s_.estimate),
                          "no flip" if self.breakeven[s_.address] is None
                          else _fmt(self.breakeven[s_.address]),
                          f"{_fmt(self.breakeven_ranges[s_.address][0])} to "
                          f"{_fmt(self.breakeven_ranges[s_.address][1])}"]
                         for s_ in self.inputs])]
        rows = []
        for name, row in self.economic_life_counts().items():
            share = {k + 1: c / sim.trials for k, c in enumerate(row) if c}
            top = sorted(share.items(), key=lambda kv: -kv[1])[:3]
            rows.append([name, ", ".join(f"{k} y {v:.0%}" for k, v in top)])
        lines += ["", "Economic service life across trials (most frequent):",
                  table(["alternative", "ESL share"], rows)]
        lines += [f"Note: {n}" for n in self.notes]
        return "\n".join(lines)


def _r(x: float | None, digits: int) -> float | None:
    if x is None or not math.isfinite(x):
        return None
    return round(float(x), digits)


def _fmt(x: float) -> str:
    if abs(x) < 5 and x != int(x):
        return f"{x:.4f}"
    from core.study import money

    return money(x)


# --------------------------------------------------------------------------- assembly
def _basis(model: Model) -> tuple[str, list[str]]:
    notes = []
    if model.after_tax is not None and any(a == "marr" for a, _ in model.study.uncertainty.inputs):
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
