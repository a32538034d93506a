"""ResultsPanel: recommendation badge and sentence, key figures, warnings, cautions."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import dataclasses  # noqa: E402

import pytest  # noqa: E402

pytest.importorskip("pytestqt")

from PySide6.QtCore import Qt  # noqa: E402

from core.estimates import (  # noqa: E402
    Alternative,
    Depreciation,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from core.study import run_study  # noqa: E402
from desktop_app.results_panel import ResultsPanel, badge_for, caution_texts  # noqa: E402


def press_line(period=None, defender_first=9000.0):
    # Invented figures for Harrowgate Fabrication Ltd., Millbrook press shop.
    d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
                    OperatingCosts(first=defender_first, gradient=2500.0))
    c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
                    OperatingCosts(first=3000.0, gradient=500.0))
    return Study("Millbrook press line", 0.10, d, (c,), study_period=period)


@pytest.fixture
def panel(qtbot):
    w = ResultsPanel()
    qtbot.addWidget(w)
    w.resize(520, 800)
    return w


def test_replace_now_shows_badge_reason_and_figures(panel):
    result = run_study(press_line())
    panel.set_result(result)
    assert panel.badge_text() == "REPLACE NOW"
    assert panel.recommendation_text() == result.recommendation.reason
    assert panel.basis_text().startswith("Basis: before tax")
    rows = panel.figures_rows()
    assert [r[1] for r in rows] == [a.name for a in result.ranking]
    new = result.alternative("New press")
    row = next(r for r in rows if r[1] == "New press")
    assert row[3] == f"{new.economic_life} years"
    assert row[4] == f"{round(new.annual_worth_at_economic_life):,}"
    assert row[5] == f"{round(-new.annual_worth_at_economic_life):,}"
    text = panel.figures_text()
    # core.study's doctest: replacement value 18,062.40 for this study (hand-checked there).
    assert "Replacement value 18,062" in text and "20,000" in text
    assert "One more year" in text
    panel.set_currency("£")   # the workbook's currency goes into the sentence too
    panel.set_result(result)
    assert panel.recommendation_text() == result.recommendation.reason.replace(
        "cost of ", "cost of £").replace("is ", "is £").replace("best, ", "best, £")


def test_keep_and_replace_later_badges(panel):
    keep = run_study(press_line(defender_first=1000.0))
    assert keep.recommendation.action == "keep"
    panel.set_result(keep)
    assert panel.badge_text() == "KEEP"
    rec = dataclasses.replace(keep.recommendation, challenger="New press", defender_years=2)
    assert badge_for(rec)[0] == "REPLACE IN 2 YEARS"
    assert badge_for(dataclasses.replace(rec, defender_years=1))[0] == "REPLACE IN 1 YEAR"


def test_cautions_always_visible_and_from_the_memo_texts(panel):
    assert panel.caution_texts() == caution_texts()
    assert any(t.startswith("Estimates are forecasts") for t in panel.caution_texts())
    assert "safety" in panel.cautions_label.text() and "tax adviser" in panel.cautions_label.text()
    panel.show()
    assert panel.cautions_box.isVisible()
    panel.set_result(run_study(press_line()))
    assert panel.cautions_box.isVisible()
    panel.set_result(None)
    assert panel.badge_text() == "NO RESULT" and panel.cautions_box.isVisible()
    try:
        from core.memo.cautions import caution_texts as memo_texts
    except ImportError:
        return
    assert panel.caution_texts() == memo_texts()


def test_warnings_and_currency(panel):
    study = press_line()
    negative = dataclasses.replace(
        study, defender=dataclasses.replace(study.defender,
                                            market_values=MarketValues(values=(5000.0, -500.0,
                                                                               -800.0))))
    result = run_study(negative)
    panel.set_currency("£")
    panel.set_result(result)
    assert "negative" in panel.warnings_text()
    assert "£" in panel.figures_rows()[0][4]
    panel.set_result(run_study(study))
    assert panel.warnings_text() == ""


def test_after_tax_basis_and_before_tax_note(panel):
    study = press_line()
    study = dataclasses.replace(
        study, tax=Tax(0.25, 0.06),
        defender=dataclasses.replace(study.defender,
                                     depreciation=Depreciation("straight_line", 50000.0, 8, 4)),
        challengers=(dataclasses.replace(study.challengers[0],
                                         depreciation=Depreciation("macrs", macrs_class=7)),))
    result = run_study(study)
    panel.set_result(result)
    assert panel.basis_text().startswith("Basis: after tax (tax rate 25 %")
    assert "Before tax the study" in panel.before_tax_label.text()
    new = result.after_tax.alternative("New press")
    row = next(r for r in panel.figures_rows() if r[1] == "New press")
    assert row[3].startswith(str(new.economic_life))


def test_clicking_a_row_emits_the_alternative(panel, qtbot):
    panel.set_result(run_study(press_line()))
    with qtbot.waitSignal(panel.alternativeActivated, timeout=1000) as blocker:
        panel.table.cellClicked.emit(1, 0)
    assert blocker.args == [panel.figures_rows()[1][1]]
    assert Qt.AlignmentFlag.AlignRight & panel.table.item(0, 4).textAlignment()
