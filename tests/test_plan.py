"""The capital plan (core/plan, docs/method.md §10): MILP optimum against exhaustive
enumeration, the simple rule, constraints, the unconstrained plan against each study's
planned year, and the command line."""

from __future__ import annotations

import itertools
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from core.errors import StudyError
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.plan import AFTER, AssetInput, OptionTable, make_plan, option_table, plan_input
from core.plan.rule import simple_rule
from core.plan.solve import solve
from core.study import run_study

ROOT = Path(__file__).resolve().parents[1]


def _asset(rng: np.random.Generator, n: int, site: str, must: bool = False) -> AssetInput:
    aw = -np.cumsum(rng.uniform(50, 400, n)) - 1000.0
    s = np.concatenate([[rng.uniform(100, 900)], np.sort(rng.uniform(0, 800, n))[::-1]])
    return AssetInput(f"asset {site} {rng.integers(1e9)}", None, site, "", "before-tax",
                      float(rng.uniform(0.0, 0.15)), "old", aw, "new",
                      float(rng.uniform(-1800, -1100)), (("new", float(rng.uniform(200, 1500))),),
                      1.0, s, n, None, (), 0, must)


def _enumerate(table: OptionTable, budgets: list[float | None], net: bool,
               limit: int | None) -> float:
    """Hand-written reference: try every combination of one allowed option per asset."""
    ok = table.valid & ~(table.forced[:, None] & (table.year != 0))
    choices = [np.flatnonzero(ok[a]) for a in range(table.size)]
    grid = np.array(list(itertools.product(*choices)))            # (combos, assets)
    rows = np.arange(table.size)[None, :]
    years = table.year[rows, grid]
    cap = (table.net_capital if net else table.capital)[rows, grid]
    feasible = np.ones(len(grid), dtype=bool)
    for y, b in enumerate(budgets):
        if b is not None:
            feasible &= np.where(years == y, cap, 0.0).sum(axis=1) <= b + 1e-6
    if limit is not None:
        for site in set(table.site):
            at = np.array([s == site for s in table.site])[None, :]
            for y in range(table.horizon):
                feasible &= ((years == y) & at).sum(axis=1) <= limit
    if not feasible.any():
        return float("nan")
    return float(table.value[rows, grid].sum(axis=1)[feasible].max())


@pytest.mark.parametrize("seed", range(40))
def test_milp_equals_enumeration(seed: int) -> None:
    # reference: exhaustive enumeration (hand-written above)
    rng = np.random.default_rng(seed)
    horizon = int(rng.integers(1, 5))
    count = int(rng.integers(2, 9))
    sites = ["North", "South"]
    assets = [_asset(rng, int(rng.integers(1, 5)), sites[k % 2], must=bool(rng.random() < 0.1))
              for k in range(count)]
    table = option_table(assets, horizon)
    if np.prod(table.valid.sum(axis=1), dtype=float) > 300_000:
        assets = assets[:5]
        table = option_table(assets, horizon)
    net = bool(rng.random() < 0.3)
    limit = int(rng.integers(1, 3)) if rng.random() < 0.4 else None
    spend = (table.net_capital if net else table.capital).max(axis=1).sum()
    budgets = [float(rng.uniform(0.2, 0.7) * spend) if rng.random() < 0.8 else None
               for _ in range(horizon)]
    best = _enumerate(table, budgets, net, limit)
    try:
        sol = solve(table, budgets, net=net, per_site_limit=limit)
    except StudyError:
        assert np.isnan(best)
        return
    assert sol.objective == pytest.approx(best, abs=1e-6)
    cap = (table.net_capital if net else table.capital)[np.arange(table.size), sol.choice]
    years = table.year[np.arange(table.size), sol.choice]
    for y, b in enumerate(budgets):
        if b is not None:
            assert cap[years == y].sum() <= b + 1e-6          # the budget holds every year
    assert np.all(years[table.forced] == 0)                    # must-replace now
    if limit is not None:
        for site in sites:
            at = np.array([s == site for s in table.site])
            for y in range(horizon):
                assert int(((years == y) & at).sum()) <= limit


