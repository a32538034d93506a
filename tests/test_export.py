"""Export of study results to CSV and XLSX, and formula-injection escaping.

Sources: "OWASP CSV injection guidance" (cells starting = + - @ tab CR are prefixed with a
quote), "hand calculation" (values read back equal the result's own numbers).
"""

from __future__ import annotations

import csv
from pathlib import Path

import openpyxl
import pytest

from core.errors import StudyError
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.export import TABLES, TAX_TABLES, escape_cell, export_csv, export_xlsx, result_tables
from core.jsonout import study_json
from core.study import run_study

EVIL = "=HYPERLINK(\"http://x\",\"y\")"


def result(name: str = EVIL):
    d = Alternative(name, "defender", 20000.0, 4, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=9000.0, gradient=2500.0))
    c = Alternative("+New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=3000.0, gradient=500.0))
    return run_study(Study("@Kestrel Road — press", 0.10, d, (c,), study_period=6))


@pytest.mark.parametrize("text", ["=1+1", "+1", "-1", "@SUM(A1)", "\tx", "\rx", "=cmd|' /C calc'!A0"])
def test_dangerous_text_is_escaped(text: str) -> None:
    assert escape_cell(text) == "'" + text


def test_safe_values_pass() -> None:
    assert escape_cell("Kestrel Road") == "Kestrel Road"
    assert escape_cell(-1234.5) == -1234.5 and escape_cell(7) == 7
    assert escape_cell(None) == "" and escape_cell(False) == "false"
    assert escape_cell(float("nan")) == "nan"


def test_tables_hold_the_result_numbers() -> None:
    r = result()
    js = study_json(r)
    t = result_tables(r)
    assert set(t) == set(TABLES) - set(TAX_TABLES)  # no tax: no after-tax or comparison
    aw = t["annual_worth"]
    assert aw[0] == ["study", "basis", "retention_years", EVIL, "+New press"]
    assert {row[1] for row in aw[1:]} == {"before-tax"}
    assert [row[3] for row in aw[1:5]] == js["alternatives"][0]["annual_worth"]
    assert [row[4] for row in aw[1:9]] == js["alternatives"][1]["annual_worth"]
    assert len(t["alternatives"]) == 1 + 4 + 8
    assert len(t["study_period_options"]) == 1 + len(js["study_period_options"])
    summary = t["summary"][1]
    assert summary[4] == js["recommendation"]["action"]
    assert summary[-2] == -summary[-3]  # EAC = -AW
    assert summary[-1] == "£"  # the one currency display (core.currency)
    # several studies, or the CLI's {"studies": [...]} object
    both = result_tables({"studies": [js, js]})
    assert len(both["summary"]) == 1 + 2 * 2


def test_csv_round_trip_and_escaping(tmp_path: Path) -> None:
    r = result()
    p = export_csv(r, tmp_path / "aw.csv", table="annual_worth")
    with p.open(encoding="utf-8-sig", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0][3] == "'" + EVIL and rows[0][4] == "'+New press"
    assert rows[1][0] == "'@Kestrel Road — press"
    assert [float(x) for x in (row[3] for row in rows[1:5])] == \
        study_json(r)["alternatives"][0]["annual_worth"]
    assert not list(tmp_path.glob("*.part"))
    with pytest.raises(StudyError, match="unknown table"):
        export_csv(r, tmp_path / "x.csv", table="nope")


def test_xlsx_has_every_table_numbers_as_numbers_and_no_formulas(tmp_path: Path) -> None:
    r = result()
    p = export_xlsx([r, r], tmp_path / "study.xlsx")
    book = openpyxl.load_workbook(p)
    assert book.sheetnames == [t for t in TABLES if t not in TAX_TABLES]
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (sheet.title, cell.coordinate, cell.value)
    aw = book["annual_worth"]
    assert aw["D1"].value == "'" + EVIL and aw["A2"].value == "'@Kestrel Road — press"
    assert isinstance(aw["D2"].value, (int, float)) and aw["D2"].data_type == "n"
    assert aw["D2"].value == study_json(r)["alternatives"][0]["annual_worth"][0]
