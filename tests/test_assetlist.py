"""Asset-list import: column guessing and mapping, every rejected row with its number and reason,
existing tags reported (never merged unless asked), the preview writes nothing, XLSX and CSV.

Sources: "hand calculation" (expected rows are the inputs written in the test), IRS
Publication 946 (the MACRS GDS classes 3, 5, 7, 10, 15 and 20), "common practice, no
source" (spreadsheet row numbers with the header as row 1).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from pathlib import Path

import openpyxl
import pytest

from core.errors import StudyError
from core.estimates import Depreciation
from core.tables import parse_map, read_table
from core.workbook import Asset, Workbook
from core.workbook.assetlist import (
    ASSET_FIELDS,
    AssetMapping,
    apply_asset_import,
    parse_depreciation_text,
    plan_asset_file,
)
from tests.workbook_support import sql_dump

ROOT = Path(__file__).resolve().parent.parent
EXAMPLE = ROOT / "resources" / "examples" / "equipment_list.csv"

LIST = """Plant no;Machine;Works;Kind;Commissioned;Cost (EUR);Tax
AC-1;Screw compressor;Kestrel Road;air compressor;2015-04-01;52.000,00;MACRS 7
FL-2;Forklift 2.5 t;Millbrook;forklift;2019-06-31;31.000,00;MACRS 5
;no tag here;Millbrook;pump;2019-01-01;1.000,00;SL 10
PU-3;Cooling pump;Millbrook;pump;2018-02-01;12.600,50;SL 10
PU-3;Cooling pump again;Millbrook;pump;2018-02-01;12.600,50;SL 10
PU-4;Booster pump;;pump;2018-02-01;9.000,00;SL 10
PB-5;Press brake;Ouseburn Yard;press brake;2006-02-20;118.000,00;MACRS 4
PB-6;Press brake 60 t;Ouseburn Yard;press brake;2006-02-20;-5,00;DB 10 20%
;;;;;;
PK-7;Wrapper;Ouseburn Yard;packaging machine;20.02.2018;39.000,00;none
"""


@pytest.fixture()
def book(tmp_path: Path) -> Path:
    p = tmp_path / "plant.tenure"
    with Workbook.create(p, company="Harrowgate Fabrication Ltd.") as wb:
        wb.new_asset(Asset("PU-3", "Cooling pump", "Millbrook", "pump", dt.date(2018, 2, 1),
                           12600.5, depreciation=Depreciation("straight_line", years=10)))
    return p


def test_parse_depreciation_text() -> None:
    # IRS Publication 946: GDS property classes are 3, 5, 7, 10, 15 and 20 years
    assert parse_depreciation_text("MACRS 7") == Depreciation("macrs", macrs_class=7)
    assert parse_depreciation_text("macrs class 20") == Depreciation("macrs", macrs_class=20)
    assert parse_depreciation_text("Straight line 10 years") == Depreciation("straight_line",
                                                                              years=10)
    assert parse_depreciation_text("DB 8 25%") == Depreciation("declining_balance", years=8,
                                                               rate=0.25)
    assert parse_depreciation_text("declining balance 5 0.4").rate == 0.4
    assert parse_depreciation_text("none") is None and parse_depreciation_text("") is None
    for bad in ("MACRS 4", "MACRS", "SL 10 5%", "DB 8", "sum of years 5", "DB 8 150%"):
        with pytest.raises(ValueError):
            parse_depreciation_text(bad)


def test_plan_lists_every_row(book: Path, tmp_path: Path) -> None:
    src = tmp_path / "list.csv"
    src.write_text(LIST, encoding="utf-8")
    with Workbook.open(book) as wb:
        plan = plan_asset_file(wb, src, dayfirst=True)
    assert plan.decimal == "," and plan.decimal_settled
    assert [a.tag for a in plan.new] == ["AC-1", "PK-7"]
    ac = plan.new[0]
    assert (ac.description, ac.site, ac.asset_class, ac.in_service, ac.original_cost,
            ac.depreciation) == ("Screw compressor", "Kestrel Road", "air compressor",
                                 dt.date(2015, 4, 1), 52000.0, Depreciation("macrs", macrs_class=7))
    assert plan.new[1].in_service == dt.date(2018, 2, 20) and plan.new[1].depreciation is None
    assert plan.unchanged == ("PU-3",)
    # every rejected row, with its spreadsheet row number (header = row 1)
    assert [str(r) for r in plan.rejected] == [
        "row 3: in-service date '2019-06-31' is not a date",
        "row 4: no tag",
        "row 6: tag 'PU-3' is already on row 5",
        "row 7: PU-4: no site",
        "row 8: 'MACRS 4': a MACRS class must be 3, 5, 7, 10, 15 or 20",
        "row 9: original cost -5 is negative",
        "row 10: empty row",
    ]
    assert plan.rows == 10


def test_existing_tag_reported_not_merged_unless_asked(book: Path, tmp_path: Path) -> None:
    src = tmp_path / "list.csv"
    src.write_text("Tag,Description,Site,Original cost\nPU-3,Cooling pump 30 kW,Ouseburn Yard,"
                   "13000\nPU-8,New pump,Millbrook,\n", encoding="utf-8")
    before = sql_dump(book)
    with Workbook.open(book, write=True) as wb:
        plan = plan_asset_file(wb, src)
        assert sql_dump(book) == before  # the preview writes nothing
        (change,) = plan.changed
        assert change.fields == ("description", "site", "original_cost")
        assert change.describe() == ("row 2: PU-3 exists; description 'Cooling pump' -> "
                                     "'Cooling pump 30 kW'; site 'Millbrook' -> 'Ouseburn Yard'; "
                                     "original cost 12,600.50 -> 13,000.00")
        assert apply_asset_import(wb, plan) == 1
        assert wb.asset("PU-3").description == "Cooling pump"  # not merged
        assert wb.asset("PU-8").original_cost is None
        plan = plan_asset_file(wb, src)
        assert plan.new == () and len(plan.changed) == 1
        assert apply_asset_import(wb, plan, update_existing=True) == 1
        pu = wb.asset("PU-3")
        # columns the list does not carry keep the register's values
        assert (pu.site, pu.original_cost, pu.in_service, pu.depreciation) == (
            "Ouseburn Yard", 13000.0, dt.date(2018, 2, 1), Depreciation("straight_line", years=10))
        assert wb.integrity_check() == "ok"


def test_xlsx_and_mapping_overrides(book: Path, tmp_path: Path) -> None:
    src = tmp_path / "list.xlsx"
    wbx = openpyxl.Workbook()
    ws = wbx.active
    ws.append(["Equipment ID", "Text", "Location", "Bought", "Value"])
    ws.append(["FL-9", "Forklift", "Millbrook", dt.datetime(2020, 3, 1), 31000])
    ws.append(["FL-10", "Forklift", "Millbrook", "not a date", 31000])
    wbx.save(src)
    overrides = parse_map(["Equipment ID=tag", "Text=description", "Location=site",
                           "Bought=in_service", "Value=original_cost"], ASSET_FIELDS)
    with Workbook.open(book) as wb:
        plan = plan_asset_file(wb, src, overrides=overrides)
    assert [(a.tag, a.in_service, a.original_cost) for a in plan.new] == [
        ("FL-9", dt.date(2020, 3, 1), 31000.0)]
    assert [str(r) for r in plan.rejected] == ["row 3: in-service date 'not a date' is not a date"]
    with pytest.raises(StudyError, match="unknown field 'cost'"):
        parse_map(["Value=cost"], ASSET_FIELDS)
    with pytest.raises(StudyError, match="no column 'Nope'"):
        with Workbook.open(book) as wb:
            plan_asset_file(wb, src, AssetMapping(tag="Nope", site="Location"))
    with pytest.raises(StudyError, match="needs the site column"):
        with Workbook.open(book) as wb:
            plan_asset_file(wb, src, AssetMapping(tag="Equipment ID"))


def test_example_list_guessed_columns() -> None:
    table = read_table(EXAMPLE)
    mapping = AssetMapping.guess(list(table.columns))
    assert dataclasses.asdict(mapping) == {
        "tag": "Tag", "site": "Site", "description": "Description", "asset_class": "Class",
        "in_service": "In service", "original_cost": "Original cost",
        "depreciation": "Tax depreciation", "dayfirst": False, "decimal": "auto"}
