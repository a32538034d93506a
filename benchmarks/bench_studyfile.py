"""Study-file benchmark: reading, parsing and fingerprinting a large fleet file, the real code
against the plain reference path, side by side in one run.

Run:  python benchmarks/bench_studyfile.py [--studies 5000] [--seed 2026] [--repeat 7]

Not a timed test: it prints numbers, ratios and whether the targets are met.

The fleet is bench_engine's seeded `fleet_document(N, seed)` (defender + 2 challengers,
lives 12-25, half the market values as year-by-year lists), written as `json.dumps` text.
Three steps of `tenure study FLEET.json --json`, each timed against its reference:

1. strict JSON (core.studyfile.loads_json: duplicate keys refused through an
     object_pairs_hook, huge integers marked), unchanged: compared with plain `json.loads`
     (the floor, no checks at all) and with the way round the hook that was tried
     (`candidate_loads_json`: json.loads, then the keys kept against the key tokens in the
     text), which is slower than the hook;
2. parsing the studies (core.studyfile.parse_study_document, the quick reader)
     reference: the per-field path (core.studyfile.parse_study_fields for every study);
3. fingerprints (core.studyfile.fingerprint, canonical text written directly)
     reference: SHA-256 of core.studyfile.canonical_json (study_to_dict + json.dumps).

Every case must give the same objects, Studies and fingerprints as its reference (checked
here). Targets: strict JSON within 1.25x plain json.loads; parsing and fingerprints at least
2x their reference; parsing at most 20 us a study;
fingerprints at most 10 us a study (float repr alone costs ~0.2 us for each of the ~40
numbers of a fleet study on the reference machine, printed below for comparison).
Timed in alternation (one call of each case per round, best of the rounds), with the
cyclic GC paused as timeit does. The machine's load is printed: other work moves every
number.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

from bench_engine import fleet_document  # noqa: E402
from timing import best_of  # noqa: E402

from core.studyfile import (  # noqa: E402
    canonical_json,
    fingerprint,
    loads_json,
    parse_study_document,
    parse_study_fields,
)


# --------------------------------------------------------------------------- references
def candidate_loads_json(text: str) -> Any:
    """The other way to refuse duplicate keys, measured to show why loads_json keeps its
    object_pairs_hook: plain C `json.loads`, then the keys the parser kept (a walk over every
    object) against the key tokens in the text (`"` then `:`; a string holding `":` only
    over-counts, which would send the text to the strict reader).  Huge integers are not
    handled here."""
    obj = json.loads(text)
    kept = 0
    stack = [obj]
    while stack:
        value = stack.pop()
        if type(value) is dict:
            kept += len(value)
            stack.extend([v for v in value.values() if type(v) is dict or type(v) is list])
        elif not set(map(type, value)) <= {float, int, str}:
            stack.extend([v for v in value if type(v) is dict or type(v) is list])
    if kept != text.count('":'):
        return loads_json(text)
    return obj


def reference_parse(obj: dict[str, Any]) -> list:
    return [parse_study_fields(s, f"$.studies[{k}]") for k, s in enumerate(obj["studies"])]


def reference_fingerprint(study: Any) -> str:
    return hashlib.sha256(canonical_json(study).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- timing
def alternate(cases: dict[str, Callable[[], Any]], rounds: int) -> dict[str, tuple[float, Any]]:
    """Best time and last value of each case, one call of each per round."""
    best: dict[str, tuple[float, Any]] = {}
    for _ in range(max(rounds, 1)):
        for name, fn in cases.items():
            seconds, value = best_of(fn)
            if name not in best or seconds < best[name][0]:
                best[name] = (seconds, value)
            else:
                best[name] = (best[name][0], value)
    return best


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--studies", type=int, default=5000)
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--repeat", type=int, default=7)
    args = parser.parse_args()
    n = args.studies

    text = json.dumps(fleet_document(n, args.seed))
    print(f"fleet: {n} studies, {len(text) / 1e6:.1f} MB of JSON; load average "
          f"{os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs; {args.repeat} rounds")

    read = alternate({"loads_json": lambda: loads_json(text),
                      "reference": lambda: json.loads(text),
                      "candidate": lambda: candidate_loads_json(text)}, args.repeat)
    obj = read["loads_json"][1]
    assert obj == read["reference"][1] == read["candidate"][1]

    parsed = alternate({"parse_study_document": lambda: parse_study_document(obj),
                        "reference": lambda: reference_parse(obj)}, args.repeat)
    studies = parsed["parse_study_document"][1]
    assert studies == parsed["reference"][1]

    prints = alternate({"fingerprint": lambda: [fingerprint(s) for s in studies],
                        "reference": lambda: [reference_fingerprint(s) for s in studies]},
                       args.repeat)
    assert prints["fingerprint"][1] == prints["reference"][1]

    numbers = [repr_numbers(s) for s in studies]
    floor = alternate({"repr": lambda: [list(map(repr, x)) for x in numbers]}, args.repeat)

    def row(label: str, real: float, ref: float, per: str = "") -> str:
        return (f"  {label:<34} {real * 1e3:8.1f} ms  reference {ref * 1e3:8.1f} ms  "
                f"{ref / real:5.2f}x{per}")

    us = 1e6 / n
    print("\nstep                                   real                  reference       ratio")
    print(f"  {'strict JSON (loads_json)':<34} {read['loads_json'][0] * 1e3:8.1f} ms  "
          f"plain json.loads {read['reference'][0] * 1e3:6.1f} ms  "
          f"{read['loads_json'][0] / read['reference'][0]:5.2f}x the floor   (json.loads + "
          f"counting kept keys instead of the hook: {read['candidate'][0] * 1e3:.1f} ms)")
    print(row("parse (parse_study_document)", parsed["parse_study_document"][0],
              parsed["reference"][0],
              f"   {parsed['parse_study_document'][0] * us:.1f} us/study "
              f"(reference {parsed['reference'][0] * us:.1f})"))
    print(row("fingerprints", prints["fingerprint"][0], prints["reference"][0],
              f"   {prints['fingerprint'][0] * us:.1f} us/study "
              f"(reference {prints['reference'][0] * us:.1f}; repr of its "
              f"{sum(map(len, numbers)) / n:.0f} numbers alone {floor['repr'][0] * us:.1f})"))
    total = parsed["parse_study_document"][0] + prints["fingerprint"][0]
    print(row("parse + fingerprints", total, parsed["reference"][0] + prints["reference"][0]))

    print("\ntargets")
    checks = [
        ("strict JSON <= 1.25x plain json.loads",
         read["loads_json"][0] <= 1.25 * read["reference"][0]),
        ("parse >= 2x the per-field path",
         parsed["reference"][0] / parsed["parse_study_document"][0] >= 2),
        ("parse <= 20 us a study", parsed["parse_study_document"][0] * us <= 20),
        ("fingerprints >= 2x the dict + json.dumps path",
         prints["reference"][0] / prints["fingerprint"][0] >= 2),
        ("fingerprints <= 10 us a study", prints["fingerprint"][0] * us <= 10),
    ]
    for label, ok in checks:
        print(f"  {label:<48} {'met' if ok else 'NOT MET'}")
    return 0


def repr_numbers(study: Any) -> list[float]:
    """Every float the canonical text of ``study`` writes (for the repr floor)."""
    out = [study.marr]
    for alt in study.alternatives:
        mv, oc = alt.market_values, alt.operating_costs
        out.append(alt.price)
        out += list(mv.values) if mv.values is not None else [mv.decline_rate or 0.0]
        out += list(oc.values) if oc.values is not None else [
            x for x in (oc.first, oc.gradient, oc.growth) if x is not None]
        out += [x.amount for x in alt.extra_costs]
    return out


if __name__ == "__main__":
    raise SystemExit(main())
