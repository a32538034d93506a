"""Engine benchmark: the one batched engine against a naive per-year Python loop, and the CLI.

Run:  python benchmarks/bench_engine.py [--studies 5000] [--seed 2026] [--repeat 3]

Not a timed test: it prints numbers, ratios side by side, and whether the targets are met.

1. One study and a seeded fleet of N studies (defender + 2 challengers, lives 12-25, random
   estimates, invented Harrowgate Fabrication Ltd. assets), each solved by
     - naive:   plain Python loops, year by year (written out below, no numpy), giving
                every AW schedule, every ESL, the best challenger, keep/replace, the RV,
                the planned replacement year and the one-more-year check;
     - engine:  core.study.run_studies (typed results: every figure of the decision is
                computed for the whole fleet; a plain study's per-study objects and the
                figures only views read are built when first read), for information the
                batch decision pass alone (core.batch.stack + the before-tax pass of
                core.study), and run_studies followed by reading every study's objects
                (what a caller that shows every study pays).
   Both must agree on every ESL and every decision.  Target: run_studies >= 30x naive on
   the fleet.  Timed in alternation, with the cyclic GC paused as timeit does.
2. `tenure study FILE --json` as a subprocess on one study and on the fleet file, and
   `python -c "import numpy"` in the same run, from compiled bytecode as an install runs.
   Targets: fleet <= 1.5x one study; one study <= 2x the numpy import.  For scale, the
   time json.dumps alone takes to write the fleet's JSON text in one process is printed.
The machine's load is printed: other work on the CPUs moves every number.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from timing import alternating_walls, best_of  # noqa: E402

from core.batch import stack  # noqa: E402
from core.study import CHUNK, _before_tax, run_studies  # noqa: E402
from core.studyfile import parse_study_document  # noqa: E402

SITES = ("Kestrel Road", "Millbrook", "Ouseburn Yard")


# --------------------------------------------------------------------------- data
def fleet_document(n: int, seed: int) -> dict:
    """A study file with n studies, random but reproducible estimates."""
    rng = random.Random(seed)

    def alternative(name: str, key: str, price: float) -> dict:
        life = rng.randint(12, 25)
        if rng.random() < 0.5:
            mv = {"decline_rate": round(rng.uniform(0.08, 0.30), 4)}
        else:
            keep = rng.uniform(0.78, 0.92)
            mv = {"values": [round(price * keep**k, 2) for k in range(1, life + 1)]}
        first = round(rng.uniform(2000, 15000), 2)
        if rng.random() < 0.5:
            oc = {"first": first, "gradient": round(rng.uniform(100, 2500), 2)}
        else:
            oc = {"first": first, "growth": round(rng.uniform(0.01, 0.12), 4)}
        alt = {"name": name, key: price, "max_life": life, "market_values": mv,
               "operating_costs": oc}
        if rng.random() < 0.3:
            alt["extra_costs"] = [{"year": rng.randint(1, life),
                                   "amount": round(rng.uniform(1000, 20000), 2),
                                   "label": "overhaul"}]
        return alt

    studies = []
    for k in range(n):
        studies.append({
            "title": f"Harrowgate Fabrication Ltd., {SITES[k % 3]}, asset {k:05d}",
            "marr": round(rng.uniform(0.04, 0.15), 4),
            "defender": alternative("Existing unit", "market_value",
                                    round(rng.uniform(5000, 40000), 2)),
            "challengers": [alternative("Challenger A", "first_cost",
                                        round(rng.uniform(40000, 120000), 2)),
                            alternative("Challenger B", "first_cost",
                                        round(rng.uniform(40000, 120000), 2))]})
    return {"format": "tenure-study", "version": 1, "studies": studies}


# --------------------------------------------------------------------------- naive reference
def naive_alternative(alt) -> tuple[list[float], list[float]]:
    """S_1..S_n and C_j + X_j of one alternative, year by year in plain Python."""
    n = alt.max_life
    price = alt.price
    mv = alt.market_values
    s = []
    for k in range(1, n + 1):
        if mv.values is not None:
            s.append(mv.values[k - 1])
        else:
            s.append(price * (1.0 - mv.decline_rate) ** k)
    oc = alt.operating_costs
    c = []
    for j in range(1, n + 1):
        if oc.values is not None:
            value = oc.values[j - 1]
        elif oc.growth is not None:
            value = oc.first * (1.0 + oc.growth) ** (j - 1)
        else:
            value = oc.first + (j - 1) * (oc.gradient or 0.0)
        for extra in alt.extra_costs:
            if extra.year == j:
                value += extra.amount
        c.append(value)
    return s, c


def naive_study(study) -> dict:
    """Every AW, ESL, best challenger, decision and RV of one study, in plain Python."""
    i = study.marr
    out = {}
    for alt in study.alternatives:
        s, c = naive_alternative(alt)
        aws = []
        for k in range(1, alt.max_life + 1):
            pw = -alt.price + s[k - 1] / (1.0 + i) ** k
            annuity = 0.0
            for j in range(1, k + 1):
                pw -= c[j - 1] / (1.0 + i) ** j
                annuity += 1.0 / (1.0 + i) ** j
            aws.append(pw / annuity)
        esl, best = 1, round(aws[0], 2)
        for k in range(2, len(aws) + 1):
            if round(aws[k - 1], 2) > best:
                esl, best = k, round(aws[k - 1], 2)
        out[alt.name] = (aws, esl, s, c)
    best_name = study.challengers[0].name
    for ch in study.challengers[1:]:
        if round(out[ch.name][0][out[ch.name][1] - 1], 2) > \
                round(out[best_name][0][out[best_name][1] - 1], 2):
            best_name = ch.name
    target = out[best_name][0][out[best_name][1] - 1]
    d_aws, d_esl, d_s, d_c = out[study.defender.name]
    replace = round(target, 2) > round(d_aws[d_esl - 1], 2)
    rv = None
    for k in range(1, study.defender.max_life + 1):     # RV: max_k of P with AW_k(P) = target
        annuity = 0.0
        rest = d_s[k - 1] / (1.0 + i) ** k
        for j in range(1, k + 1):
            annuity += 1.0 / (1.0 + i) ** j
            rest -= d_c[j - 1] / (1.0 + i) ** j
        p = rest - target * annuity
        rv = p if rv is None or p > rv else rv
    # Planned replacement year: the j maximising V_j = [AW_D,j - AW_c*](P/A,i,j), V_0 = 0,
    # at the cent; and the one-more-year check, MC_1 = -AW_D,1 against the challenger's EAC.
    planned, best_v, annuity = 0, 0.0, 0.0
    for k in range(1, study.defender.max_life + 1):
        annuity += 1.0 / (1.0 + i) ** k
        value = round(d_aws[k - 1] * annuity - target * annuity, 2)
        if value > best_v:
            planned, best_v = k, value
    keep_next = -d_aws[0] < -target - 0.01
    return {"esl": [out[a.name][1] for a in study.alternatives], "best": best_name,
            "replace": replace, "rv": rv, "planned": planned, "keep_next": keep_next}


# --------------------------------------------------------------------------- timing
def interleaved(fns: dict, rounds: int, inner: dict) -> tuple[dict, dict]:
    """Best wall time of each function, measured in alternation round by round (``inner[name]``
    calls per round), so a slow spell of the machine lands on every case, not on one."""
    best = {name: float("inf") for name in fns}
    value: dict = {}
    for _ in range(rounds):
        for name, fn in fns.items():
            for _ in range(inner.get(name, 1)):
                t, value[name] = best_of(fn, 1)
                best[name] = min(best[name], t)
    return best, value


def engine_core(studies):
    """The batch decision pass alone (no per-study result objects), in run_studies' chunks."""
    return [_before_tax(stack(studies[k:k + CHUNK])).decision
            for k in range(0, len(studies), CHUNK)]


