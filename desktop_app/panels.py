"""The result panels the window places, with plain stand-ins while a panel is missing.

The chart panel (desktop_app.charts), the results panel (desktop_app.results_panel)
and the risk view (desktop_app.risk_view) are written by their own owners; each has
``set_result(StudyResult | None)``.  If one cannot be imported, a stand-in shows
the recommendation sentence so the window still works.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QLabel, QTextBrowser, QVBoxLayout, QWidget


class _StandIn(QWidget):
    def __init__(self, what: str, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.what = what
        self.result: Any = None
        layout = QVBoxLayout(self)
        self.text = QTextBrowser()
        layout.addWidget(self.text)
        self.set_result(None)

    def set_result(self, result: Any) -> None:
        self.result = result
        if result is None:
            self.text.setPlainText(f"{self.what}: no study selected.")
            return
        self.text.setPlainText(f"{result.recommendation.reason}\n\n({self.what} is not "
                               "available in this build.)")

    def set_currency(self, symbol: str) -> None:  # same surface as the real panels
        pass


def _cautions() -> list[str]:
    try:
        from core.memo.cautions import caution_texts

        return caution_texts()
    except ImportError:
        return ["Estimates are forecasts; replacement required for safety, regulation or code "
                "overrides economics; tax treatment is simplified; decommissioning and "
                "changeover follow site safety rules and local codes; defer to a tax adviser "
                "and licensed engineering practice where they apply."]


class CautionsLabel(QLabel):
    """The docs/method.md §9 cautions, always shown under the results."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWordWrap(True)
        self.setTextFormat(Qt.TextFormat.PlainText)
        self.setStyleSheet("color: #555f6d; font-size: 11px;")
        self.setText("Cautions: " + " ".join(_cautions()))


def make_chart_panel(parent: QWidget | None = None) -> QWidget:
    try:
        import pyqtgraph as pg

        pg.setConfigOptions(useOpenGL=False)  # software rendering only
    except ImportError:
        pass
    try:
        from desktop_app.charts import ChartPanel
    except ImportError:
        return _StandIn("Chart", parent)
    return ChartPanel(parent)


def make_results_panel(parent: QWidget | None = None) -> QWidget:
    try:
        from desktop_app.results_panel import ResultsPanel
    except ImportError:
        return _StandIn("Results panel", parent)
    return ResultsPanel(parent)


def make_risk_view(parent: QWidget | None = None) -> QWidget | None:
    try:
        from desktop_app.risk_view import RiskView
    except ImportError:
        return None
    return RiskView(parent)


def results_panel_shows_cautions() -> bool:
    """True when the results panel exists (it shows the cautions itself)."""
    try:
        import desktop_app.results_panel  # noqa: F401
    except ImportError:
        return False
    return True
