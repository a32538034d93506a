"""The window on a laptop and on a desktop screen (pytest-qt, offscreen).

At 1366x768 and 1920x1080 the window is laid out on the demo workbook, grabbed
(QWidget.grab) and its key widgets checked: inside their parent's visible area,
and the text of labels that must not be elided no wider than the label
(``fontMetrics().horizontalAdvance``).  The screenshots are written to the test's
temporary folder; the README's are made by ``installer/screenshots.py``.
Widths and shares are "common practice, no source": the sizes of common laptop
and desktop screens.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402
from PySide6.QtCore import QPoint, QRect, QSize  # noqa: E402
from PySide6.QtWidgets import (  # noqa: E402
    QAbstractButton,
    QLabel,
    QWidget,
)

from core.demo import build_demo  # noqa: E402
from desktop_app import screen  # noqa: E402
from desktop_app.main_window import MainWindow  # noqa: E402
from tests.gui_support import open_window  # noqa: E402

SIZES = [(1366, 768), (1920, 1080)]


pytestmark = pytest.mark.usefixtures("isolated")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return build_demo(tmp_path_factory.mktemp("demo") / "demo.tenure")


def settle(qtbot, window: MainWindow) -> None:
    qtbot.wait(20)
    assert window.wait_for_jobs()
    qtbot.wait(20)


def laid_out_window(qtbot, demo, size: tuple[int, int] | None = None) -> MainWindow:
    window = open_window(qtbot, demo, offer_recovery=False)
    if size is not None:
        window.resize(*size)
    window.show()
    settle(qtbot, window)
    if size is not None:
        window.reset_layout()
        settle(qtbot, window)
    return window


def visible_in_window(widget: QWidget, window: QWidget) -> bool:
    """The widget's whole rectangle lies inside every ancestor's rectangle up to the window."""
    rect = QRect(QPoint(0, 0), widget.size())
    w = widget
    while w is not window and w is not None:
        parent = w.parentWidget()
        if parent is None:
            return False
        rect = rect.translated(w.pos())
        if not QRect(QPoint(0, 0), parent.size()).contains(rect):
            return False
        w = parent
    return True


def text_fits(label: QLabel | QAbstractButton) -> bool:
    text = label.text()
    if isinstance(label, QLabel):
        if label.wordWrap() or "<" in text:
            return True
        room = label.contentsRect().width()
    else:
        room = label.width() - 8  # the button's own frame and margins
    return label.fontMetrics().horizontalAdvance(text) <= room


def form_labels(widget: QWidget) -> list[QLabel]:
    return [lab for lab in widget.findChildren(QLabel)
            if lab.isVisibleTo(widget) and lab.text() and not lab.wordWrap()]


def test_minimum_and_first_size_fit_small_screens(qtbot, demo):
    window = laid_out_window(qtbot, demo)
    hint = window.minimumSizeHint().expandedTo(window.minimumSize())
    assert hint.width() <= 1280 and hint.height() <= 720, hint
    # The first size fits the available area of the screen it opens on (hand calculation:
    # 1366 - 16 and 728 - 40 for the frame).
    assert screen.first_size(QRect(0, 0, 1366, 728)) == QSize(1350, 688)
    assert screen.first_size(QRect(0, 0, 1920, 1040)) == QSize(1720, 980)
    available = window.screen().availableGeometry()
    first = screen.first_size(available)
    assert first.width() <= available.width() and first.height() <= available.height()
    assert window.width() <= max(available.width(), hint.width())


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_no_text_clipped(qtbot, demo, tmp_path, size):
    window = laid_out_window(qtbot, demo, size)
    assert window.size() == QSize(*size)
    shot = tmp_path / f"window-{size[0]}.png"
    assert window.grab().save(str(shot))
    # The editor never scrolls sideways: every field is reachable without it.
    editor_scroll = window.splitter.widget(1)
    assert editor_scroll.horizontalScrollBar().maximum() == 0
    editor = window.editor
    for label in form_labels(editor):
        if label.isVisible():
            assert text_fits(label), f"editor label clipped: {label.text()!r}"
    for button in (editor.add_button, editor.remove_button):
        assert text_fits(button), button.text()
    # The Uncertainty page (demo assets carry distributions) fits the editor's width too.
    editor.pages.setCurrentWidget(editor.uncertainty)
    settle(qtbot, window)
    assert editor.uncertainty.rows and editor.uncertainty.study is not None
    assert editor_scroll.horizontalScrollBar().maximum() == 0
    for row in editor.uncertainty.rows:
        assert text_fits(row.estimate), row.estimate.text()
    editor.pages.setCurrentIndex(0)
    settle(qtbot, window)
    # The title and the alternative's name are shown whole.
    for edit in (editor.settings.title_edit, editor.editors()[0].name_edit):
        room = edit.width() - 12
        assert edit.fontMetrics().horizontalAdvance(edit.text()) <= room, edit.text()
    # The register shows every asset's tag (the first word) at 1366 and whole names at 1920.
    view = window.register.view
    name_width = view.columnWidth(0) - view.indentation() - 8
    metrics = view.fontMetrics()
    for entry in window.doc.entries:
        shown = entry.name if size[0] >= 1920 else entry.name.split()[0]
        assert metrics.horizontalAdvance(shown) <= name_width, (shown, name_width)
    # The results: the badge whole, the key figures with every row (the defender's too).
    panel = window.results_panel
    assert text_fits(panel.badge)
    table = panel.table
    rows = table.rowCount()
    result = window.current_result
    assert rows == len(result.alternatives) >= 2
    assert "defender" in [table.item(r, 2).text() for r in range(rows)]
    needed = sum(table.rowHeight(r) for r in range(rows))
    assert table.viewport().height() >= needed
    assert table.verticalScrollBar().maximum() == 0
    # The chart's value-axis title fits along the axis (its short form on a short chart).
    from PySide6.QtGui import QFont, QFontMetrics

    plot = window.chart_panel.plot_widget().getPlotItem()
    font = QFont(window.chart_panel.font())
    font.setPointSizeF(9.0)
    title = plot.getAxis("left").labelText
    assert title and QFontMetrics(font).horizontalAdvance(title) <= plot.getViewBox().height()
    for widget in (window.register, window.editor.settings.title_edit, window.right_tabs,
                   panel.badge, window.chart_panel):
        assert visible_in_window(widget, window), type(widget).__name__
    # Scrolled into view, the whole table is inside the results pane.
    panel.findChild(type(editor_scroll)).ensureWidgetVisible(table, 0, 0)
    settle(qtbot, window)
    assert visible_in_window(table, window)
    # The Risk tab: each chart at its readable minimum size.
    window.right_tabs.setCurrentWidget(window.risk_view)
    settle(qtbot, window)
    risk = window.risk_view
    assert risk.charts.width() >= risk.charts.minimumSizeHint().width()
    for i in range(risk.charts.count()):
        risk.charts.setCurrentIndex(i)
        settle(qtbot, window)
        page = risk.charts.currentWidget()
        assert page.width() >= 380 and page.height() >= 260, (risk.charts.tabText(i),
                                                               page.size())
        assert visible_in_window(page, window)
    assert window.grab().save(str(tmp_path / f"risk-{size[0]}.png"))


def test_panes_collapse_and_layout_is_remembered(qtbot, demo):
    window = laid_out_window(qtbot, demo, (1366, 768))
    assert window.splitter.childrenCollapsible() and window.right_split.childrenCollapsible()
    total = sum(window.splitter.sizes())
    window.splitter.setSizes([0, total // 2, total - total // 2])  # the register hidden
    settle(qtbot, window)
    assert window.splitter.sizes()[0] == 0 and window.register.visibleRegion().isEmpty()
    sizes = window.splitter.sizes()
    window.discard_changes()
    window.close()
    again = laid_out_window(qtbot, demo)
    # The offscreen screen is smaller than 1366 pixels, so the restored window is cut to it;
    # the register stays hidden and the other two panes keep their shares.
    restored = again.splitter.sizes()
    assert restored[0] == 0 and abs(restored[1] / restored[2] - sizes[1] / sizes[2]) < 0.02
    again.reset_layout()
    assert again.splitter.sizes()[0] > 0