def read_everything(results) -> int:
    """Read every study's before-tax basis and warnings: a plain study's objects are built on
    first read (core.study._BatchStudyResult), so this is the cost of all of them."""
    return sum(len(r.before_tax.alternatives) + len(r.warnings) for r in results)


def check_agreement(results, naive) -> int:
    """Studies where the engine and the naive loop disagree (ESL, decision, RV, planned year,
    one-more-year check)."""
    bad = 0
    for r, ref in zip(results, naive, strict=True):
        rec = r.recommendation
        esl = [a.economic_life for a in r.alternatives]
        keep_next = rec.one_more_year.defender_marginal_cost < \
            rec.one_more_year.challenger_annual_cost - 0.01
        rv = rec.replacement_value
        ok = (esl == ref["esl"] and rec.best_challenger == ref["best"]
              and (rec.action == "replace") == ref["replace"]
              and rv is not None and abs(rv - ref["rv"]) <= 1e-6 * max(1.0, abs(ref["rv"]))
              and (ref["replace"] or rec.planned_defender_years == max(ref["planned"], 1))
              and keep_next == ref["keep_next"])
        bad += not ok
    return bad


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--studies", type=int, default=5000)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()

    doc = fleet_document(args.studies, args.seed)
    studies = parse_study_document(doc)
    one = studies[:1]
    print(f"fleet: {len(studies)} studies, "
          f"{sum(len(s.alternatives) for s in studies)} alternatives, lives 12-25; "
          f"cpus {os.cpu_count()}, load {os.getloadavg()[0]:.1f}")

    rows = []
    reps_one = 200
    t_naive_one, _ = best_of(lambda: [naive_study(s) for s in one * reps_one], args.repeat)
    t_run_one, _ = best_of(lambda: [run_studies([s]) for s in one * reps_one], args.repeat)
    rows.append(("one study: naive loop", t_naive_one / reps_one, None))
    rows.append(("one study: run_studies (full result)", t_run_one / reps_one,
                 t_naive_one / t_run_one))

    times, values = interleaved({"naive": lambda: [naive_study(s) for s in studies],
                                 "engine": lambda: run_studies(studies),
                                 "decision": lambda: engine_core(studies)},
                                args.repeat, {"engine": 2, "decision": 3})
    t_naive, naive = times["naive"], values["naive"]
    t_run, results = times["engine"], values["engine"]
    t_core = times["decision"]
    rows.append(("fleet: naive loop", t_naive, None))
    rows.append(("fleet: run_studies (full typed results)", t_run, t_naive / t_run))
    rows.append(("fleet: batch decision pass alone", t_core, t_naive / t_core))
    t_read, _ = best_of(lambda: read_everything(run_studies(studies)), args.repeat)
    rows.append(("fleet: run_studies, then every figure read", t_read, t_naive / t_read))
    bad = check_agreement(results, naive)

    print(f"\n{'case':46} {'seconds':>10}  {'naive / engine':>14}")
    for name, secs, ratio in rows:
        print(f"{name:46} {secs:10.5f}  {'' if ratio is None else f'{ratio:13.1f}x'}")
    print(f"studies where engine and naive loop disagree (ESL, decision, RV, planned year, "
          f"one-more-year check): {bad}")
    ratio = t_naive / t_run
    print(f"target run_studies >= 30x naive on the fleet: {ratio:.1f}x -> "
          f"{'met' if ratio >= 30 else 'NOT met'}")

    with tempfile.TemporaryDirectory() as tmp:
        fleet_file = Path(tmp) / "fleet.json"
        one_file = Path(tmp) / "one.json"
        fleet_file.write_text(json.dumps(doc), encoding="utf-8")
        one_file.write_text(json.dumps({"format": "tenure-study", "version": 1,
                                        **doc["studies"][0]}), encoding="utf-8")
        cli = [sys.executable, "-m", "core.cli", "study"]
        walls = alternating_walls({"numpy": [sys.executable, "-c", "import numpy"],
                                   "one": [*cli, str(one_file), "--json"],
                                   "fleet": [*cli, str(fleet_file), "--json"]}, args.repeat)
        t_numpy, t_cli_one, t_cli_fleet = walls["numpy"], walls["one"], walls["fleet"]
    from core.jsonout import dumps_compact, study_jsons

    docs = study_jsons(run_studies(studies))
    t_text, text = best_of(lambda: ",\n".join(dumps_compact(d) for d in docs), args.repeat)
    fleet_ratio = t_cli_fleet / t_cli_one
    start_ratio = t_cli_one / t_numpy
    print(f"\n`python -c 'import numpy'`:          {t_numpy:7.3f} s (best of {args.repeat})")
    print(f"`tenure study --json`, one study:   {t_cli_one:7.3f} s")
    print(f"`tenure study --json`, {len(studies)} studies: {t_cli_fleet:7.3f} s")
    print(f"  of which, in-process: json.dumps of the fleet's {len(text) / 1e6:.0f} MB of JSON text "
          f"alone: {t_text:.3f} s (one process; the CLI splits the fleet over two)")
    print(f"fleet / one study: {fleet_ratio:.2f}x -> target <= 1.5x "
          f"{'met' if fleet_ratio <= 1.5 else 'NOT met'}")
    print(f"one study / numpy import: {start_ratio:.2f}x -> target <= 2x "
          f"{'met' if start_ratio <= 2 else 'NOT met'}")
    return 0 if bad == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
