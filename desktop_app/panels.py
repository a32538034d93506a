"""The result panels the window places: the chart panel, the results panel, the risk view.

Each has ``set_result(StudyResult | None)``.  They are imported when the window first
places them (after it is on screen), so start-up does not wait for pyqtgraph.
"""

from __future__ import annotations

from PySide6.QtWidgets import QWidget


def make_chart_panel(parent: QWidget | None = None) -> QWidget:
    import pyqtgraph as pg

    from desktop_app.charts import ChartPanel

    pg.setConfigOptions(useOpenGL=False)  # software rendering only
    return ChartPanel(parent)


def make_results_panel(parent: QWidget | None = None) -> QWidget:
    from desktop_app.results_panel import ResultsPanel

    return ResultsPanel(parent)


def make_risk_view(parent: QWidget | None = None) -> QWidget:
    from desktop_app.risk_view import RiskView

    return RiskView(parent)
