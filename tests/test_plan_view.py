"""The "Capital plan" window (desktop_app/plan_view.py), offscreen with pytest-qt: it shows
what core.plan computes, solves in the background, and prices a pin."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

pytest.importorskip("pytestqt")

from desktop_app.main_window import MainWindow  # noqa: E402
from tests.gui_support import open_window  # noqa: E402

BUDGET = "200000,200000,120000,200000,200000,200000,200000,200000,200000,200000"


pytestmark = pytest.mark.usefixtures("isolated")


@pytest.fixture()
def window(qtbot, tmp_path: Path) -> MainWindow:
    from core.demo import build_demo

    path = build_demo(tmp_path / "demo.tenure")
    return open_window(qtbot, path)


def _solve(qtbot, dialog) -> None:
    with qtbot.waitSignal(dialog.plan_ready, timeout=60_000):
        dialog.solve()


def test_plan_window_shows_the_core_plan_and_prices_a_pin(qtbot, window, tmp_path) -> None:
    from core.plan import make_plan
    from core.plan.load import load_plan_source

    window.plan_action.trigger()
    dialog = window.plan_dialog
    assert dialog.isVisible() and len(dialog.items) == 14
    dialog.budget_edit.setText(BUDGET)
    _solve(qtbot, dialog)
    plan = dialog.plan
    # reference: the same plan made by core from the saved workbook (tenure plan's path)
    source = load_plan_source(window.doc.path)
    expected = make_plan(source.inputs, budgets=[float(b) for b in BUDGET.split(",")],
                         first_year=source.first_year)
    assert plan.to_json() == expected.to_json()
    assert dialog.table.rowCount() == 14
    assert "of 14 assets replaced" in dialog.summary.text()
    bars = [i for i in dialog.plot.listDataItems()] + list(dialog.plot.items())
    assert any(type(i).__name__ == "BarGraphItem" for i in bars)
    # pin the first asset planned for year 0 to the year after: the cost is shown
    row = next(r for r in range(14) if dialog.table.item(r, 2).text() == "2026")
    key = dialog.table.item(row, 0).data(0x0100)
    dialog.table.selectRow(row)
    assert dialog.selected_key() == key
    with qtbot.waitSignal(dialog.plan_ready, timeout=60_000):
        dialog.pin_selected(year=1)
    pinned = {a.tag: a for a in dialog.plan.assets}[key]
    assert pinned.year == 1 and pinned.pinned
    assert dialog.override is not None and dialog.override >= 0
    assert dialog.override == pytest.approx(plan.objective - dialog.plan.objective)
    assert "pins cost" in dialog.summary.text()
    # must-replace on an asset planned after the horizon: it moves to the first year
    row = next(r for r in range(14) if dialog.table.item(r, 2).text() == "after horizon")
    later = dialog.table.item(row, 0).data(0x0100)
    dialog.table.selectRow(row)
    with qtbot.waitSignal(dialog.plan_ready, timeout=60_000):
        dialog.must_box.setChecked(True)
    moved = {a.tag: a for a in dialog.plan.assets}[later]
    assert moved.forced and moved.year == 0
    # the plan memo of what is shown, written in the background, verifies
    from core.memo.verify import verify_memo

    target = tmp_path / "window-plan.pdf"
    dialog.write_memo(str(target))
    qtbot.waitUntil(lambda: getattr(dialog, "memo_written", None) is not None, timeout=60_000)
    report = verify_memo(target, use_user_trust=False)
    assert report.attachment_matches and report.footer_fingerprint == dialog.memo_written.fingerprint
    dialog.shutdown()


def test_plan_window_refuses_bad_budget_and_reports_infeasible(qtbot, window) -> None:
    window.plan_action.trigger()
    dialog = window.plan_dialog
    dialog.budget_edit.setText("lots")
    dialog.solve()
    assert "Budget:" in dialog.summary.text() and dialog.job is None
    dialog.budget_edit.setText("1000")
    dialog.solve()
    qtbot.waitUntil(lambda: "no plan fits" in dialog.summary.text(), timeout=60_000)
    assert dialog.job is None
    assert dialog.plan is None
    dialog.shutdown()


def test_plan_window_shows_the_workbook_currency_basis_and_sites_not_in_decision_colours(
        qtbot, window) -> None:
    from desktop_app import palette

    window.plan_action.trigger()
    dialog = window.plan_dialog
    dialog.budget_edit.setText(BUDGET)
    _solve(qtbot, dialog)
    plan = dialog.plan
    # the demo workbook's currency is the pound; amounts read like the results panel's
    # (core.text.money: "£334,100"); hand calculation: the first "Capital" cell is the
    # plan's capital for that asset with the sign, separators and symbol.
    assert window.currency() == "\u00a3"
    assert f"\u00a3{sum(plan.capital_by_year):,.0f}" in dialog.summary.text()
    assert "capital (\u00a3)" in dialog.plot.getAxis("left").labelText
    row = next(r for r in range(dialog.table.rowCount())
               if dialog.table.item(r, 5).text() != "-")
    assert dialog.table.item(row, 5).text().startswith("\u00a3")
    # the basis the values rest on is said (core's note, not a second wording)
    assert plan.basis_note and plan.basis_note in dialog.summary.text()
    # a site is neither keep nor replace: its bars never take those two colours
    brushes = {i.opts["brush"].color().name().lower() for i in dialog.plot.items()
               if type(i).__name__ == "BarGraphItem"}
    assert brushes and not brushes & {palette.KEEP.lower(), palette.REPLACE.lower()}
