"""The vectorised fleet path (core.fleet) must give exactly what run_study gives, study by study.

Sources: core.study.run_study as the reference (itself checked against hand calculations and
numpy-financial in test_engine.py); "hand calculation" for the closed-form replacement value.
"""

from __future__ import annotations

import dataclasses
import json
import random
import sys

import numpy as np
import pytest
from conftest import document

from core.cli import main
from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.fleet import run_fleet
from core.jsonout import _list, study_json
from core.results import StudyResult
from core.study import run_study


def _random_alt(rng: random.Random, name: str, role: str) -> Alternative:
    life = rng.randint(1, 14)
    price = round(rng.uniform(-2000 if role == "defender" else 0, 90000), 2)
    if rng.random() < 0.5 and price >= 0:
        mv = MarketValues(decline_rate=round(rng.uniform(-0.05, 0.6), 3))
    else:
        mv = MarketValues(values=tuple(round(rng.uniform(-3000, 60000), 2)
                                       for _ in range(life + rng.randint(0, 2))))
    pick = rng.random()
    if pick < 0.25:
        oc = OperatingCosts(values=tuple(round(rng.uniform(-500, 20000), 2) for _ in range(life)))
    elif pick < 0.5:
        oc = OperatingCosts(first=round(rng.uniform(0, 15000), 2),
                            gradient=round(rng.uniform(-200, 3000), 2))
    elif pick < 0.75:
        oc = OperatingCosts(first=round(rng.uniform(0, 15000), 2),
                            growth=round(rng.uniform(-0.1, 0.2), 3))
    else:
        oc = OperatingCosts(first=round(rng.uniform(0, 15000), 2))
    extras = tuple(ExtraCost(rng.randint(1, life), round(rng.uniform(100, 20000), 2), "overhaul")
                   for _ in range(rng.randint(0, 2)))
    return Alternative(name, role, price, life, mv, oc, extras)


def _random_study(rng: random.Random, k: int) -> Study:
    d = _random_alt(rng, "Existing unit", "defender")
    chs = tuple(_random_alt(rng, f"Option {c}", "challenger") for c in range(rng.randint(1, 4)))
    period = None
    if rng.random() < 0.3:
        period = rng.randint(1, d.max_life + max(c.max_life for c in chs))
    marr = rng.choice([0.0, 0.05, 0.1, 0.18, -0.03, round(rng.uniform(0.01, 0.2), 4)])
    return Study(f"Ouseburn Yard asset {k}", marr, d, chs, study_period=period)


def _same(a, b) -> None:
    """Bit for bit: every field of both bases, every array, the replacement value."""
    assert a.study is b.study and a.fingerprint == b.fingerprint
    assert a.warnings == b.warnings
    assert (a.after_tax is None) == (b.after_tax is None)
    for x_basis, y_basis in ((a.before_tax, b.before_tax), (a.after_tax, b.after_tax)):
        if x_basis is None:
            continue
        for field in dataclasses.fields(x_basis):
            u, v = getattr(x_basis, field.name), getattr(y_basis, field.name)
            if field.name == "alternatives":
                for x, y in zip(u, v, strict=True):
                    for f in dataclasses.fields(x):
                        p, q = getattr(x, f.name), getattr(y, f.name)
                        if isinstance(p, np.ndarray):
                            assert np.array_equal(p, q), f.name
                        elif f.name != "tax":
                            assert p == q, f.name
            elif isinstance(u, np.ndarray):
                assert np.array_equal(u, v, equal_nan=True), field.name
            else:
                assert u == v, field.name


def test_fleet_equals_run_study_on_random_studies() -> None:
    # Source: core.study.run_study (reference), 300 random studies with every estimate form.
    rng = random.Random(20261202)
    studies = [_random_study(rng, k) for k in range(300)]
    for a, b in zip(run_fleet(studies), [run_study(s) for s in studies], strict=True):
        _same(a, b)
    # Equal-sized studies take the (studies, alternatives, years) path.
    three = [s for s in studies if len(s.challengers) == 2]
    assert len(three) > 20
    for a, b in zip(run_fleet(three), [run_study(s) for s in three], strict=True):
        _same(a, b)


