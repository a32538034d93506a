"""Benchmark: the vectorised Monte Carlo against a naive per-trial loop, and the CLI cost.

Run:  python benchmarks/bench_risk.py [--trials 200000] [--naive 2000]

1. ``core.risk.simulate`` on a study with a defender and two challengers (lives
   up to 25 years) and six uncertain inputs, 200,000 trials.  On a machine with two
   or more CPUs simulate evaluates its chunks of trials on two threads, so it is
   timed both by the wall clock and by the process's CPU time (both threads'
   work), and, for comparison, once more held to one thread.
2. The naive reference: for each trial, build the perturbed study and run
   ``core.study.run_study`` on it (what a per-trial loop would do, on one thread).
   It is timed on a subset (2,000 trials by default) and extrapolated linearly to
   the full count; the decisions of the subset are checked against the vectorised
   ones.
3. The whole ``tenure study --json`` command (a fresh process, imports included)
   on that study with and without its uncertainty block; target: within 3x.

Prints the timings side by side, the ratios (wall against wall, CPU against CPU) and
the machine's load average (other processes share the CPUs; the best of the
repeats is kept).  Invented demo data (Harrowgate Fabrication Ltd., Millbrook site).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from pathlib import Path
from unittest import mock

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from timing import study_cli_walls  # noqa: E402

from core import risk  # noqa: E402
from core.jsonout import risk_json  # noqa: E402
from core.risk import analysis  # noqa: E402
from core.study import run_study  # noqa: E402
from core.studyfile import parse_study  # noqa: E402

STUDY = {
    "format": "tenure-study", "version": 1,
    "title": "Millbrook CNC cell",
    "marr": 0.09,
    "defender": {"name": "Cell 2 lathe", "market_value": 38000, "max_life": 12,
                 "market_values": {"decline_rate": 0.15},
                 "operating_costs": {"first": 21000, "gradient": 1900},
                 "extra_costs": [{"year": 3, "amount": 12000, "label": "spindle rebuild"}]},
    "challengers": [
        {"name": "Twin-spindle lathe", "first_cost": 165000, "max_life": 25,
         "market_values": {"decline_rate": 0.12},
         "operating_costs": {"first": 9000, "gradient": 650}},
        {"name": "Turn-mill centre", "first_cost": 210000, "max_life": 20,
         "market_values": {"values": [170000 * 0.9 ** k for k in range(20)]},
         "operating_costs": {"first": 7000, "growth": 0.045},
         "extra_costs": [{"year": 10, "amount": 25000, "label": "controller retrofit"}]}],
    "uncertainty": {"trials": 200000, "seed": 2026, "inputs": {
        "marr": {"normal": [0.09, 0.02]},
        "Cell 2 lathe.operating_costs.first": {"triangular": [17000, 21000, 28000]},
        "Cell 2 lathe.market_value": {"lognormal": [38000, 6000]},
        "Twin-spindle lathe.first_cost": {"pert": [150000, 165000, 200000]},
        "Twin-spindle lathe.market_values.decline_rate": {"uniform": [0.09, 0.16]},
        "Turn-mill centre.operating_costs.growth": {"normal": [0.045, 0.015]}}},
}


def naive(study, draws: dict[str, np.ndarray], count: int) -> tuple[float, float, np.ndarray]:
    """Per-trial loop over core.study.run_study; returns (wall s, CPU s, replace flags)."""
    flags = np.empty(count, dtype=bool)
    start, cpu = time.perf_counter(), time.process_time()
    for t in range(count):
        case = risk.perturbed_study(study, {a: float(v[t]) for a, v in draws.items()})
        flags[t] = run_study(case).recommendation.action == "replace"
    return time.perf_counter() - start, time.process_time() - cpu, flags


def timed(fn):
    """(wall s, process CPU s, value) of one call."""
    start, cpu = time.perf_counter(), time.process_time()
    value = fn()
    return time.perf_counter() - start, time.process_time() - cpu, value


def load() -> str:
    return "load average (1, 5, 15 min) " + ", ".join(f"{x:.2f}" for x in os.getloadavg())


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=200_000)
    parser.add_argument("--naive", type=int, default=2_000, help="naive-loop subset size")
    parser.add_argument("--repeats", type=int, default=3,
                        help="runs of each vectorised and CLI timing (best time kept)")
    args = parser.parse_args()

    obj = json.loads(json.dumps(STUDY))
    obj["uncertainty"]["trials"] = args.trials
    body = {k: v for k, v in obj.items() if k not in ("format", "version")}
    study = parse_study(body)
    print(f"study: {study.title}: defender + {len(study.challengers)} challengers, lives "
          f"{[a.max_life for a in study.alternatives]}, {len(study.uncertainty.inputs)} "
          f"uncertain inputs, {args.trials:,} trials")

    print(f"CPUs: {os.cpu_count()}; simulate uses "
          f"{min(analysis.THREADS, os.cpu_count() or 1)} thread(s); {load()}")

    risk.simulate(study, trials=2000)  # warm-up (imports, first allocations)
    vec = vec_cpu = one = one_cpu = whole = float("inf")
    for _ in range(args.repeats):  # best of the repeats: the machine may be busy
        wall, cpu, sim = timed(lambda: risk.simulate(study))
        vec, vec_cpu = min(vec, wall), min(vec_cpu, cpu)
        with mock.patch.object(analysis, "THREADS", 1):
            wall, cpu, _ = timed(lambda: risk.simulate(study))
        one, one_cpu = min(one, wall), min(one_cpu, cpu)
        wall, _, full = timed(lambda: risk.run_risk(study))
        whole = min(whole, wall)

    count = min(args.naive, args.trials)
    draws = {a: v[:count] for a, v in risk.draw_inputs(study, count, sim.seed).items()}
    loop, loop_cpu, flags = naive(study, draws, count)
    agree = bool(np.array_equal(flags, sim.replace[:count]))
    scale = args.trials / count

    print(f"\n{'':38}{'wall s':>9}{'CPU s':>9}{'trials/s':>12}")
    print(f"{'vectorised simulate':38}{vec:9.3f}{vec_cpu:9.3f}{args.trials / vec:12,.0f}")
    print(f"{'  the same held to one thread':38}{one:9.3f}{one_cpu:9.3f}{args.trials / one:12,.0f}")
    print(f"{'run_risk (simulate + sensitivity)':38}{whole:9.3f}")
    print(f"{f'naive loop, {count:,} trials (measured)':38}{loop:9.3f}{loop_cpu:9.3f}"
          f"{count / loop:12,.0f}")
    print(f"{f'naive loop, {args.trials:,} (extrapolated)':38}{loop * scale:9.1f}"
          f"{loop_cpu * scale:9.1f}")
    speed = loop * scale / vec
    print(f"speed-up vectorised vs naive, wall: {speed:,.0f}x (one thread: "
          f"{loop * scale / one:,.0f}x); CPU: {loop_cpu * scale / vec_cpu:,.0f}x (one thread: "
          f"{loop_cpu * scale / one_cpu:,.0f}x)")
    print(f"(naive timed on {count:,} trials and scaled linearly); target >= 600x on the wall "
          f"clock: {'met' if speed >= 600 else 'NOT met'}; {load()}")
    print(f"decisions of the {count:,} naive trials agree with the vectorised run: {agree}")
    print(f"probability_replace {sim.probability_replace:.4f} "
          f"(standard error {sim.probability_standard_error:.4f})")
    print(f"memo-facing JSON size: {len(json.dumps(risk_json(full))):,} bytes")

    plain = {k: v for k, v in obj.items() if k != "uncertainty"}
    walls = study_cli_walls({"without": plain, "with": obj}, args.repeats,
                            env={"PYTHONHASHSEED": "0"})
    t_without, t_with = walls["without"], walls["with"]
    ratio = t_with / t_without
    print(f"\n`tenure study --json` without uncertainty: {t_without:.3f} s; with "
          f"{args.trials:,} trials: {t_with:.3f} s; ratio {ratio:.2f}x "
          f"(target within 3x: {'met' if ratio <= 3 else 'NOT met'})")
    return 0 if agree else 1


if __name__ == "__main__":
    sys.exit(main())
