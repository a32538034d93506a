"""Workbook model API: register, yearly restudies, candidates, history, fits, memos, round trips.

Sources: "hand calculation" (expected values are the inputs written in the test),
"common practice, no source" (behaviour of the register).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import json
from pathlib import Path

import pytest

from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.history import fit_operating_costs
from core.jsonout import study_json
from core.study import run_study
from core.studyfile import dump_study_document, fingerprint, load_study_file
from core.workbook import (
    Asset,
    HistoryRow,
    Site,
    Workbook,
    WorkbookError,
    record_memo,
    studies_from_workbook,
)

DEFENDER = Alternative("Compressor (2012)", "defender", 7500.0, 5, MarketValues(decline_rate=0.22),
                       OperatingCosts(first=38500.0, gradient=2600.0),
                       (ExtraCost(1, 9500.0, "airend rebuild"),),
                       Depreciation("straight_line", basis=52000.0, years=10, age=10))
CHALLENGER = Alternative("VSD compressor", "challenger", 64000.0, 15,
                         MarketValues(decline_rate=0.14), OperatingCosts(first=27500.0, gradient=850),
                         depreciation=Depreciation("macrs", macrs_class=7))
PUMP = Alternative("IE4 pump", "challenger", 17800.0, 15, MarketValues(values=tuple(
    17800.0 * 0.8 ** k for k in range(1, 16))), OperatingCosts(first=8900.0, growth=0.03))


def make_study(title: str = "Kestrel Road — AC-101 compressor", tax: bool = False) -> Study:
    return Study(title, 0.10, DEFENDER, (CHALLENGER,),
                 tax=Tax(0.25, 0.075) if tax else None, notes="restudy each spring")


@pytest.fixture()
def wb(tmp_path: Path):
    with Workbook.create(tmp_path / "plant.tenure", company="Harrowgate Fabrication Ltd.") as w:
        w.add_site(Site("Kestrel Road", "main shop"))
        w.add_asset(Asset("AC-101", "Rotary screw compressor", "Kestrel Road", "air compressor",
                          dt.date(2012, 4, 16), 52000.0))
        w.add_asset(Asset("P-7", "Cooling water pump", "Millbrook", "pump", None, None))
        yield w


def test_register_sites_and_assets(wb: Workbook) -> None:
    # hand calculation: what was put in comes back
    assert wb.company == "Harrowgate Fabrication Ltd."
    assert [s.name for s in wb.sites()] == ["Kestrel Road", "Millbrook"]  # site added with asset
    assert [a.tag for a in wb.assets()] == ["AC-101", "P-7"]
    assert [a.tag for a in wb.assets(site="Millbrook")] == ["P-7"]
    a = wb.asset("AC-101")
    assert a.in_service == dt.date(2012, 4, 16) and a.original_cost == 52000.0
    assert a.age_in(2026) == 14
    with pytest.raises(KeyError):
        wb.asset("nope")
    wb.add_asset(dataclasses.replace(a, description="75 kW compressor"))
    assert wb.asset("AC-101").description == "75 kW compressor"
    assert wb.integrity_check() == "ok"


def test_study_years_restudy_and_snapshot(wb: Workbook) -> None:
    study = make_study(tax=True)
    result = study_json(run_study(study))
    fp = wb.save_study("AC-101", 2025, study, result)
    assert fp == fingerprint(study)
    assert wb.study("AC-101") == study
    rec = wb.record("AC-101", 2025)
    assert rec.result_json == json.loads(json.dumps(result)) and rec.action == "replace"
    new = wb.start_restudy("AC-101", 2026)
    assert new == study and wb.years("AC-101") == [2025, 2026]
    edited = dataclasses.replace(study, defender=dataclasses.replace(DEFENDER, price=5800.0))
    wb.save_study("AC-101", 2026, edited)
    # last year's study, result and fingerprint stay readable and unchanged
    assert wb.study("AC-101", 2025) == study
    assert wb.record("AC-101", 2025).result_json["fingerprint"] == fp
    assert wb.study("AC-101") == edited and wb.record("AC-101").result_json is None
    with pytest.raises(WorkbookError, match="already has a study for 2026"):
        wb.start_restudy("AC-101", 2026)
    with pytest.raises(WorkbookError, match="no study before"):
        wb.start_restudy("P-7", 2026)
    with pytest.raises(WorkbookError, match="another study"):
        wb.save_study("AC-101", 2027, edited, result)


def test_candidates_serve_several_assets(wb: Workbook) -> None:
    cid = wb.add_candidate(CHALLENGER, "air compressor", ["AC-101"])
    pid = wb.add_candidate(PUMP, "pump", ["P-7"])
    wb.link_candidate(cid, "P-7")
    assert [c.name for c in wb.candidates()] == ["IE4 pump", "VSD compressor"]
    assert [c.name for c in wb.candidates(tag="P-7")] == ["IE4 pump", "VSD compressor"]
    assert [c.name for c in wb.candidates(asset_class="pump")] == ["IE4 pump"]
    got = {c.id: c for c in wb.candidates()}
    assert got[cid].alternative == CHALLENGER and got[cid].tags == ("AC-101", "P-7")
    assert got[pid].alternative == PUMP
    with pytest.raises(WorkbookError, match="must be a challenger"):
        wb.add_candidate(DEFENDER)


def test_history_and_fits_kept_with_study(wb: Workbook) -> None:
    rows = [HistoryRow("AC-101", j, 20000.0 + 2500.0 * j, "operating", None, "wo.csv", j + 1)
            for j in range(1, 6)]
    assert wb.add_history(rows) == 5
    assert wb.history("AC-101") == rows and wb.history("P-7") == []
    wb.add_history(rows[:2], replace=True)
    assert len(wb.history("AC-101")) == 2
    with pytest.raises(WorkbookError, match="kind"):
        wb.add_history([HistoryRow("AC-101", 1, 5.0, "bogus")])
    wb.save_study("AC-101", 2026, make_study())
    fit = fit_operating_costs([1, 2, 3], [100.0, 110.0, 120.0], tag="AC-101")
    wb.save_fit("AC-101", 2026, fit)
    [stored] = wb.fits("AC-101")
    assert stored == fit.to_json()


def test_memo_register_and_module_hook(wb: Workbook, tmp_path: Path) -> None:
    study = make_study()
    fp = wb.save_study("AC-101", 2026, study, study_json(run_study(study)))
    when = dt.datetime(2026, 3, 2, 9, 30, tzinfo=dt.UTC)
    wb.record_memo("AC-101", 2026, fp, "A. Signer", tmp_path / "memo.pdf", when)
    # the memo dialog's hook finds the open writer and the asset-year from the fingerprint
    record_memo(wb.path, memo_path="second.pdf", fingerprint=fp, signer="B. Second")
    memos = wb.memos()
    assert [(m.tag, m.year, m.signer) for m in memos] == [("AC-101", 2026, "A. Signer"),
                                                          ("AC-101", 2026, "B. Second")]
    assert memos[0].signed_at == "2026-03-02T09:30:00+00:00"
    assert memos[0].title == study.title and memos[1].file_name == "second.pdf"
    assert wb.memos(tag="P-7") == []


def test_record_memo_hook_opens_closed_workbook(wb: Workbook) -> None:
    study = make_study()
    fp = wb.save_study("AC-101", 2026, study)
    path = wb.path
    wb.close()
    record_memo(path, memo_path="m.pdf", fingerprint=fp, signer="C", title="t")
    with Workbook.open(path) as ro:
        assert [(m.tag, m.file_name, m.title) for m in ro.memos()] == [("AC-101", "m.pdf", "t")]


def test_read_only_refuses_writes(wb: Workbook) -> None:
    wb.save_study("AC-101", 2026, make_study())
    path = wb.path
    wb.close()
    with Workbook.open(path) as ro:
        assert not ro.writable
        with pytest.raises(WorkbookError, match="read-only"):
            ro.save_study("AC-101", 2027, make_study())


def test_study_json_round_trip_through_workbook(wb: Workbook, tmp_path: Path) -> None:
    # §5 import -> workbook -> export -> import gives the same studies and fingerprints
    studies = [make_study("Kestrel Road — AC-101 compressor", tax=True),
               Study("Millbrook — P-7 pump", 0.08, dataclasses.replace(
                   DEFENDER, name="Old pump", depreciation=None), (PUMP, dataclasses.replace(
                       CHALLENGER, depreciation=None)), study_period=6)]
    src = tmp_path / "in.json"
    src.write_text(dump_study_document(studies), encoding="utf-8")
    loaded = load_study_file(src)
    for tag, study in zip(["AC-101", "P-7"], loaded, strict=True):
        wb.save_study(tag, 2026, study)
    out = tmp_path / "out.json"
    out.write_text(dump_study_document([r.study for r in wb.studies()]), encoding="utf-8")
    again = load_study_file(out)
    assert again == studies
    assert [fingerprint(s) for s in again] == [fingerprint(s) for s in studies]
    path = wb.path
    wb.close()
    assert studies_from_workbook(path) == studies


def test_studies_from_empty_workbook_is_an_error(wb: Workbook) -> None:
    path = wb.path
    wb.close()
    with pytest.raises(WorkbookError, match="no study"):
        studies_from_workbook(path)


def test_create_refuses_existing_file(tmp_path: Path) -> None:
    p = tmp_path / "x.tenure"
    p.write_bytes(b"keep me")
    with pytest.raises(WorkbookError, match="already exists"):
        Workbook.create(p)
    assert p.read_bytes() == b"keep me"


def test_exception_inside_transaction_rolls_back(wb: Workbook) -> None:
    wb.save_study("AC-101", 2025, make_study())
    with pytest.raises(RuntimeError), wb.transaction():
        wb.save_study("AC-101", 2026, make_study())
        wb.add_history([HistoryRow("AC-101", 1, 1.0)])
        raise RuntimeError("boom")
    assert wb.years("AC-101") == [2025] and wb.history("AC-101") == []


def test_damaged_study_row_is_reported(wb: Workbook) -> None:
    wb.save_study("AC-101", 2026, make_study())
    with wb.transaction() as c:
        body = json.loads(c.execute("SELECT study_json FROM studies").fetchone()[0])
        body["marr"] = 0.5
        c.execute("UPDATE studies SET study_json = ?", (json.dumps(body),))
    with pytest.raises(WorkbookError, match="fingerprint does not match"):
        wb.study("AC-101")


def test_save_studies_maps_titles_to_assets(tmp_path: Path) -> None:
    from core.workbook import save_studies

    p = tmp_path / "window.tenure"
    first = make_study("Kestrel Road — AC-101 compressor")
    other = Study("Loose study", 0.1, dataclasses.replace(DEFENDER, depreciation=None),
                  (dataclasses.replace(CHALLENGER, depreciation=None),))
    where = save_studies(p, [first, other], 2025, {first.title: study_json(run_study(first))},
                         company="Harrowgate")
    assert where == [("AC-101", 2025), ("A-001", 2025)]
    with Workbook.open(p) as wb:
        assert wb.asset("AC-101").site == "Kestrel Road"
        assert wb.asset("AC-101").description == "compressor"
        assert wb.asset("A-001").site == "Unassigned"
        assert wb.record("AC-101").action == "replace" and wb.record("A-001").action is None
    edited = dataclasses.replace(first, marr=0.12)
    assert save_studies(p, [edited], 2026, {first.title: study_json(run_study(first))}) == [
        ("AC-101", 2026)]
    with Workbook.open(p) as wb:
        assert wb.years("AC-101") == [2025, 2026] and wb.study("AC-101", 2025) == first
        assert wb.record("AC-101").result_json is None  # the stale result was not stored
        assert studies_from_workbook(p) == [edited, other]


def test_study_json_import_export_functions(tmp_path: Path) -> None:
    from core.workbook import export_study_json, import_study_json

    studies = [make_study("Kestrel Road — AC-101 compressor", tax=True),
               make_study("Millbrook — P-7 pump")]
    src = tmp_path / "in.json"
    src.write_text(dump_study_document(studies), encoding="utf-8")
    p = tmp_path / "b.tenure"
    assert import_study_json(p, src, 2026) == [("AC-101", 2026), ("P-7", 2026)]
    out = export_study_json(p, tmp_path / "out.json")
    assert load_study_file(out) == studies
    assert out.read_text(encoding="utf-8") == src.read_text(encoding="utf-8")  # byte for byte