def _hand_table() -> OptionTable:
    # Three assets, one plan year, each "replace now" (capital) or "after the horizon".
    # A: capital 60, waiting loses 60; B and C: capital 50, waiting loses 45 each.
    value = np.array([[0.0, -60.0], [0.0, -45.0], [0.0, -45.0]])
    year = np.array([[0, AFTER]] * 3)
    cap = np.array([[60.0, 0.0], [50.0, 0.0], [50.0, 0.0]])
    return OptionTable(1, value, year, cap, cap.copy(), np.ones((3, 2), bool),
                       np.full((3, 2), None, object), ("X", "X", "X"), np.zeros(3, bool),
                       ("A", "B", "C"))


def test_simple_rule_is_not_optimal_on_a_knapsack() -> None:
    # hand calculation, budget 100: the rule ranks by loss per unit of capital,
    # A 60/60 = 1.0 > B = C 45/50 = 0.9; it funds A (60), then neither B nor C fits
    # (60 + 50 = 110 > 100): total -45 - 45 = -90.  Funding B and C (50 + 50 = 100) and
    # deferring A gives -60, better by 30.
    table = _hand_table()
    rule = simple_rule(table, [100.0])
    assert rule is not None and rule.tolist() == [0, 1, 1]
    sol = solve(table, [100.0])
    assert sol.choice.tolist() == [1, 0, 0]
    assert sol.objective == pytest.approx(-60.0)


def test_simple_rule_gap_reported_in_the_plan() -> None:
    # hand calculation, two plan years, budget 100 each: asset A (capital 60) loses 12 by
    # waiting a year (12/60 = 0.2 per unit) and 60 by waiting past the horizon; B and C
    # (capital 50 each) lose 9 by waiting a year (9/50 = 0.18).  Year 0: the rule funds A,
    # leaving 40, so B and C wait; year 1: B and C both fit (50 + 50 = 100): -9 - 9.
    # Rule total 0 - 9 - 9 = -18.  Optimum: B and C now (0), A next year (-12): -12.
    value = np.array([[0.0, -12.0, -60.0], [0.0, -9.0, -45.0], [0.0, -9.0, -45.0]])
    year = np.array([[0, 1, AFTER]] * 3)
    cap = np.array([[60.0, 60.0, 0.0], [50.0, 50.0, 0.0], [50.0, 50.0, 0.0]])
    table = OptionTable(2, value, year, cap, cap.copy(), np.ones((3, 3), bool),
                        np.full((3, 3), None, object), ("X",) * 3, np.zeros(3, bool))
    assert simple_rule(table, [100.0, 100.0]).tolist() == [0, 1, 1]
    assert solve(table, [100.0, 100.0]).objective == pytest.approx(-12.0)


def _study(rng: np.random.Generator, k: int, period: int | None = None) -> Study:
    n_d = int(rng.integers(2, 9))
    d = Alternative("Old", "defender", float(rng.uniform(1000, 20000)), n_d,
                    MarketValues(decline_rate=float(rng.uniform(0.1, 0.4))),
                    OperatingCosts(first=float(rng.uniform(2000, 9000)),
                                   gradient=float(rng.uniform(200, 2500))))
    ch = tuple(Alternative(f"New {m}", "challenger", float(rng.uniform(20000, 80000)),
                           int(rng.integers(5, 12)),
                           MarketValues(decline_rate=float(rng.uniform(0.1, 0.3))),
                           OperatingCosts(first=float(rng.uniform(1000, 5000)),
                                          gradient=float(rng.uniform(100, 900))))
               for m in range(int(rng.integers(1, 3))))
    return Study(f"Study {k}", float(rng.uniform(0.02, 0.15)), d, ch, study_period=period)


@pytest.mark.parametrize("horizon", [1, 3, 10])
def test_unconstrained_plan_is_each_study_planned_year(horizon: int) -> None:
    # reference: each study's own recommendation.planned_defender_years (core.study.decide)
    from core.demo import demo_studies

    rng = np.random.default_rng(7)
    studies = list(demo_studies()) + [_study(rng, k) for k in range(30)] + \
        [_study(rng, k + 30, period=int(rng.integers(3, 9))) for k in range(10)]
    results = [run_study(s) for s in studies]
    inputs = [plan_input(r, s) for r, s in zip(results, studies, strict=True)]
    plan = make_plan(inputs, horizon=horizon)
    checked = 0
    for r, a in zip(results, plan.assets, strict=True):
        rec = r.recommendation
        planned = rec.planned_defender_years
        if rec.study_period is not None and rec.challenger is None:
            expected = None                       # kept for the whole study period
        else:
            expected = planned if planned < horizon else None
        assert a.year == expected, a.title
        assert a.best_year == expected and a.deferral_cost == 0.0
        checked += 1
    assert checked == len(studies) and plan.budget_cost == 0.0


