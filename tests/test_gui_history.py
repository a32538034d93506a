"""CostHistoryDialog: file preview, column mapping, rejected rows, fits, save, accepted estimates."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import datetime as dt  # noqa: E402

import pytest  # noqa: E402

pytest.importorskip("pytestqt")
pytest.importorskip("pyqtgraph")

from PySide6.QtWidgets import QFileDialog, QMessageBox  # noqa: E402

from core.demo import build_demo  # noqa: E402
from core.estimates import MarketValues, OperatingCosts  # noqa: E402
from core.workbook import Workbook, WorkbookInUse  # noqa: E402
from desktop_app.history_dialog import CostHistoryDialog, guess_columns  # noqa: E402
from tests.gui_support import answer_questions  # noqa: E402

TAG = "PU-04"  # demo pump, in service 2020-08-17 (resources/demo/fleet.json)
FIRST, GRADIENT, PRICE, DECLINE = 5000.0, 800.0, 30000.0, 0.15


@pytest.fixture(scope="module")
def demo_template(tmp_path_factory):
    return build_demo(tmp_path_factory.mktemp("demo") / "demo.tenure")


@pytest.fixture
def workbook(tmp_path, demo_template):
    path = tmp_path / "plant.tenure"
    path.write_bytes(demo_template.read_bytes())
    return path


@pytest.fixture
def warnings(monkeypatch):
    shown = []
    monkeypatch.setattr(QMessageBox, "warning",
                        staticmethod(lambda parent, title, text, *a, **k: shown.append(
                            (title, text))))
    return shown


def write_csv(path):
    """Synthetic history (invented figures): one work order a year, C_j = 5000 + 800(j-1)
    with +-150 alternating noise, and resale quotes MV_k = 30000 * 0.85^k; five bad rows."""
    lines = ["Machine,Closed,Type,Cost,Notes"]
    for j in range(1, 7):
        noise = 150 if j % 2 else -150
        lines.append(f'{TAG},{2020 + j - 1}-12-01,maintenance,"{FIRST + GRADIENT * (j - 1) + noise:,.0f}",WO')
    for k in range(1, 6):
        lines.append(f"{TAG},{2020 + k}-08-20,resale quote,{PRICE * (1 - DECLINE) ** k:.0f},dealer")
    lines += [
        "XX-99,2022-01-01,maintenance,100,unknown tag",       # row 13
        f"{TAG},2022-01-01,maintenance,n/a,bad amount",        # row 14
        f"{TAG},someday,maintenance,100,bad date",             # row 15
        f"{TAG},2019-01-01,maintenance,100,before in service",  # row 16
        f"{TAG},2023-01-01,maintenance,-50,credit",            # row 17
    ]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def make_dialog(qtbot, workbook, tmp_path):
    dialog = CostHistoryDialog(workbook, TAG)
    qtbot.addWidget(dialog)
    dialog.today = dt.date(2026, 12, 2)  # every year of age of the file has ended
    assert dialog.load_file(write_csv(tmp_path / "work orders.csv"))
    return dialog


def test_guess_columns_from_headers():
    g = guess_columns(["Asset", "Quote date", "Quote", "Source"])
    assert (g["tag"], g["date"], g["amount"], g["kind"]) == ("Asset", "Quote date", "Quote", None)
    g = guess_columns(["Tag", "Year", "Maintenance cost"])
    assert (g["tag"], g["year"], g["amount"], g["date"]) == ("Tag", "Year", "Maintenance cost", None)


def test_preview_mapping_and_rejected_rows(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    assert dialog.preview.rowCount() == 16
    assert dialog.preview.item(0, 0).text() == "2"  # spreadsheet row numbers, header = row 1
    mapping = dialog.mapping()  # guessed from the header names
    assert (mapping.tag, mapping.date, mapping.amount, mapping.kind) == (
        "Machine", "Closed", "Cost", "Type")
    report = dialog.check()
    assert report is not None and not warnings
    assert len(report.accepted) == 11 and len(report.rejected) == 5
    table = dialog.rejected_table
    rows = {table.item(r, 0).text(): table.item(r, 1).text() for r in range(table.rowCount())}
    assert set(rows) == {"13", "14", "15", "16", "17"}  # nothing dropped silently
    assert "unknown asset tag 'XX-99'" in rows["13"]
    assert "not a number" in rows["14"]
    assert "not a date" in rows["15"]
    assert "before" in rows["16"]
    assert "negative" in rows["17"]
    assert "11 of 16 rows accepted, 5 rejected" in dialog.check_summary.text()


def test_fit_recovers_gradient_and_decline(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    dialog.check()
    dialog.tabs.setCurrentIndex(2)
    assert dialog.fit_asset.currentData() == TAG
    dialog.arith_radio.setChecked(True)
    arith = dialog.cost_fits["arithmetic"]
    # hand calculation: the +-150 noise biases the slope by -25.7 over six points
    assert arith.params["gradient"] == pytest.approx(GRADIENT, rel=0.05)
    assert arith.params["first"] == pytest.approx(FIRST, rel=0.03)
    assert 0.95 < arith.r_squared <= 1.0
    assert "geometric" in dialog.cost_fits and "R²" in dialog.geo_radio.text()
    assert dialog.value_fit.params["decline_rate"] == pytest.approx(DECLINE, abs=0.002)
    costs, values = dialog.current_estimates()
    # age now 2026 - 2020 = 6, so year 1 of the study is year of age 7: a + 6G
    assert dialog.age_now.value() == 6
    assert costs.first == pytest.approx(arith.params["first"] + 6 * arith.params["gradient"],
                                        abs=0.01)
    assert costs.gradient == pytest.approx(arith.params["gradient"], abs=0.01)
    assert values.decline_rate == pytest.approx(DECLINE, abs=0.002)
    dialog.geo_radio.setChecked(True)
    costs, _ = dialog.current_estimates()
    assert costs.gradient is None and costs.growth == pytest.approx(
        dialog.cost_fits["geometric"].params["growth"], abs=1e-4)


def test_save_writes_history_and_fits_and_returns_edits(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    dialog.check()
    dialog.tabs.setCurrentIndex(2)
    dialog.arith_radio.setChecked(True)
    dialog.set_estimates(first=9000.0, gradient=750.0, decline_rate=0.16)
    with Workbook.open(workbook) as wb:
        before = len(wb.history(TAG))
    with qtbot.waitSignal(dialog.estimatesAccepted, timeout=2000) as blocker:
        assert dialog.save()
    expected = (OperatingCosts(first=9000.0, gradient=750.0), MarketValues(decline_rate=0.16))
    assert tuple(blocker.args) == expected
    assert dialog.accepted_estimates() == expected and dialog.fitted_tag() == TAG
    assert not warnings
    with Workbook.open(workbook) as wb:
        rows = wb.history(TAG)
        fits = {f["quantity"]: f for f in wb.fits(TAG, 2026)}
    assert len(rows) == before + 11
    assert {r.source_row for r in rows if r.source == "work orders.csv"} == set(range(2, 13))
    cost = fits["operating_costs"]
    assert cost["model"] == "arithmetic" and len(cost["ages"]) == 6 and len(cost["residuals"]) == 6
    assert cost["accepted"]["first"] == 9000.0 and cost["accepted"]["gradient"] == 750.0
    assert fits["market_values"]["accepted"]["decline_rate"] == 0.16


def test_unticked_group_gives_none(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    dialog.check()
    dialog.value_box.setChecked(False)
    assert dialog.save()
    costs, values = dialog.accepted_estimates()
    assert isinstance(costs, OperatingCosts) and values is None


def test_bad_file_and_locked_workbook_are_messages(qtbot, workbook, tmp_path, warnings,
                                                   monkeypatch):
    dialog = CostHistoryDialog(workbook, TAG)
    qtbot.addWidget(dialog)
    bad = tmp_path / "costs.xlsx"
    bad.write_bytes(b"not a spreadsheet")
    assert not dialog.load_file(bad)
    assert warnings and "costs.xlsx" in warnings[-1][1]
    assert dialog.path_edit.text() == str(bad)  # what the user typed stays
    assert not dialog.load_file(tmp_path / "missing.csv")
    assert "no such file" in warnings[-1][1]

    monkeypatch.setattr(QFileDialog, "getOpenFileName", staticmethod(
        lambda *a, **k: (str(write_csv(tmp_path / "wo.csv")), "")))
    dialog.browse()
    assert dialog.frame is not None and dialog.check() is not None
    dialog.set_estimates(first=8000.0)

    real_open = Workbook.open

    def in_use(path, write=False, **k):
        if write:
            raise WorkbookInUse(workbook, "in use: open for writing by process 4242 elsewhere")
        return real_open(path, write=write, **k)

    monkeypatch.setattr(Workbook, "open", staticmethod(in_use))
    count = len(warnings)
    assert not dialog.save()
    assert len(warnings) == count + 1 and "in use" in warnings[-1][1]
    assert "nothing was saved" in warnings[-1][1]
    assert dialog.first_edit.value() == 8000.0 and dialog.accepted_estimates() == (None, None)
    assert dialog.isVisible() is False or dialog.result() == 0


def test_mapping_error_names_the_column(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    dialog.set_mapping(amount="Notes", tag="Machine", date="Closed")
    report = dialog.check()
    assert report is not None and not report.accepted
    assert all("not a number" in r.reason for r in report.rejected if r.row <= 12)
    assert not dialog.save_button.isEnabled()
    dialog.set_mapping(amount="Cost", fixed_tag=TAG, year="Closed")
    report = dialog.check()
    assert report is not None and any("Closed" in r.reason for r in report.rejected)


def test_year_column_fixed_asset(qtbot, workbook, tmp_path, warnings):
    path = tmp_path / "yearly.csv"
    # invented yearly maintenance totals of PU-04, calendar years 2021..2025
    path.write_text("Year,Maintenance cost\n" + "".join(
        f"{y},{4000 + 500 * (y - 2021)}\n" for y in range(2021, 2026)), encoding="utf-8")
    dialog = CostHistoryDialog(workbook, TAG)
    qtbot.addWidget(dialog)
    dialog.today = dt.date(2026, 12, 2)
    assert dialog.load_file(path)
    m = dialog.mapping()
    assert m.tag is None and m.default_tag == TAG and m.year == "Year" and m.amount == (
        "Maintenance cost")
    report = dialog.check()
    assert len(report.accepted) == 5 and not report.rejected
    assert [h.age for h in report.accepted] == [2, 3, 4, 5, 6]  # 2020 is year of age 1
    assert dialog.cost_fits["arithmetic"].params["gradient"] == pytest.approx(500.0)
    assert dialog.value_fit is None and not dialog.value_box.isEnabled()
    assert dt.date(2020, 8, 17) == dialog.assets[TAG].in_service


def test_incomplete_latest_year_left_out_by_default(qtbot, workbook, tmp_path, warnings):
    dialog = CostHistoryDialog(workbook, TAG)
    qtbot.addWidget(dialog)
    dialog.today = dt.date(2026, 6, 1)  # year of age 6 runs to 2026-08-17
    assert dialog.load_file(write_csv(tmp_path / "wo.csv"))
    dialog.check()
    assert dialog.partial_box.isChecked() and "year of age 6" in dialog.partial_box.text()
    assert dialog.cost_fits["arithmetic"].ages == (1.0, 2.0, 3.0, 4.0, 5.0)
    dialog.age_now.setValue(5)
    dialog.partial_box.setChecked(False)
    assert dialog.cost_fits["arithmetic"].ages == (1.0, 2.0, 3.0, 4.0, 5.0, 6.0)
    assert dialog.age_now.value() == 5  # the user's entry stays


def test_save_is_one_transaction(qtbot, workbook, tmp_path, warnings, monkeypatch):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    dialog.check()
    with Workbook.open(workbook) as wb:
        before = len(wb.history(TAG))

    def broken(self, *a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(Workbook, "save_fit", broken)
    assert not dialog.save()
    assert "disk full" in warnings[-1][1]
    with Workbook.open(workbook) as wb:
        assert len(wb.history(TAG)) == before  # the rows were rolled back with the fit


def test_second_import_of_the_same_file_asks(qtbot, workbook, tmp_path, warnings, monkeypatch):
    first = make_dialog(qtbot, workbook, tmp_path)
    first.check()
    assert first.save()
    with Workbook.open(workbook) as wb:
        count = len(wb.history(TAG))
    asked = answer_questions(monkeypatch, QMessageBox.StandardButton.Yes)
    again = make_dialog(qtbot, workbook, tmp_path)
    again.check()
    assert again.save()
    assert asked and "11 of the 11 rows" in asked[0]
    with Workbook.open(workbook) as wb:
        assert len(wb.history(TAG)) == count  # the duplicates were skipped


def test_decimal_comma_file_is_read_and_the_mark_can_be_chosen(qtbot, workbook, tmp_path,
                                                               warnings):
    # Common practice, no source: a semicolon CSV with decimal commas (1.234,50).
    path = tmp_path / "kosten.csv"
    path.write_text(f"Machine;Closed;Cost\n{TAG};2021-12-01;5.150,50\n"
                    f"{TAG};2022-12-01;5.650,00\n{TAG};2023-12-01;980\n", encoding="utf-8")
    dialog = CostHistoryDialog(workbook, TAG)
    qtbot.addWidget(dialog)
    dialog.today = dt.date(2026, 12, 2)
    assert dialog.load_file(path)
    assert dialog.mapping().decimal == "auto"
    report = dialog.check()
    assert report is not None and not warnings
    assert [r.amount for r in report.accepted] == [5150.5, 5650.0, 980.0]
    assert "decimal comma" in dialog.check_summary.text()
    dialog.set_mapping(amount="Cost", tag="Machine", date="Closed", decimal=".")
    assert dialog.report is None  # a changed mapping asks for Check again
    report = dialog.check()
    assert [r.amount for r in report.accepted] == [980.0]
    assert all("decimal point" in r.reason for r in report.rejected)


def test_flagged_rows_are_listed_and_can_be_kept(qtbot, workbook, tmp_path, warnings):
    dialog = make_dialog(qtbot, workbook, tmp_path)
    csv = tmp_path / "work orders.csv"
    text = csv.read_text(encoding="utf-8").splitlines()
    text += [text[1], f"{TAG},2027-03-01,maintenance,100,typed a year ahead"]  # rows 18, 19
    csv.write_text("\n".join(text) + "\n", encoding="utf-8")
    assert dialog.load_file(csv)
    report = dialog.check()
    assert report is not None and not warnings
    table = dialog.flagged_table
    listed = {table.item(r, 0).text(): table.item(r, 1).text() for r in range(table.rowCount())}
    assert listed == {"18": "exact duplicate of row 2 — left out",
                      "19": "dated 2027-03-01, after today (2026-12-02) — left out"}
    assert len(report.accepted) == 11
    assert "2 flagged (2 left out)" in dialog.check_summary.text()
    dialog.keep_duplicates.setChecked(True)
    assert dialog.report is None  # the choice changed: Check again
    report = dialog.check()
    assert report is not None and len(report.accepted) == 12
    assert table.item(0, 1).text() == "exact duplicate of row 2 — kept"
    dialog.keep_future.setChecked(True)
    report = dialog.check()
    assert report is not None and len(report.accepted) == 13 and not report.left_out
