"""Capital-plan benchmark: seeded fleets of 500 and 5,000 assets over 10 plan years.

Run:  python benchmarks/bench_plan.py [--sizes 500 5000] [--seed 2026] [--out DIR]

Not a timed test: it prints numbers and whether the targets are met.

1. For each size, a seeded synthetic fleet (invented Harrowgate Fabrication Ltd. assets
   at three sites: compressors, forklifts, pumps, press brakes, packing lines) is saved as
   a workbook.  The budget is "tight in some years": 1.3 x the mean yearly capital of the
   plan without a budget, so the backlog of replacements due now must be spread out.
   In-process phases: study results (core.fleet.run_fleet), plan inputs, option table,
   MILP (scipy.optimize.milp / HiGHS): seconds, status and gap, objective against the
   simple rule and against the plan without a budget.
2. Option table, batched over assets (core.plan.option_table) against a naive per-asset
   loop calling core.decision.keep_values one asset at a time (same values checked).
3. `tenure study WB --json` and `tenure plan WB --json --budget B` as subprocesses on the
   same workbook, side by side.  Target (5,000 assets): plan <= 5x study.
With --out, the 500-asset workbook and its signed-ready plan memo are kept there.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from timing import best_of, cli_wall  # noqa: E402

from core.decision import keep_values  # noqa: E402
from core.estimates import Alternative, MarketValues, OperatingCosts, Study  # noqa: E402
from core.factors import pa  # noqa: E402
from core.fleet import run_fleet  # noqa: E402
from core.plan import make_plan, option_table, plan_input  # noqa: E402
from core.plan.solve import solve  # noqa: E402

SITES = ("Kestrel Road", "Millbrook", "Ouseburn Yard")
KINDS = (("AC", "Rotary screw compressor", "VSD screw compressor", 30000, 90000),
         ("FL", "Diesel forklift", "Electric counterbalance forklift", 25000, 45000),
         ("PU", "Process pump", "IE4 end-suction pump set", 9000, 25000),
         ("PB", "Hydraulic press brake", "Electric servo press brake", 120000, 240000),
         ("PK", "Packing line", "Automatic case erector and sealer", 60000, 160000))


def fleet(n: int, seed: int) -> list[tuple[str, str, Study]]:
    """(tag, site, study) for n invented assets; reproducible from the seed."""
    rng = np.random.default_rng(seed)
    out = []
    for k in range(n):
        code, old, new, lo, hi = KINDS[k % len(KINDS)]
        site = SITES[int(rng.integers(len(SITES)))]
        tag = f"{code}-{k:05d}"
        price = float(rng.uniform(lo, hi))
        life = int(rng.integers(3, 16))
        d = Alternative(old, "defender", round(price * rng.uniform(0.05, 0.35), 2), life,
                        MarketValues(decline_rate=round(float(rng.uniform(0.1, 0.3)), 4)),
                        OperatingCosts(first=round(price * rng.uniform(0.08, 0.2), 2),
                                       gradient=round(price * rng.uniform(0.01, 0.04), 2)))
        c = Alternative(new, "challenger", round(price, 2), int(rng.integers(8, 16)),
                        MarketValues(decline_rate=round(float(rng.uniform(0.12, 0.22)), 4)),
                        OperatingCosts(first=round(price * rng.uniform(0.04, 0.09), 2),
                                       gradient=round(price * rng.uniform(0.004, 0.012), 2)))
        title = f"{site} — {tag} {old}"
        out.append((tag, site, Study(title, round(float(rng.uniform(0.06, 0.12)), 4), d, (c,))))
    return out


def save_workbook(path: Path, assets: list[tuple[str, str, Study]], year: int) -> None:
    from core.workbook import Asset, Site, Workbook

    with Workbook.create(path, company="Harrowgate Fabrication Ltd.") as wb, wb.transaction():
        for site in SITES:
            wb.add_site(Site(site))
        for tag, site, study in assets:
            wb.add_asset(Asset(tag, study.defender.name, site))
            wb.save_study(tag, year, study)


def naive_values(inputs: list, horizon: int) -> list[np.ndarray]:
    """Reference: keep_values one asset at a time (the loop a script would write)."""
    out = []
    for a in inputs:
        v = keep_values(a.defender_aw, a.challenger_aw,
                        pa(a.rate, np.arange(1, len(a.defender_aw) + 1)))
        out.append(v[:min(horizon, a.defender_life + 1)])
    return out


def plan_first_tight(free, budget: float) -> str:
    years = [free.first_year + y for y, c in enumerate(free.capital_by_year) if c > budget]
    return ", ".join(map(str, years)) or "no year"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[500, 5000])
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--horizon", type=int, default=10)
    ap.add_argument("--out", type=Path, default=None, help="keep the 500-asset workbook here")
    args = ap.parse_args()
    year = 2026
    print(f"cpus {os.cpu_count()}, load {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.sizes:
            assets = fleet(n, args.seed)
            studies = [s for _, _, s in assets]
            folder = args.out if (args.out is not None and n == 500) else Path(tmp)
            folder.mkdir(parents=True, exist_ok=True)
            wb = folder / f"fleet-{n}.tenure"
            if wb.exists():
                wb.unlink()
            save_workbook(wb, assets, year)
            t_res, results = best_of(lambda studies=studies: run_fleet(studies))
            t_in, inputs = best_of(lambda results=results, assets=assets: [
                plan_input(r, s, tag=t, site=site)
                for r, (t, site, s) in zip(results, assets, strict=True)])
            t_tab, table = best_of(lambda inputs=inputs: option_table(inputs, args.horizon))
            t_naive, naive = best_of(lambda inputs=inputs: naive_values(inputs, args.horizon))
            same = all(np.allclose(v, table.value[k, :len(v)], rtol=0, atol=1e-9)
                       for k, v in enumerate(naive))
            free = make_plan(inputs, horizon=args.horizon, first_year=year)
            budget = round(1.3 * float(np.mean(free.capital_by_year)), -3)
            budgets = [budget] * args.horizon
            t_solve, sol = best_of(lambda table=table, budgets=budgets: solve(table, budgets))
            plan = make_plan(inputs, horizon=args.horizon, budgets=budgets, first_year=year,
                             table=table, solution=sol)
            tight = [plan.first_year + y for y, (c, b) in
                     enumerate(zip(free.capital_by_year, budgets, strict=True)) if c > b]
            print(f"\n{n} assets, {args.horizon} plan years, budget {budget:,.0f} a year "
                  f"(tight in {', '.join(map(str, tight)) or 'no year'}):")
            print(f"  study results {t_res:7.3f} s | plan inputs {t_in:7.3f} s | option table "
                  f"{t_tab:7.3f} s (naive loop {t_naive:7.3f} s, {t_naive / t_tab:5.1f}x; "
                  f"same values: {same})")
            print(f"  MILP {t_solve:7.3f} s: {sol.status}; {int(table.valid.sum()):,} options")
            loose = round(2.0 * float(np.mean(free.capital_by_year)), -3)
            t_loose, sol2 = best_of(lambda table=table, loose=loose: solve(table, [loose] * args.horizon))
            print(f"  MILP {t_loose:7.3f} s: {sol2.status} with a looser budget {loose:,.0f} a "
                  f"year (tight in {plan_first_tight(free, loose)})")
            print(f"  value: plan {plan.objective:,.0f}; without budget "
                  f"{plan.unconstrained_objective:,.0f} (budget costs {plan.budget_cost:,.0f}); "
                  f"simple rule {'none' if plan.rule_objective is None else f'{plan.rule_objective:,.0f}'}"
                  f" (gap {'-' if plan.rule_gap is None else f'{plan.rule_gap:,.0f}'}); "
                  f"{len(plan.deferred)} deferred")
            print(f"  capital by year: {', '.join(f'{v / 1e6:.2f}M' for v in plan.capital_by_year)}")
            t_study = cli_wall(["study", str(wb), "--json"])
            t_plan = cli_wall(["plan", str(wb), "--json", "--budget", str(budget)])
            ratio = t_plan / t_study
            print(f"  tenure study --json {t_study:6.2f} s | tenure plan --json {t_plan:6.2f} s | "
                  f"ratio {ratio:4.2f}x" + (f" -> target <= 5x {'met' if ratio <= 5 else 'NOT met'}"
                                          if n >= 5000 else ""))
            if args.out is not None and n == 500:
                cli_wall(["plan", str(wb), "--budget", str(budget), "-o",
                          str(folder / "plan-500.pdf")])
                print(f"  kept {wb} and {folder / 'plan-500.pdf'} (budget {budget:,.0f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