def test_keep_values_batch_equals_the_formula_one_by_one() -> None:
    # Reference: V_j = PW_D(j) - AW_c (P/A,i,j) with (P/A,i,j) = ((1+i)^j - 1)/(i (1+i)^j),
    # the standard uniform-series present-worth factor, written out per asset and year.
    from core.decision import keep_values
    from core.factors import pa

    rng = np.random.default_rng(3)
    aw = -rng.uniform(100, 900, (6, 5))
    c = -rng.uniform(100, 900, 6)
    i = rng.uniform(0.01, 0.2, 6)
    batch = keep_values(aw, c, pa(i[:, None], np.arange(1, 6)))
    for k in range(6):
        for j in range(1, 6):
            factor = ((1 + i[k]) ** j - 1) / (i[k] * (1 + i[k]) ** j)
            assert batch[k, j] == pytest.approx(aw[k, j - 1] * factor - c[k] * factor, rel=1e-12)
        assert batch[k, 0] == 0.0


def test_must_replace_beyond_budget_is_refused() -> None:
    rng = np.random.default_rng(11)
    assets = [_asset(rng, 3, "North", must=True) for _ in range(3)]
    need = sum(a.prices[0][1] for a in assets)
    with pytest.raises(StudyError, match=r"plan year 0.*must-replace.*need"):
        make_plan(assets, horizon=2, budgets=[need - 1.0, need])
    plan = make_plan(assets, horizon=2, budgets=[need, need])
    assert all(a.year == 0 and a.forced for a in plan.assets)


def test_pins_and_override_cost() -> None:
    from core.plan.build import override_cost

    table = _hand_table()
    sol = solve(table, [100.0], pins={0: 0})
    # hand calculation: A pinned now (60) leaves 40, neither B nor C fits: -90 vs -60
    assert sol.choice.tolist() == [0, 1, 1] and sol.objective == pytest.approx(-90.0)
    rng = np.random.default_rng(5)
    assets = [_asset(rng, 4, "North") for _ in range(4)]
    free = make_plan(assets, horizon=3, budgets=[2000.0] * 3)
    pinned = make_plan(assets, horizon=3, budgets=[2000.0] * 3, pins={0: 2})
    assert pinned.assets[0].year == 2
    assert override_cost(assets, pinned) == pytest.approx(free.objective - pinned.objective)
    assert override_cost(assets, pinned) >= -1e-9


# --------------------------------------------------------------------------- command line
def _cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "core.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=120)


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    from core.demo import build_demo

    return build_demo(tmp_path_factory.mktemp("plan") / "demo.tenure")


def test_cli_json_keys(demo: Path) -> None:
    # reference: the JSON object in issue 13 / docs/method.md §10
    run = _cli("plan", str(demo), "--budgets", "200000,200000,120000", "--json")
    assert run.returncode == 0, run.stderr
    doc = json.loads(run.stdout)
    assert list(doc) == ["plan"]
    plan = doc["plan"]
    assert set(plan) == {"first_year", "horizon", "budgets", "basis_note", "status",
                         "objective", "unconstrained_objective", "budget_cost",
                         "rule_objective", "rule_gap", "capital_by_year",
                         "net_capital_by_year", "capital_by_site", "assets"}
    assert plan["status"] == "optimal" and plan["horizon"] == 3 and plan["first_year"] == 2026
    assert set(plan["assets"][0]) == {"title", "tag", "site", "challenger", "year", "capital",
                                      "net_capital", "value", "best_year", "deferral_cost",
                                      "forced"}
    for y, b in enumerate(plan["budgets"]):
        assert plan["capital_by_year"][y] <= b + 0.01
    assert set(plan["capital_by_site"]) == {"Kestrel Road", "Millbrook", "Ouseburn Yard"}
    by_site = np.array(list(plan["capital_by_site"].values())).sum(axis=0)
    assert by_site.tolist() == pytest.approx(plan["capital_by_year"])


