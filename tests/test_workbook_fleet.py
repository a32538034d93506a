"""Fleet editing in core: schema 3, sites, assets (new, edit, move, retire), the candidate
catalogue and its which-studies-change preview, yearly restudies.

Sources: "hand calculation" (the expected registers are the inputs written in the test),
"common practice, no source" (one transaction per write; nothing deleted silently).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

import pytest

from core.errors import StudyError
from core.estimates import Alternative, Depreciation, MarketValues, OperatingCosts, Study
from core.studyfile import fingerprint
from core.workbook import SCHEMA_VERSION, Asset, HistoryRow, Site, Workbook, WorkbookError
from core.workbook.fleetedit import (
    add_studied_asset,
    apply_candidate,
    candidate_changes,
    offered,
    register_state,
    remove_candidate,
    restudy,
)
from core.workbook.model import depreciation_to_dict, parse_depreciation
from tests.workbook_support import sql_dump

NEW_PUMP = Alternative("IE4 pump 30 kW", "challenger", 17800.0, 12,
                       MarketValues(decline_rate=0.15), OperatingCosts(first=4000.0, gradient=150.0))


def pump_study(title: str, price: float = 9000.0, challenger: Alternative = NEW_PUMP) -> Study:
    d = Alternative("Old pump", "defender", price, 4, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=6000.0, gradient=400.0))
    return Study(title, 0.1, d, (challenger,))


@pytest.fixture()
def wb(tmp_path: Path):
    with Workbook.create(tmp_path / "plant.tenure", company="Harrowgate Fabrication Ltd.",
                         currency="GBP", first_year=2025) as w:
        w.add_site(Site("Millbrook", "finishing"))
        for tag, site in (("PU-1", "Millbrook"), ("PU-2", "Millbrook"), ("PU-3", "Ouseburn Yard")):
            add_studied_asset(w, Asset(tag, "pump", site, "pump", dt.date(2015, 5, 1), 12600.0),
                              pump_study(f"{site} — {tag} pump"))
        yield w


# --------------------------------------------------------------------------- schema 3
def test_migration_from_v2_adds_depreciation_retirement_currency(tmp_path: Path) -> None:
    p = tmp_path / "v2.tenure"
    w = Workbook.create(p, company="Harrowgate", schema=2)
    w.add_asset(Asset("PU-1", "pump", "Millbrook", "pump", dt.date(2015, 5, 1), 12600.0))
    w.save_study("PU-1", 2024, pump_study("Millbrook — PU-1 pump"))
    w.close()
    before = sql_dump(p)
    with Workbook.open(p) as ro:  # read-only: v2 readable, nothing written
        assert ro.schema_version == 2 and ro.asset("PU-1").depreciation is None
    assert sql_dump(p) == before
    with Workbook.open(p, write=True) as w:
        assert w.schema_version == SCHEMA_VERSION == 4  # v2 -> v3 -> v4 in one open
        a = w.asset("PU-1")
        assert (a.depreciation, a.retired_on, a.retired_reason) == (None, None, "")
        assert w.meta()["first_year"] == "2024" and w.currency == ""  # earliest stored study
        assert w.study("PU-1", 2024) == pump_study("Millbrook — PU-1 pump")
        w.retire_asset("PU-1", dt.date(2026, 3, 1), "scrapped after seal failure")
        assert w.asset("PU-1").retired and w.integrity_check() == "ok"


def test_create_with_currency_and_first_year(tmp_path: Path) -> None:
    with Workbook.create(tmp_path / "a.tenure", company="H", currency="EUR", first_year=2027) as w:
        assert (w.company, w.currency, w.study_year) == ("H", "EUR", 2027)
    for kwargs, where in (({"first_year": 1850}, "first study year"),
                          ({"currency": "EU R"}, "currency"), ({"currency": "DOLLARS!!"}, "currency")):
        with pytest.raises(StudyError, match=where):
            Workbook.create(tmp_path / "b.tenure", **kwargs)
        assert not (tmp_path / "b.tenure").exists()


def test_depreciation_round_trip(wb: Workbook) -> None:
    # hand calculation: what goes in comes back
    for dep in (Depreciation("macrs", macrs_class=7), Depreciation("straight_line", years=10),
                Depreciation("declining_balance", years=8, rate=0.25)):
        assert parse_depreciation(depreciation_to_dict(dep)) == dep
        wb.edit_asset("PU-1", dataclasses.replace(wb.asset("PU-1"), depreciation=dep))
        assert wb.asset("PU-1").depreciation == dep
    with pytest.raises(StudyError, match=r"depreciation\.class"):
        parse_depreciation({"method": "macrs", "class": 4})


# --------------------------------------------------------------------------- sites
def test_sites_add_rename_remove(wb: Workbook) -> None:
    wb.rename_site("Millbrook", "Millbrook Works")
    assert [a.site for a in wb.assets(site="Millbrook Works")] == ["Millbrook Works"] * 2
    assert "Millbrook" not in {s.name for s in wb.sites()}
    assert wb.sites()[0].location == "finishing"
    with pytest.raises(WorkbookError, match="already exists"):
        wb.rename_site("Millbrook Works", "Ouseburn Yard")
    with pytest.raises(WorkbookError, match="no site 'Nowhere'"):
        wb.rename_site("Nowhere", "X")
    with pytest.raises(StudyError, match="site: must not be empty"):
        wb.rename_site("Ouseburn Yard", "  ")
    with pytest.raises(WorkbookError, match=r"still holds 2 assets: PU-1, PU-2; move"):
        wb.remove_site("Millbrook Works")
    wb.add_site(Site("Kestrel Road"))
    wb.remove_site("Kestrel Road")
    assert {s.name for s in wb.sites()} == {"Millbrook Works", "Ouseburn Yard"}
    assert wb.integrity_check() == "ok"


# --------------------------------------------------------------------------- assets
def test_new_edit_move_assets(wb: Workbook) -> None:
    with pytest.raises(WorkbookError, match="asset tag 'PU-1' already exists"):
        wb.new_asset(Asset("PU-1", "another", "Millbrook"))
    for bad, where in ((Asset("P 1", "x", "Millbrook"), "tag"), (Asset("P1", "x", ""), "site"),
                       (Asset("P1", "x", "M", original_cost=-1.0), "original cost")):
        with pytest.raises(StudyError) as err:
            wb.new_asset(bad)
        assert err.value.path == where
    wb.add_history([HistoryRow("PU-2", 1, 500.0)])
    fp = wb.record("PU-2").fingerprint
    wb.record_memo("PU-2", 2025, fp, "A. Signer", "memo.pdf")
    wb.edit_asset("PU-2", dataclasses.replace(wb.asset("PU-2"), tag="PU-20",
                                              description="Cooling pump"))
    with pytest.raises(KeyError):
        wb.asset("PU-2")
    moved = wb.asset("PU-20")
    assert moved.description == "Cooling pump" and wb.years("PU-20") == [2025]
    assert len(wb.history("PU-20")) == 1 and wb.memos("PU-20")[0].fingerprint == fp
    assert [c.tags for c in wb.candidates()] == [("PU-1", "PU-20", "PU-3")]
    wb.move_asset("PU-20", "Kestrel Road")
    assert wb.asset("PU-20").site == "Kestrel Road" and "Kestrel Road" in {
        s.name for s in wb.sites()}
    assert wb.integrity_check() == "ok"


def test_retired_asset_keeps_everything_read_only(wb: Workbook) -> None:
    wb.add_history([HistoryRow("PU-3", 1, 700.0)])
    record = wb.record("PU-3")
    with pytest.raises(StudyError, match="say why"):
        wb.retire_asset("PU-3", dt.date(2026, 1, 1), " ")
    with pytest.raises(StudyError, match="before PU-3 entered service"):
        wb.retire_asset("PU-3", dt.date(2010, 1, 1), "sold")
    wb.retire_asset("PU-3", dt.date(2026, 1, 1), "sold at auction")
    a = wb.asset("PU-3")
    assert (a.retired_on, a.retired_reason) == (dt.date(2026, 1, 1), "sold at auction")
    assert wb.record("PU-3") == record and len(wb.history("PU-3")) == 1  # kept
    assert [r.tag for r in wb.studies()] == ["PU-1", "PU-2"]  # out of the fleet's run
    refusals = [lambda: wb.save_study("PU-3", 2026, record.study),
                lambda: wb.start_restudy("PU-3", 2026),
                lambda: wb.add_history([HistoryRow("PU-3", 2, 1.0)]),
                lambda: wb.edit_asset("PU-3", dataclasses.replace(a, description="x")),
                lambda: wb.move_asset("PU-3", "Millbrook"),
                lambda: wb.retire_asset("PU-3", dt.date(2026, 2, 1), "again")]
    for refuse in refusals:
        with pytest.raises(WorkbookError, match="retired on 2026-01-01; its records are read only"):
            refuse()
    with pytest.raises(WorkbookError, match="retire it instead"):
        wb.remove_asset("PU-3")
    wb.new_asset(Asset("PU-9", "typo", "Millbrook"))
    wb.remove_asset("PU-9")  # nothing recorded yet: removal allowed
    with pytest.raises(KeyError):
        wb.asset("PU-9")
    wb.reinstate_asset("PU-3")
    assert not wb.asset("PU-3").retired
    assert wb.integrity_check() == "ok"


# --------------------------------------------------------------------------- catalogue
def test_candidate_catalogue_preview_then_apply(wb: Workbook) -> None:
    wb.new_asset(Asset("AC-1", "compressor", "Millbrook", "air compressor"))
    assert [c.name for c in offered(wb, "PU-1")] == ["IE4 pump 30 kW"]
    assert offered(wb, "AC-1") == []
    wb.retire_asset("PU-3", dt.date(2026, 1, 1), "sold")
    dearer = dataclasses.replace(NEW_PUMP, price=19500.0)
    before = {t: wb.record(t) for t in ("PU-1", "PU-2", "PU-3")}
    snapshot = sql_dump(wb.path)
    changes = candidate_changes(wb, "IE4 pump 30 kW", dearer)
    assert [(c.tag, c.year) for c in changes] == [("PU-1", 2025), ("PU-2", 2025)]  # not retired
    assert changes[0].describe() == "PU-1 2025: price 17,800 -> 19,500"
    assert sql_dump(wb.path) == snapshot  # the preview writes nothing
    assert candidate_changes(wb, "IE4 pump 30 kW", NEW_PUMP) == []  # same model: no change
    applied = apply_candidate(wb, dearer, "pump")
    assert applied == changes
    for tag in ("PU-1", "PU-2"):
        rec = wb.record(tag)
        assert rec.study.challengers == (dearer,)
        assert rec.fingerprint == fingerprint(rec.study) != before[tag].fingerprint
        assert rec.result_json["fingerprint"] == rec.fingerprint  # fresh result
    assert wb.record("PU-3") == before["PU-3"]
    assert wb.candidates()[0].alternative == dearer
    renamed = dataclasses.replace(dearer, name="IE5 pump 30 kW")
    apply_candidate(wb, renamed, "pump", name="IE4 pump 30 kW")
    assert [c.name for c in wb.candidates()] == ["IE5 pump 30 kW"]
    assert wb.study("PU-1").challengers[0].name == "IE5 pump 30 kW"
    remove_candidate(wb, "IE5 pump 30 kW")
    assert wb.candidates() == [] and wb.study("PU-1").challengers == (renamed,)
    assert wb.integrity_check() == "ok"


def test_apply_candidate_is_one_transaction(wb: Workbook, monkeypatch: pytest.MonkeyPatch) -> None:
    snapshot = sql_dump(wb.path)
    calls = []
    real = wb.save_study

    def failing(*args, **kwargs):
        calls.append(args[0])
        if len(calls) == 2:
            raise RuntimeError("disk full")
        return real(*args, **kwargs)

    monkeypatch.setattr(wb, "save_study", failing)
    with pytest.raises(RuntimeError):
        apply_candidate(wb, dataclasses.replace(NEW_PUMP, price=1.0), "pump")
    assert calls == ["PU-1", "PU-2"] and sql_dump(wb.path) == snapshot


# --------------------------------------------------------------------------- years
def test_restudy_starts_from_last_year(wb: Workbook) -> None:
    wb.new_asset(Asset("PU-5", "pump", "Millbrook", "pump"))
    report = restudy(wb, 2026)
    assert report.started == (("PU-1", 2025), ("PU-2", 2025), ("PU-3", 2025))
    assert report.skipped == (("PU-5", "no study before 2026"),)
    assert wb.years("PU-1") == [2025, 2026] and wb.study("PU-1", 2026) == wb.study("PU-1", 2025)
    assert wb.study_year == 2026
    assert register_state(wb.study("PU-1"), wb.record("PU-1").result_json) in {
        "keep", "replace now"} | {f"replace in {n} years" for n in range(2, 5)} | {
        "replace in 1 year"}
    again = restudy(wb, 2026)
    assert again.started == () and len(again.skipped) == 4
    for tags, msg in ((["NOPE"], "no asset 'NOPE'"), (["PU-1"], "already has a study for 2026"),
                      (["PU-5"], "no study before 2026")):
        with pytest.raises(StudyError, match=msg):
            restudy(wb, 2026, tags)
    assert wb.integrity_check() == "ok"
