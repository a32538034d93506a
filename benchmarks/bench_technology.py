"""Technology-plan benchmark: the numpy programme against a naive loop, and the CLI cost.

Run:  python benchmarks/bench_technology.py [--repeat 7]

Not a timed test: it prints numbers and whether the targets are met.

The study (invented Harrowgate Fabrication Ltd. figures): a defender with 8 years left
and three challengers with max lives 25, 20 and 15; horizon H = 30; each challenger's
model changes at its own rates.

1. In-process, before tax: ``core.technology.technology_plan`` (kernel PWs for every
   vintage, backward induction vectorised over ages and vintages, run twice: with the
   change rates and with none) against a naive reference written out below (plain Python
   loops: every vintage's cash flows year by year, then the same recursion state by
   state).  Both must give the same PW to 1e-6.  Timed in alternation, best of --repeat.
2. ``tenure study FILE --json`` as a subprocess on the same study with and without the
   ``technology`` block, before and after tax, alternated run by run (best of --repeat).
   Target: with the block <= 1.5x without it.
   The machine's load is printed: other work on the CPUs moves every number.
"""

from __future__ import annotations

import argparse
import copy
import os
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from timing import best_of, study_cli_walls  # noqa: E402

from core.studyfile import parse_study_document  # noqa: E402
from core.technology import technology_plan  # noqa: E402

STUDY = {
    "format": "tenure-study", "version": 1,
    "title": "Kestrel Road — laser cutting cell", "marr": 0.09,
    "defender": {"name": "CO2 laser (2013)", "market_value": 48000, "max_life": 8,
                 "market_values": {"decline_rate": 0.15},
                 "operating_costs": {"first": 61000, "gradient": 5200},
                 "extra_costs": [{"year": 3, "amount": 22000, "label": "resonator"}],
                 "depreciation": {"method": "straight_line", "basis": 310000, "years": 12,
                                  "age": 11}},
    "challengers": [
        {"name": "Fibre laser 6 kW", "first_cost": 420000, "max_life": 25,
         "market_values": {"decline_rate": 0.12},
         "operating_costs": {"first": 26000, "gradient": 1900},
         "extra_costs": [{"year": 8, "amount": 35000, "label": "source swap"}],
         "depreciation": {"method": "macrs", "class": 7},
         "technology": {"first_cost_change": -0.05, "operating_cost_change": -0.07}},
        {"name": "Fibre laser 4 kW", "first_cost": 310000, "max_life": 20,
         "market_values": {"decline_rate": 0.14},
         "operating_costs": {"first": 31000, "gradient": 2100},
         "depreciation": {"method": "macrs", "class": 7}},
        {"name": "Plasma table", "first_cost": 140000, "max_life": 15,
         "market_values": {"decline_rate": 0.18},
         "operating_costs": {"first": 47000, "gradient": 3300},
         "depreciation": {"method": "straight_line", "years": 10},
         "technology": {"first_cost_change": 0.01, "operating_cost_change": -0.01}}],
    "technology": {"horizon": 30, "first_cost_change": -0.03, "operating_cost_change": -0.04},
}


def variant(taxed: bool, technology: bool) -> dict:
    doc = copy.deepcopy(STUDY)
    if taxed:
        doc["tax"] = {"rate": 0.25, "after_tax_marr": 0.065}
    if not technology:
        doc.pop("technology")
        for ch in doc["challengers"]:
            ch.pop("technology", None)
    return doc


