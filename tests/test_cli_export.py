"""`tenure export`: results and tables to CSV/XLSX from the command line."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import openpyxl

from core.cli import main

STUDY = {
    "format": "tenure-study", "version": 1, "title": "=Bay 4 hoist", "marr": 0.08,
    "defender": {"name": "Hoist H-4", "market_value": 9000, "max_life": 3,
                 "market_values": {"decline_rate": 0.2},
                 "operating_costs": {"first": 4000, "gradient": 900}},
    "challengers": [{"name": "Hoist 5 t", "first_cost": 30000, "max_life": 6,
                     "market_values": {"decline_rate": 0.15},
                     "operating_costs": {"first": 1200, "gradient": 150}}],
}


def _write(tmp_path: Path) -> Path:
    path = tmp_path / "hoist.json"
    path.write_text(json.dumps(STUDY), encoding="utf-8")
    return path


def test_export_csv_and_xlsx(tmp_path: Path) -> None:
    src = _write(tmp_path)
    assert main(["export", str(src), "-o", str(tmp_path / "aw.csv"), "--table", "annual_worth"]) == 0
    rows = list(csv.reader((tmp_path / "aw.csv").read_text(encoding="utf-8-sig").splitlines()))
    assert rows[0] == ["study", "basis", "retention_years", "Hoist H-4", "Hoist 5 t"]
    assert rows[1][0] == "'=Bay 4 hoist"  # formula injection escaped (OWASP CSV injection advice)
    assert len(rows) == 1 + 6
    assert main(["export", str(src), "-o", str(tmp_path / "all.xlsx")]) == 0
    book = openpyxl.load_workbook(tmp_path / "all.xlsx")
    assert "summary" in book.sheetnames


def test_export_refuses_bad_output(tmp_path: Path, capsys) -> None:
    src = _write(tmp_path)
    assert main(["export", str(src), "-o", str(tmp_path / "out.txt")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["error: -o: the output must end in .csv or .xlsx"]
    assert main(["export", str(src), "-o", str(tmp_path / "o.csv"), "--table", "nope"]) == 2


def test_unfillable_study_period_is_a_user_error() -> None:
    # A Study built in code (the window does this) bypasses the file check; decide must still
    # refuse with a StudyError rather than fail inside.
    import dataclasses

    import pytest

    from core.errors import StudyError
    from core.study import run_study
    from core.studyfile import parse_study

    body = {k: v for k, v in STUDY.items() if k not in ("format", "version")}
    study = dataclasses.replace(parse_study(body), study_period=20)
    with pytest.raises(StudyError, match="no option fills 20 years"):
        run_study(study)


def test_study_without_challenger_built_in_code_is_a_user_error() -> None:
    import dataclasses

    import pytest

    from core.errors import StudyError
    from core.study import run_study
    from core.studyfile import parse_study

    body = {k: v for k, v in STUDY.items() if k not in ("format", "version")}
    with pytest.raises(StudyError, match="at least one challenger"):
        run_study(dataclasses.replace(parse_study(body), challengers=()))


def test_window_without_a_screen_is_a_clear_error(monkeypatch, capsys) -> None:
    import sys

    import pytest

    if sys.platform.startswith(("win", "darwin")):
        pytest.skip("always has a screen")
    for name in ("QT_QPA_PLATFORM", "DISPLAY", "WAYLAND_DISPLAY"):
        monkeypatch.delenv(name, raising=False)
    assert main([]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: tenure: no screen")


def test_last_years_studies_stay_readable(tmp_path: Path, capsys) -> None:
    from core.demo import build_demo
    from core.workbook import Workbook

    book = build_demo(tmp_path / "demo.tenure")
    with Workbook.open(book) as wb:
        earlier = sorted({y for a in wb.assets() for y in wb.years(a.tag)[:-1]})
    assert earlier, "the demo carries a year of history"
    year = earlier[-1]
    assert main(["study", str(book), "--year", str(year), "--json"]) == 0
    studies = json.loads(capsys.readouterr().out)["studies"]
    assert studies and all(s["recommendation"]["action"] in ("keep", "replace") for s in studies)
    assert main(["study", str(book), "--year", "1900"]) == 2
    assert capsys.readouterr().err.startswith("error: --year: ")