def test_fleet_sums_extra_costs_in_one_year_as_run_study_does() -> None:
    # Source: core.study.run_study (reference). Several one-off costs in one year are summed
    # in list order before the operating cost is added (0.1 + 0.2 + 0.3 depends on the
    # order in floating point); explicit lists longer than max_life are cut at max_life.
    d = Alternative("Existing unit", "defender", 1000.1, 3,
                    MarketValues(values=(700.3, 500.7, 300.1, 99.0, 98.0)),
                    OperatingCosts(values=(100.3, 110.7, 120.1, 1.0)),
                    (ExtraCost(2, 0.1), ExtraCost(2, 0.2), ExtraCost(2, 0.3), ExtraCost(3, 1e16),
                     ExtraCost(3, 1.0), ExtraCost(3, -1e16)))
    c = Alternative("Challenger", "challenger", 5000.3, 4, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=50.1, growth=0.07),
                    (ExtraCost(1, 0.3), ExtraCost(1, 0.2), ExtraCost(1, 0.1)))
    studies = [Study("Kestrel Road cell", 0.07, d, (c,)), Study("Millbrook cell", 0.0, c, (d,))]
    for a, b in zip(run_fleet(studies), [run_study(s) for s in studies], strict=True):
        _same(a, b)


def test_fleet_with_tax_and_inflation_studies() -> None:
    # Source: core.study.run_study; studies with inflation are in the same batch.
    from core.estimates import Inflation

    rng = random.Random(3)
    plain = _random_study(rng, 1)
    hooked = dataclasses.replace(_random_study(rng, 2), inflation=Inflation(0.03, "constant"))
    out = run_fleet([plain, hooked])
    _same(out[0], run_study(plain))
    _same(out[1], run_study(hooked))
    from core.fleet import run_fleet_json

    docs = run_fleet_json([hooked, plain])
    assert docs[0] == study_json(run_study(hooked))
    assert docs[1]["title"] == plain.title and docs[1]["alternatives"][0]["name"] == "Existing unit"


def test_closed_form_replacement_value_by_hand() -> None:
    # Source: hand calculation at i = 0 (see test_engine.py): RV = max(9.75, 8.5, 5.25) = 9.75.
    d = Alternative("Old press", "defender", 10.0, 3, MarketValues(values=(6.0, 3.0, 1.0)),
                    OperatingCosts(values=(2.0, 4.0, 7.0)))
    c = Alternative("New press", "challenger", 20.0, 4, MarketValues(values=(12.0, 8.0, 5.0, 3.0)),
                    OperatingCosts(values=(1.0, 1.0, 2.0, 2.0)))
    (r,) = run_fleet([Study("Hand", 0.0, d, (c,))])
    assert r.recommendation.replacement_value == pytest.approx(9.75, abs=1e-12)


def test_rounding_helper_matches_python_round() -> None:
    # Source: Python's round() (correctly rounded) as reference, including exact halves.
    rng = np.random.default_rng(11)
    x = np.concatenate([rng.uniform(-1e5, 1e5, 20000), np.round(rng.uniform(-1e5, 1e5, 20000), 5),
                        np.round(rng.uniform(-1e9, 1e9, 20000), 5),
                        [0.5e-4, -0.5e-4, 1.00005, 2.5e13, 1e15 + 0.5, 1e17, -0.0, 0.0]])
    assert _list(x) == [round(float(v), 4) for v in x]
    assert _list(x, 2) == [round(float(v), 2) for v in x]