# --------------------------------------------------------------------------- naive reference
def naive_plan(study) -> tuple[float, float]:
    """(best PW, best PW with zero change) by plain loops: flows year by year, state by state."""
    def solve(change: bool) -> float:
        tech = study.technology
        H, i = tech.horizon, study.marr
        d = study.defender
        dS, dC = list(d.market_value_array()), list(d.cost_array())
        g_d = [0.0]
        for k in range(1, d.max_life + 1):
            pw = -d.price - sum(dC[j - 1] / (1 + i) ** j for j in range(1, k + 1)) \
                + dS[k - 1] / (1 + i) ** k
            g_d.append(pw)
        g_c = []
        for c in study.challengers:
            t_ = c.technology or tech
            gp, gc = (t_.first_cost_change, t_.operating_cost_change) if change else (0.0, 0.0)
            S, C = list(c.market_value_array()), list(c.operating_cost_array())
            X = list(c.extra_cost_array())
            table = []
            for t in range(H):
                row = [float("nan")]
                for k in range(1, c.max_life + 1):
                    pw = -c.price * (1 + gp) ** t / (1 + i) ** t
                    for j in range(1, k + 1):
                        pw -= (C[j - 1] * (1 + gc) ** t + X[j - 1]) / (1 + i) ** (t + j)
                    pw += S[k - 1] * (1 + gp) ** t / (1 + i) ** (t + k)
                    row.append(pw)
                table.append(row)
            g_c.append(table)
        # V[y][(m, a)]: m = -1 defender (age y), else challenger index with age a >= 1
        nxt = {}
        for a in range(1, d.max_life + 1):
            nxt[(-1, a)] = 0.0 if a == H else float("-inf")
        for c, ch in enumerate(study.challengers):
            for a in range(1, ch.max_life + 1):
                nxt[(c, a)] = 0.0
        for y in range(H - 1, -1, -1):
            buy = max(g_c[c][y][1] + nxt[(c, 1)] for c in range(len(study.challengers)))
            cur = {}
            if y <= d.max_life:
                keep = g_d[y + 1] - g_d[y] + nxt.get((-1, y + 1), float("-inf")) \
                    if y + 1 <= d.max_life else float("-inf")
                cur[(-1, y)] = max(keep, buy)
            for c, ch in enumerate(study.challengers):
                for a in range(1, min(ch.max_life, y) + 1):
                    v = y - a
                    keep = g_c[c][v][a + 1] - g_c[c][v][a] + nxt[(c, a + 1)] \
                        if a + 1 <= ch.max_life else float("-inf")
                    cur[(c, a)] = max(keep, buy)
            for c, ch in enumerate(study.challengers):
                for a in range(1, ch.max_life + 1):
                    cur.setdefault((c, a), float("-inf"))
            nxt = cur
        return nxt[(-1, 0)]

    return solve(True), solve(False)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    print(f"load average: {os.getloadavg()[0]:.2f} on {os.cpu_count()} CPUs")

    (study,) = parse_study_document(variant(taxed=False, technology=True))
    best = {"numpy": float("inf"), "naive": float("inf")}
    for _ in range(args.repeat):
        t, plan = best_of(lambda: technology_plan(study), 1)
        best["numpy"] = min(best["numpy"], t)
        t, ref = best_of(lambda: naive_plan(study), 1)
        best["naive"] = min(best["naive"], t)
    agree = abs(plan.present_worth - ref[0]) <= 1e-6 * abs(ref[0]) and \
        abs(plan.no_change_present_worth - ref[1]) <= 1e-6 * abs(ref[1])
    print(f"H = 30, 3 challengers (lives 25, 20, 15): programme {best['numpy'] * 1e3:.2f} ms, "
          f"naive loop {best['naive'] * 1e3:.2f} ms, ratio naive/programme "
          f"{best['naive'] / best['numpy']:.1f}x; same PW: {'yes' if agree else 'NO'} "
          f"({plan.present_worth:,.2f} vs {ref[0]:,.2f}); first action {plan.first_action}")

    ok = agree
    for taxed in (False, True):
        walls = study_cli_walls({tech: variant(taxed, tech) for tech in (False, True)},
                                args.repeat)
        ratio = walls[True] / walls[False]
        ok = ok and ratio <= 1.5
        print(f"tenure study --json, {'after' if taxed else 'before'} tax: without the block "
              f"{walls[False] * 1e3:.0f} ms, with it {walls[True] * 1e3:.0f} ms, ratio "
              f"{ratio:.2f}x (target <= 1.5x): {'met' if ratio <= 1.5 else 'NOT met'}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