def test_cli_must_and_infeasible(demo: Path) -> None:
    ok = _cli("plan", str(demo), "--budget", "400000", "--must", "PB-05", "--json")
    assert ok.returncode == 0, ok.stderr
    rows = {a["tag"]: a for a in json.loads(ok.stdout)["plan"]["assets"]}
    assert rows["PB-05"]["year"] == 0 and rows["PB-05"]["forced"] is True
    # PB-05 and PB-02 each need 182,000 now; a 300,000 budget cannot hold both
    bad = _cli("plan", str(demo), "--budget", "300000", "--must", "PB-05", "PB-02")
    assert bad.returncode == 2
    lines = bad.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: --budget: plan year 0 (2026)")
    assert "364,000" in lines[0] and "300,000" in lines[0]


@pytest.mark.parametrize("args, where", [
    (["--must", "NOPE"], "--must"),
    (["--budgets", "1,2", "--horizon", "3"], "--budgets"),
    (["--budget", "-5"], "--budget"),
    (["--budget", "1", "--budgets", "1"], "--budgets"),
    (["--per-site-limit", "0"], "--per-site-limit"),
    (["-o", "plan.txt"], "-o"),
    (["--sign", "id.p12"], "--sign"),
    (["--time-limit", "0"], "--time-limit"),
])
def test_cli_refusals(demo: Path, args: list[str], where: str) -> None:
    run = _cli("plan", str(demo), *args)
    assert run.returncode == 2
    lines = run.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith(f"error: {where}")


def test_cli_study_file_titles(tmp_path: Path) -> None:
    from core.demo import demo_studies
    from core.studyfile import dump_study_document

    path = tmp_path / "fleet.json"
    studies = demo_studies()
    path.write_text(dump_study_document(studies), encoding="utf-8")
    run = _cli("plan", str(path), "--budget", "250000", "--must", studies[3].title, "--json")
    assert run.returncode == 0, run.stderr
    assets = json.loads(run.stdout)["plan"]["assets"]
    assert all(a["tag"] is None and a["site"] is None for a in assets)
    assert assets[3]["forced"] and assets[3]["year"] == 0


@pytest.mark.parametrize("estimates", ["constant", "then-current"])
def test_unconstrained_plan_with_inflation_and_tax(estimates: str) -> None:
    # reference: each study's planned_defender_years, for studies with inflation (both
    # money bases), before and after tax (the adapter reads the decision basis)
    from dataclasses import replace

    from core.demo import demo_studies
    from core.estimates import Inflation

    studies = [replace(s, inflation=Inflation(0.04, estimates)) for s in demo_studies()]
    results = [run_study(s) for s in studies]
    inputs = [plan_input(r, s) for r, s in zip(results, studies, strict=True)]
    assert {a.basis for a in inputs} == {"before-tax", "after-tax"}
    plan = make_plan(inputs, horizon=10)
    for r, a, inp in zip(results, plan.assets, inputs, strict=True):
        rec = r.recommendation
        if rec.study_period is not None and rec.challenger is None:
            continue
        planned = rec.planned_defender_years
        assert a.year == (planned if planned < 10 else None), a.title
        if a.year is not None and a.year > 0:
            growth = 1.04 if estimates == "then-current" else 1.0
            # hand calculation: the first cost in year y in the study's money, P (1+f)^y
            assert a.capital == pytest.approx(inp.price(a.challenger) * growth ** a.year)


def test_asset_flag_is_read_when_the_workbook_has_one(demo: Path, monkeypatch) -> None:
    # a must-replace flag on the asset (a later schema) forces year 0 like --must does
    import dataclasses

    from core.plan.load import load_plan_source
    from core.workbook import Asset, Workbook

    @dataclasses.dataclass(frozen=True)
    class FlaggedAsset(Asset):
        must_replace: bool = False

    real = Workbook.assets

    def assets(self, site=None, **options):
        return [FlaggedAsset(**{f.name: getattr(a, f.name) for f in dataclasses.fields(a)},
                             must_replace=a.tag == "PB-05") for a in real(self, site, **options)]

    monkeypatch.setattr(Workbook, "assets", assets)
    source = load_plan_source(demo)
    flagged = [a for a in source.inputs if a.must]
    assert [a.tag for a in flagged] == ["PB-05"]
    assert "flagged must-replace on the asset" in flagged[0].must_reason
    plan = make_plan(source.inputs)
    assert {a.tag: a.year for a in plan.assets}["PB-05"] == 0