def test_cli_fleet_output_equals_single_runs(capsys, write_json) -> None:
    # Source: docs/method.md §6 (one JSON object {"studies": [...]}); run_study per study as reference.
    rng = random.Random(8)
    studies = [_random_study(rng, k) for k in range(12)]
    from core.studyfile import dump_study_document

    file = write_json(dump_study_document(studies))
    assert main(["study", str(file), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert list(out) == ["studies"]
    want = [study_json(run_study(s)) for s in studies]
    for got, ref in zip(out["studies"], want, strict=True):
        assert got == ref
    one = write_json(document(), "one.json")
    assert main(["study", str(one), "--json"]) == 0
    assert len(json.loads(capsys.readouterr().out)["studies"]) == 1


def test_fleet_json_equals_to_json_of_run_study() -> None:
    # Source: study_json(run_study(s)) (reference): one path, so the same object exactly.
    from core.fleet import run_fleet_json

    rng = random.Random(77)
    studies = [_random_study(rng, k) for k in range(200)]
    for got, s in zip(run_fleet_json(studies), studies, strict=True):
        ref = study_json(run_study(s))
        assert got == ref
        assert list(got) == list(ref)
        assert [list(a) for a in got["alternatives"]] == [list(a) for a in ref["alternatives"]]


def _fleet_file(write_json, n: int, mutate=None, name: str = "fleet.json"):
    from conftest import BASE_STUDY

    studies = []
    for k in range(n):
        s = json.loads(json.dumps(BASE_STUDY))
        s["title"] = f"Millbrook asset {k}"
        s["challengers"][0]["first_cost"] = 50000 + 1000 * k
        studies.append(s)
    if mutate is not None:
        mutate(studies)
    return write_json({"format": "tenure-study", "version": 1, "studies": studies}, name)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="fork path is Linux only")
def test_two_process_file_path_equals_serial(monkeypatch, write_json) -> None:
    # Source: study_json(run_study(s)) per study (reference) and parse_study_document's refusals.
    from core import fleet
    from core.errors import StudyError
    from core.studyfile import load_study_file

    monkeypatch.setattr(fleet, "PARALLEL_MIN", 4)
    monkeypatch.setattr(fleet.os, "cpu_count", lambda: 2)
    path = _fleet_file(write_json, 9)
    text = fleet.study_file_json_text(path)
    assert text is not None
    docs = [json.loads(line.rstrip(",")) for line in text.split("\n")]
    ref = [study_json(run_study(s)) for s in load_study_file(path)]
    assert [d["title"] for d in docs] == [r["title"] for r in ref]
    for got, want in zip(docs, ref, strict=True):
        got["recommendation"].pop("replacement_value")
        want["recommendation"].pop("replacement_value")
        assert got == want
    # Small files and single studies take the ordinary path.
    assert fleet.study_file_json_text(_fleet_file(write_json, 3, name="small.json")) is None
    assert fleet.study_file_json_text(write_json(document(), "one.json")) is None

    def bad(where: int):
        def mutate(studies):
            studies[where]["defender"]["max_life"] = 2.5
        return mutate

    for where in (1, 7):  # a refusal in either half names its own study
        with pytest.raises(StudyError) as info:
            fleet.study_file_json_text(_fleet_file(write_json, 9, bad(where), f"bad{where}.json"))
        assert info.value.path == f"$.studies[{where}].defender.max_life"

    def both(studies):
        studies[2]["marr"] = "x"
        studies[8]["marr"] = "y"

    with pytest.raises(StudyError) as info:
        fleet.study_file_json_text(_fleet_file(write_json, 9, both, "both.json"))
    assert info.value.path == "$.studies[2].marr"

    def twice(studies):
        studies[7]["title"] = studies[1]["title"]

    with pytest.raises(StudyError) as info:
        fleet.study_file_json_text(_fleet_file(write_json, 9, twice, "twice.json"))
    assert info.value.path == "$.studies[7].title"


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="fork path is Linux only")
def test_cli_two_process_path(monkeypatch, capsys, write_json) -> None:
    # Source: docs/method.md §6 (one JSON object; refusals: exit 2, one error line).
    from core import fleet

    monkeypatch.setattr(fleet, "PARALLEL_MIN", 4)
    monkeypatch.setattr(fleet.os, "cpu_count", lambda: 2)
    path = _fleet_file(write_json, 6)
    assert main(["study", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [s["title"] for s in out["studies"]] == [f"Millbrook asset {k}" for k in range(6)]

    def bad(studies):
        studies[5]["challengers"] = []

    assert main(["study", str(_fleet_file(write_json, 6, bad, "bad.json")), "--json"]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert captured.err.splitlines() == [
        "error: $.studies[5].challengers: a study needs at least one challenger"]


def test_closed_form_replacement_value_matches_a_root_finder() -> None:
    # Source: scipy.optimize.brentq as the reference: the market value at which the
    # defender's best AW (recomputed by run_study at that market value) equals the best
    # challenger's AW, on random studies before and after tax.
    from scipy.optimize import brentq

    from core.estimates import Depreciation, Tax

    rng = random.Random(4242)
    checked = 0
    for k in range(40):
        study = _random_study(rng, k)
        if k % 2:
            d = dataclasses.replace(study.defender, depreciation=Depreciation(
                "straight_line", basis=30000.0, years=6, age=2))
            chs = tuple(dataclasses.replace(c, depreciation=Depreciation("macrs", macrs_class=7))
                        for c in study.challengers)
            study = dataclasses.replace(study, defender=d, challengers=chs,
                                        tax=Tax(0.3, max(study.marr, 0.0) * 0.7))
        r = run_study(dataclasses.replace(study, study_period=None))
        basis = r.decision
        rv = basis.recommendation.replacement_value
        target = basis.alternative(basis.recommendation.best_challenger)
        target_aw = float(target.annual_worth_constant[target.economic_life - 1])

        def gap(mv: float, study=study, target_aw=target_aw) -> float:
            moved = dataclasses.replace(study, study_period=None,
                                        defender=dataclasses.replace(study.defender, price=mv))
            if study.defender.market_values.decline_rate is not None:
                moved = dataclasses.replace(moved, defender=dataclasses.replace(
                    moved.defender, market_values=MarketValues(
                        values=tuple(study.defender.market_value_array().tolist()))))
            b = run_study(moved).decision
            return float(np.max(b.defender.annual_worth_constant)) - target_aw

        lo, hi = rv - 1e6, rv + 1e6
        ref = brentq(gap, lo, hi, xtol=1e-9, rtol=1e-14, maxiter=500)
        assert rv == pytest.approx(ref, rel=1e-9, abs=1e-6)
        checked += 1
    assert checked == 40


def test_batch_with_tax_inflation_and_periods_equals_single_runs() -> None:
    # Source: core.study.run_study (reference): one path, so each study of a mixed batch
    # (tax, inflation either way, study periods) gives its single-study result bit for bit.
    from core.estimates import Depreciation, Inflation, Tax

    rng = random.Random(99)
    studies = []
    for k in range(120):
        s = _random_study(rng, k)
        if k % 3 == 0:
            d = dataclasses.replace(s.defender, depreciation=Depreciation(
                "straight_line", basis=round(rng.uniform(1000, 50000), 2), years=6, age=2))
            chs = tuple(dataclasses.replace(c, depreciation=Depreciation(
                "macrs", macrs_class=rng.choice([3, 5, 7]))) for c in s.challengers)
            s = dataclasses.replace(s, defender=d, challengers=chs,
                                    tax=Tax(round(rng.uniform(0, 0.45), 3), 0.07))
        if k % 4 == 1:
            s = dataclasses.replace(s, inflation=Inflation(
                round(rng.uniform(0.0, 0.06), 3), rng.choice(["constant", "then-current"])))
        studies.append(s)
    batch = run_fleet(studies)
    for got, study in zip(batch, studies, strict=True):
        _same(got, run_study(study))
    assert sum(r.after_tax is not None for r in batch) == 40


def test_chunked_fleet_equals_one_pass_and_single_runs(monkeypatch) -> None:
    # Source: core.study.run_study (reference).  run_studies runs a fleet in chunks of
    # CHUNK studies; the chunk size must not change a single bit.  Chunks of 7 put studies
    # of every kind (plain, study period) on both sides of a chunk edge.
    import core.study

    rng = random.Random(7)
    studies = [_random_study(rng, k) for k in range(60)]
    singles = [run_study(s) for s in studies]
    monkeypatch.setattr(core.study, "CHUNK", 7)
    chunked = core.study.run_studies(studies)
    monkeypatch.setattr(core.study, "CHUNK", 10_000)
    whole = core.study.run_studies(studies)
    for a, b, c in zip(chunked, whole, singles, strict=True):
        _same(a, c)
        _same(b, c)


def test_plain_results_are_built_when_read_and_behave_as_study_results() -> None:
    # A plain study's objects are built from the batch arrays on first read
    # (core.study._BatchStudyResult): they must be StudyResults in every way that matters,
    # bit for bit what run_study gives, frozen, copied by dataclasses.replace.
    rng = random.Random(11)
    plain = [dataclasses.replace(_random_study(rng, k), study_period=None) for k in range(5)]
    (first, *_) = results = run_fleet(plain)
    assert all(isinstance(r, StudyResult) for r in results)
    assert "before_tax" not in vars(first)          # not built yet ...
    basis = first.before_tax
    assert first.before_tax is basis                 # ... then built once and kept
    assert first.after_tax is None and first.risk is None and first.technology is None
    assert first.decision is basis and first.recommendation is basis.recommendation
    with pytest.raises(dataclasses.FrozenInstanceError):
        first.warnings = ()  # type: ignore[misc]
    _same(first, run_study(plain[0]))
    assert repr(first).startswith("_BatchStudyResult(study=Study(")
    replaced = dataclasses.replace(first, warnings=("checked",))
    assert isinstance(replaced, StudyResult) and replaced.before_tax is basis
    assert replaced.warnings == ("checked",) and replaced.after_tax is None


def test_reason_with_a_currency_is_the_recommendation_sentence() -> None:
    # core.decision.reason rewrites a basis' sentence from the figures it holds (the window
    # puts the workbook's currency in it): without a currency it must be the sentence the
    # decision wrote, on both bases, with and without a study period; with one, the same
    # words with the symbol before every amount.
    from core.decision import reason

    rng = random.Random(3)
    studies = [_random_study(rng, k) for k in range(80)]
    taxed = [dataclasses.replace(
        s, tax=Tax(0.25, 0.06),
        defender=dataclasses.replace(s.defender, depreciation=Depreciation(
            "straight_line", basis=30000.0, years=6, age=2)),
        challengers=tuple(dataclasses.replace(c, depreciation=Depreciation("macrs", macrs_class=7))
                          for c in s.challengers)) for s in studies[:20]]
    checked = 0
    for r in run_fleet(studies + taxed):
        for basis in (r.before_tax, r.after_tax):
            if basis is None:
                continue
            assert reason(basis) == basis.recommendation.reason
            with_symbol = reason(basis, "£")
            assert with_symbol.replace("£", "") == basis.recommendation.reason
            assert "£" in with_symbol
            checked += 1
    assert checked == 120
