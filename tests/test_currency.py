"""One currency per workbook or study, shown the same way everywhere (issue 17).

The window, ``tenure study`` text, the export and the memo all show amounts with
``core.currency.format_money`` and the symbol the workbook keeps (else the default £).
"""

from __future__ import annotations

import io
import os
import subprocess
import sys
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import openpyxl  # noqa: E402
import pytest  # noqa: E402
from pypdf import PdfReader  # noqa: E402

from core.currency import (  # noqa: E402
    currency_symbol,
    format_money,
    set_workbook_currency,
    workbook_currency,
)
from core.demo import build_demo  # noqa: E402
from core.workbook import Workbook  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
PB05 = "Kestrel Road — PB-05 Hydraulic press brake 60 t"


def _cli(*args: str) -> str:
    return subprocess.run([sys.executable, "-m", "core.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, check=True).stdout


@pytest.fixture(scope="module")
def euro_demo(tmp_path_factory):
    path = build_demo(tmp_path_factory.mktemp("cur") / "demo.tenure")
    assert workbook_currency(path) == "£"  # the demo keeps its own currency
    with Workbook.open(path, write=True) as wb:
        assert set_workbook_currency(wb, "EUR") == "€"
    return path


def test_codes_become_symbols_and_amounts_read_the_same_everywhere():
    # Source: ISO 4217 codes (from memory) and common practice, no source, for the symbols.
    assert currency_symbol("GBP") == "£" and currency_symbol("chf") == "CHF"
    expected = {(-23903.4, "£"): "-£23,903", (-0.2, "€"): "€0", (0.0, ""): "0",
                (7.0, "$"): "$7", (1234.6, "CHF"): "CHF 1,235", (164933.6, "£"): "£164,934"}
    for (v, sym), text in expected.items():
        assert format_money(v, sym) == text, (v, sym)


def test_cli_export_and_memo_use_the_workbook_currency(euro_demo, tmp_path):
    text = _cli("study", str(euro_demo), "--study", PB05)
    assert "Amounts in €." in text
    assert "Replacement value of Hydraulic press brake 60 t (2018): €164,934" in text
    _cli("export", str(euro_demo), "-o", str(tmp_path / "t.xlsx"))
    sheet = openpyxl.load_workbook(tmp_path / "t.xlsx")["summary"]
    column = [c.value for c in sheet[1]].index("currency")
    assert {row[column].value for row in sheet.iter_rows(min_row=2)} == {"€"}
    _cli("memo", str(euro_demo), "--study", PB05, "-o", str(tmp_path / "m.pdf"))
    page = PdfReader(io.BytesIO((tmp_path / "m.pdf").read_bytes())).pages[0].extract_text()
    flat = " ".join(page.split())
    assert "Amounts in €" in flat and "€164,934" in flat and "GBP" not in flat


def test_window_shows_the_workbook_currency(euro_demo, qtbot, tmp_path, monkeypatch):
    from PySide6.QtCore import QSettings

    monkeypatch.setenv("TENURE_STATE_DIR", str(tmp_path / "state"))
    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope,
                      str(tmp_path / "settings"))
    from desktop_app.main_window import MainWindow
    from desktop_app.prefs import Preferences

    prefs = Preferences()
    prefs.currency = "$"
    window = MainWindow(prefs)
    qtbot.addWidget(window, before_close_func=lambda w: w.discard_changes())
    assert window.currency() == "$"  # no workbook open: the preferences' symbol
    assert window.open_path(str(euro_demo), offer_recovery=False)
    assert window.wait_for_jobs()
    assert window.currency() == "€"
    assert window.editor.currency == "€"
