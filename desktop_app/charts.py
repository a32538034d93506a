"""The study charts of the window (pyqtgraph, software rendering, white background).

``ChartPanel`` shows one of four views of a ``core.results.StudyResult``:

``"aw"``
    Equivalent annual cost (EAC = -AW) against retention years k = 1..n for
    every alternative, each economic service life (ESL) marked "ESL k y".
    A toggle shows the signed annual worth instead (costs negative).
``"parts"``
    The capital-recovery and operating parts of one chosen alternative and
    their total (EAC_k = CR_k + operating cost_k).
``"marginal"``
    The defender's marginal cost MC_j of each further year j against the best
    challenger's EAC at its ESL (the one-more-year check): keep while the bar
    stays below the line.
``"options"``
    The study-period options (keep the defender j years, then a challenger for
    T - j), one bar per option; infeasible options are grey and hatched, with
    the reason in the hover read-out and tooltip.

The panel only draws what the result holds; it computes no economics (the one
exception: an after-tax object without an ``economic_life`` gets its ESL from
``core.annual_worth.economic_life``).  ``series()`` returns the plotted data of
the current view for tests.
"""

from __future__ import annotations

import ctypes
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from html import escape
from math import floor
from pathlib import Path
from typing import Any

import numpy as np
import pyqtgraph as pg
import pyqtgraph.exporters  # noqa: F401  (registers ImageExporter / SVGExporter)
from PySide6.QtCore import QObject, QPointF, QRectF, Qt, Signal
from PySide6.QtGui import (
    QBrush,
    QColor,
    QCursor,
    QFont,
    QFontMetrics,
    QPen,
)
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QFileDialog,
    QGraphicsGridLayout,
    QHBoxLayout,
    QLabel,
    QMessageBox,
    QSizePolicy,
    QStackedWidget,
    QTabBar,
    QToolButton,
    QToolTip,
    QVBoxLayout,
    QWidget,
)

from core.decision import keeps_next_year
from core.results import AlternativeResult, BasisResult, StudyOption, StudyResult
from core.text import money
from desktop_app import palette


class _Probe(QObject):
    ping = Signal()


def guard_signal_refcount_bug() -> bool:
    """Work around a PySide6 6.12.0 bug on Python 3.11: each ``Signal.emit()`` drops one
    reference to ``True`` without taking it, so after a few hundred emits (pyqtgraph emits
    on every paint and mouse move) the interpreter aborts with "bool_dealloc: deallocating
    True or False".  When one probe emit shows the leak, give ``True`` a huge reference
    count so it can never reach zero (Python 3.12+ makes it immortal anyway).  Returns
    True when the guard was applied.  Harmless and idempotent otherwise.
    """
    global _GUARDED
    if _GUARDED or sys.version_info >= (3, 12):
        return _GUARDED
    probe = _Probe()
    before = sys.getrefcount(True)
    probe.ping.emit()
    if sys.getrefcount(True) < before:
        ctypes.c_ssize_t.from_address(id(True)).value += 1 << 40
        _GUARDED = True
    return _GUARDED


_GUARDED = False
guard_signal_refcount_bug()

__all__ = ["ChartPanel", "PALETTE", "VIEWS", "MoneyAxis", "YearAxis"]

# Okabe & Ito's colour-blind-safe palette (yellow left out: unreadable on white).
PALETTE = palette.SERIES  # the defender in the keep colour, the first challenger in replace
SYMBOLS = ("o", "s", "t", "d", "h", "p", "star")
DASHES = (Qt.PenStyle.SolidLine, Qt.PenStyle.DashLine, Qt.PenStyle.DotLine,
          Qt.PenStyle.DashDotLine, Qt.PenStyle.DashDotDotLine)
GREY = "#9a9a9a"

VIEWS: tuple[tuple[str, str], ...] = (
    ("aw", "By retention"),
    ("parts", "Cost parts"),
    ("marginal", "One more year"),
    ("options", "Study period"),
)

BEFORE, AFTER = "before-tax", "after-tax"


class _FastGridAxis(pg.AxisItem):
    """An axis whose thin tick and grid lines are drawn as filled 1-pixel rectangles.

    Qt's raster engine strokes a translucent line (the grid is 15 % black) pixel by
    pixel: about 6 ms per axis each time pyqtgraph replays a new axis picture, which
    happens after every edit that moves the range.  A filled rectangle covering the
    same device pixels (the pixel row or column holding the line) takes well under a
    millisecond and looks the same.
    """

    def drawPicture(self, p, axisSpec, tickSpecs, textSpecs):  # noqa: N802, N803 (pyqtgraph naming)
        to_device = self.deviceTransform_()  # pyqtgraph: item -> view pixels, or None
        if to_device is None or to_device.isRotating() or not to_device.isInvertible():
            super().drawPicture(p, axisSpec, tickSpecs, textSpecs)
            return
        from_device, _ok = to_device.inverted()
        sx, sy, dx, dy = to_device.m11(), to_device.m22(), to_device.dx(), to_device.dy()
        lines = []
        cells: dict[int, tuple[QColor, list[QRectF]]] = {}
        thin_pens: dict[int, bool] = {}
        for spec in tickSpecs:
            pen, p1, p2 = spec
            thin = thin_pens.get(id(pen))
            if thin is None:
                thin = thin_pens[id(pen)] = (
                    pen.style() == Qt.PenStyle.SolidLine and pen.isCosmetic()
                    and pen.widthF() <= 1.0 and pen.brush().style() == Qt.BrushStyle.SolidPattern)
            x1, y1, x2, y2 = p1.x(), p1.y(), p2.x(), p2.y()
            if thin and (x1 == x2 or y1 == y2):
                # The device pixels the line covers: the pixel row (or column) holding it.
                c0, c1 = sorted((floor(sx * x1 + dx), floor(sx * x2 + dx)))
                r0, r1 = sorted((floor(sy * y1 + dy), floor(sy * y2 + dy)))
                color = pen.color()
                cells.setdefault(color.rgba(), (color, []))[1].append(
                    QRectF(c0, r0, c1 - c0 + 1, r1 - r0 + 1))
            else:
                lines.append(spec)
        if cells:
            p.save()
            p.setWorldTransform(from_device, True)  # the rectangles are in device pixels
            p.setRenderHint(p.RenderHint.Antialiasing, False)
            p.setPen(Qt.PenStyle.NoPen)
            for color, rects in cells.values():
                p.setBrush(color)
                p.drawRects(rects)
            p.restore()
        super().drawPicture(p, axisSpec, lines, textSpecs)


class MoneyAxis(_FastGridAxis):
    """A value axis with thousands separators and no SI prefix (1,000 not 1k)."""

    def __init__(self, orientation: str = "left", **kwargs: Any) -> None:
        super().__init__(orientation, **kwargs)
        self.enableAutoSIPrefix(False)

    def tickStrings(self, values, scale, spacing):  # noqa: N802 (Qt naming)
        decimals = 0 if spacing >= 1 else min(6, int(np.ceil(-np.log10(spacing))))
        return [money(v * scale, "", decimals) for v in values]


class YearAxis(_FastGridAxis):
    """A whole-years axis: ticks only on integers."""

    def __init__(self, orientation: str = "bottom", **kwargs: Any) -> None:
        super().__init__(orientation, **kwargs)
        self.enableAutoSIPrefix(False)

    def tickValues(self, minVal, maxVal, size):  # noqa: N802, N803 (Qt naming)
        span = max(maxVal - minVal, 1e-9)
        step = next(s for s in (1, 2, 5, 10, 20, 50, 100, 1000) if span / s <= 15)
        first = np.ceil(minVal / step) * step
        return [(float(step), list(np.arange(first, maxVal + 1e-9, step)))]

    def tickStrings(self, values, scale, spacing):  # noqa: N802
        return [f"{round(v):d}" if abs(v - round(v)) < 1e-6 else "" for v in values]


class _Legend:
    """A pyqtgraph legend that is rebuilt only when its entries change (rebuilding is slow)."""

    def __init__(self, legend: pg.LegendItem, width: Callable[[], float] | None = None) -> None:
        self.item = legend
        self._width = width
        self._shown: list[tuple[int, str]] = []
        self._pending: list[tuple[Any, str]] = []

    def clear(self) -> None:
        self._pending = []

    def addItem(self, item: Any, label: str) -> None:  # noqa: N802 (pyqtgraph naming)
        self._pending.append((item, label))

    def _columns(self) -> int:
        longest = max((len(label) for _item, label in self._pending), default=0)
        columns = 3 if longest <= 20 else 2 if longest <= 32 else 1
        if self._width is not None:
            # the legend's row is as wide as its widest row: never wider than the plot
            font = QFont()
            font.setPointSizeF(9.0)
            metrics = QFontMetrics(font)
            entry = max((metrics.horizontalAdvance(label) for _i, label in self._pending),
                        default=0) + 60
            while columns > 1 and columns * entry > self._width():
                columns -= 1
        return columns

    def commit(self) -> None:
        """Show the pending entries, in as many columns as the plot's width allows now (also
        called on resize: a legend laid out for a wider plot would hold it wider than its
        panel)."""
        wanted = [(id(item), label) for item, label in self._pending]
        columns = self._columns()
        if wanted != self._shown or columns != self.item.columnCount:
            self.item.clear()
            if columns != self.item.columnCount:
                # A grid layout keeps its old column count once emptied, and the legend
                # would keep the old row's width: start from a new, empty one.
                old = self.item.layout
                layout = QGraphicsGridLayout()
                layout.setHorizontalSpacing(old.horizontalSpacing())
                layout.setVerticalSpacing(old.verticalSpacing())
                self.item.layout = layout
                self.item.setLayout(layout)
            self.item.setColumnCount(columns)
            for item, label in self._pending:
                self.item.addItem(item, escape(label))
            self._shown = wanted

    def labels(self) -> list[str]:
        return [label for _id, label in self._shown]


@dataclass
class _Target:
    """A point (or bar) the hover read-out can report."""

    x: float
    y: float
    text: str
    bar_width: float = 0.0


def _pen(color: str, width: float = 2.0, dash: Qt.PenStyle = Qt.PenStyle.SolidLine) -> QPen:
    pen = pg.mkPen(color=color, width=width)
    pen.setStyle(dash)
    pen.setCosmetic(True)
    return pen


class _Plot(pg.PlotWidget):
    """One view: a white plot with money and year axes, a legend, a read-out and ESL labels."""

    def __init__(self, parent: QWidget | None = None, year_axis: bool = True) -> None:
        axes = {"left": MoneyAxis("left"),
                "bottom": YearAxis("bottom") if year_axis else MoneyAxis("bottom")}
        super().__init__(parent, background="w", axisItems=axes)
        self.setAntialiasing(True)
        item = self.getPlotItem()
        for name in ("left", "bottom", "top", "right"):
            axis = item.getAxis(name)
            axis.setPen(pg.mkPen("k"))
            axis.setTextPen(pg.mkPen("k"))
            # No units, so no SI prefix: without this the hidden top and right axes rebuild
            # their (empty) label's text document on every range change.
            axis.enableAutoSIPrefix(False)
        item.showGrid(x=True, y=True, alpha=0.15)
        item.setMenuEnabled(False)
        # An invisible border path ends in "Z", which pyqtgraph's SVG exporter cannot parse.
        item.getViewBox().border = None
        item.getViewBox().setDefaultPadding(0.07)
        # The legend sits in its own row under the x axis, so it never hides data.
        legend = pg.LegendItem(offset=None, labelTextColor="k", labelTextSize="9pt",
                               colCount=3, horSpacing=24, verSpacing=-4)
        # Its width never sets the plot's: a legend laid out for a wider window must not hold
        # the plot wider than its panel (``_Legend.commit`` recounts its columns on resize).
        legend.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        item.layout.addItem(legend, 4, 1)
        item.layout.setAlignment(legend, Qt.AlignmentFlag.AlignHCenter)
        self.legend = _Legend(legend, self.column_width)
        self._texts: dict[str, str] = {}
        self._shown_labels: dict[str, str] = {}
        self.targets: list[_Target] = []
        self.labels: list[pg.TextItem] = []
        self.crosshair = pg.InfiniteLine(angle=90, movable=False,
                                         pen=_pen("#666666", 1, Qt.PenStyle.DashLine))
        self.crosshair.setZValue(50)
        self.readout = pg.TextItem("", color="k", fill=pg.mkBrush(255, 255, 255, 235),
                                   border=pg.mkPen("#444444"), anchor=(0, 1))
        self.readout.setZValue(100)
        for extra in (self.crosshair, self.readout):
            item.addItem(extra, ignoreBounds=True)
            extra.hide()
        self.message = pg.TextItem("", color="#555555", anchor=(0.5, 0.5))
        item.addItem(self.message, ignoreBounds=True)
        self.message.hide()
        self._font = QFont()
        self._font.setPointSize(9)

    def label_room(self) -> float:
        """Headroom for the ESL labels beyond the curves, as a fraction of the data span:
        12 % on a tall plot, more on a short one so that a label under the lowest point
        (and any labels stacked under it) stays inside the plot."""
        # label() anchors: (0.5, -0.35 - 1.1 s) under a point, (0.5, 1.35 + 1.1 s) over it
        stacks = [(-t.anchor.y() - 0.35 if t.anchor.y() < 0 else t.anchor.y() - 1.35) / 1.1
                  for t in self.labels if t.isVisible()]
        rows = 1 + max([0.0, *stacks])
        height = self.getPlotItem().vb.height()
        line = max([QFontMetrics(self._font).height() + 6.0,
                    *(t.boundingRect().height() for t in self.labels)])
        need = line * (0.35 + 1.1 * rows) + 4
        if height <= 2 * need:
            return 0.5 if height > 0 else 0.12
        return max(0.12, need / (height - need))

    def label(self, index: int, text: str, x: float, y: float, color: str,
              anchor: tuple[float, float]) -> pg.TextItem:
        """The index-th reusable text label, placed and shown."""
        while len(self.labels) <= index:
            t = pg.TextItem("", anchor=(0.5, 0), fill=pg.mkBrush(255, 255, 255, 200))
            t.setFont(self._font)
            t.setZValue(40)
            self.getPlotItem().addItem(t, ignoreBounds=True)
            self.labels.append(t)
        t = self.labels[index]
        t.setText(text, color=color)
        t.setAnchor(anchor)
        t.setPos(x, y)
        t.show()
        return t

    def set_title(self, text: str, note: str = "") -> None:
        """The plot title (plain text) and an optional caveat line under it."""
        html = escape(text) + (_note(escape(note)) if note else "")
        if self._texts.get("title") != html:
            self._texts["title"] = html
            self.getPlotItem().setTitle(html, color="k", size="11pt")
        self._fit_title()

    def column_width(self) -> float:
        """The width of the plot's middle column (title, plot area, legend): the widget's
        less the value axis and the margins."""
        left = self.getPlotItem().getAxis("left")
        # the width fit_left_axis fixed, before Qt lays the axis out
        axis = (getattr(left, "fixedWidth", None) or left.width()) if left.isVisible() else 0.0
        return float(self.width()) - float(axis) - 16.0

    def _fit_title(self) -> None:
        """Wrap the title to the plot's width: pyqtgraph makes a one-line title the plot's
        minimum width, and a long one ("One more year? Marginal cost of ...") pushed the
        plot past the right edge of its pane on a laptop screen."""
        plot_item = self.getPlotItem()
        label = plot_item.titleLabel
        item = label.item
        item.setTextWidth(-1)
        room = max(self.column_width() - 8.0, 120.0)
        height = 30.0                      # pyqtgraph's fixed title row
        if item.boundingRect().width() > room:
            item.setTextWidth(room)
            height = max(height, item.boundingRect().height())
        label.setMaximumHeight(height)
        plot_item.layout.setRowFixedHeight(0, height)
        label.updateMin()
        label.resizeEvent(None)

    def set_axis_label(self, axis: str, text: str) -> None:
        if self._texts.get(axis) != text:
            self._texts[axis] = text
            self._shown_labels.pop(axis, None)
            self._fit_axis_label(axis)

    def _fit_axis_label(self, axis: str) -> None:
        """The axis title, or its short form (the part after ", ": "EAC = -AW (£/year)")
        when the whole title is longer than the axis (a chart on a laptop screen)."""
        text = self._texts.get(axis)
        if text is None:
            return
        room = self.getPlotItem().getViewBox().height() if axis in ("left", "right") else \
            self.getPlotItem().getViewBox().width()
        font = QFont(self.font())
        font.setPointSizeF(9.0)
        if self.isVisible() and ", " in text and \
                QFontMetrics(font).horizontalAdvance(text) > room - 8:
            shown = text.split(", ", 1)[1]
        else:
            shown = text
        if self._shown_labels.get(axis) != shown:
            self._shown_labels[axis] = shown
            self.getPlotItem().setLabel(axis, escape(shown), color="k", **{"font-size": "9pt"})

    def showEvent(self, event) -> None:  # noqa: N802 - Qt's name
        super().showEvent(event)
        for axis in ("left", "bottom"):
            self._fit_axis_label(axis)

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt's name
        if "legend" in self.__dict__:  # before pyqtgraph lays the plot out at the new width
            self.legend.commit()
        super().resizeEvent(event)
        if "_shown_labels" in self.__dict__:  # pyqtgraph calls this from its __init__ too
            for axis in ("left", "bottom"):
                self._fit_axis_label(axis)
            if "title" in self._texts:
                self._fit_title()

    def fit_left_axis(self, *arrays: np.ndarray) -> None:
        """Fix the value axis width to its widest tick label (Qt lays it out late otherwise)."""
        finite = [np.abs(np.asarray(a, dtype=float)) for a in arrays if np.size(a)]
        top = max((float(np.nanmax(a)) for a in finite if np.isfinite(a).any()), default=0.0)
        axis = self.getPlotItem().getAxis("left")
        metrics = QFontMetrics(axis.style.get("tickFont") or QFont())
        text_width = metrics.horizontalAdvance(money(-top * 1.25))
        if axis.fixedWidth != text_width + 36:  # setWidth throws the axis picture away
            axis.setWidth(text_width + 36)
            if "title" in self._texts:
                self._fit_title()          # the title's column is narrower (or wider) now

    def show_axes(self) -> None:
        """Show both axes (showing a shown axis would make pyqtgraph redraw its picture)."""
        item = self.getPlotItem()
        for name in ("left", "bottom"):
            if not item.getAxis(name).isVisible():
                item.showAxis(name)

    def hide_labels(self, start: int = 0) -> None:
        for t in self.labels[start:]:
            t.hide()

    def set_message(self, text: str) -> None:
        """A grey centred note (e.g. "No result"), or none for ''."""
        if not text:
            self.message.hide()
            return
        self.message.setText(text)
        (x0, x1), (y0, y1) = self.getPlotItem().viewRange()
        self.message.setPos((x0 + x1) / 2, (y0 + y1) / 2)
        self.message.show()

    def hide_readout(self) -> None:
        self.readout.hide()
        self.crosshair.hide()

    def nearest(self, x: float, y: float, max_pixels: float = 40.0) -> _Target | None:
        """The hover target nearest to data point (x, y), within ``max_pixels``; bars hit by x."""
        if not self.targets:
            return None
        vb = self.getPlotItem().getViewBox()
        px, py = vb.viewPixelSize()
        px, py = px or 1.0, py or 1.0
        bars = [t for t in self.targets if t.bar_width > 0]
        if bars:
            hits = [t for t in bars if abs(t.x - x) <= t.bar_width / 2]
            if hits:
                return min(hits, key=lambda t: abs(t.x - x))
        points = [t for t in self.targets if t.bar_width <= 0]
        if not points:
            return None
        tx = np.array([t.x for t in points])
        ty = np.array([t.y for t in points])
        d = np.hypot((tx - x) / px, (ty - y) / py)
        i = int(np.argmin(d))
        return points[i] if d[i] <= max_pixels else None

    def show_readout(self, target: _Target) -> None:
        (x0, x1), (y0, y1) = self.getPlotItem().viewRange()
        right = target.x > (x0 + x1) / 2
        low = target.y < (y0 + y1) / 2
        self.readout.setAnchor((1.0 if right else 0.0, 1.0 if low else 0.0))
        self.readout.setText(target.text)
        offset_x = (x1 - x0) * 0.01 * (-1 if right else 1)
        self.readout.setPos(target.x + offset_x, target.y)
        self.readout.show()
        self.crosshair.setPos(target.x)
        self.crosshair.show()


class ChartPanel(QWidget):
    """Charts of one study result: AW by retention, its parts, the one-more-year check, options.

    Signals: ``viewChanged(str)`` (view key), ``alternativeChanged(str)``,
    ``exported(str)`` (the written path).
    """

    viewChanged = Signal(str)
    alternativeChanged = Signal(str)
    exported = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._result: StudyResult | None = None
        self._currency = ""
        self._series: dict[str, dict[str, tuple[np.ndarray, np.ndarray]]] = {
            key: {} for key, _ in VIEWS}
        self._updating = False
        self._dirty: set[str] = {key for key, _ in VIEWS}

        self.tabs = QTabBar(self)
        tips = {"aw": "Equivalent annual cost (or AW) of every alternative by years kept",
                "parts": "Capital recovery and operating parts of one alternative",
                "marginal": "The defender's marginal cost by year against the best challenger",
                "options": "Keep-then-replace options over the study period"}
        for key, title in VIEWS:
            index = self.tabs.addTab(title)
            self.tabs.setTabData(index, key)
            self.tabs.setTabToolTip(index, tips[key])
        self.tabs.setExpanding(False)
        self.alt_label = QLabel("Alternative:", self)
        self.alt_combo = QComboBox(self)
        self.alt_combo.setMinimumContentsLength(10)
        self.basis_combo = QComboBox(self)
        self.basis_combo.addItem("Before tax", BEFORE)
        self.basis_combo.addItem("After tax", AFTER)
        self.basis_combo.setToolTip("Show the before-tax or the after-tax figures")
        self.signed_check = QCheckBox("Signed AW (costs negative)", self)
        self.signed_check.setToolTip(
            "Off: equivalent annual cost, EAC = -AW (lower is better).\n"
            "On: annual worth AW, signed, costs negative (higher is better).")
        self.export_button = QToolButton(self)
        self.export_button.setText("Export…")
        self.export_button.setToolTip("Save the current chart as PNG or SVG")

        # Two rows so that the tabs never need scroll arrows in a narrow pane.
        bar = QHBoxLayout()
        bar.setContentsMargins(0, 0, 0, 0)
        bar.addWidget(self.tabs)
        bar.addStretch(1)
        bar.addWidget(self.export_button)
        controls = QHBoxLayout()
        controls.setContentsMargins(0, 0, 0, 0)
        for w in (self.alt_label, self.alt_combo, self.basis_combo, self.signed_check):
            controls.addWidget(w)
        controls.addStretch(1)

        self.stack = QStackedWidget(self)
        self.plots: dict[str, _Plot] = {}
        for key, _ in VIEWS:
            plot = _Plot(self)
            plot.scene().sigMouseMoved.connect(
                lambda pos, k=key: self._mouse_moved(k, pos))
            if key in ("aw", "parts"):
                plot.getPlotItem().vb.sigResized.connect(
                    lambda _vb, k=key: self._view_resized(k))
            self.plots[key] = plot
            self.stack.addWidget(plot)
        self._build_items()

        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addLayout(bar)
        layout.addLayout(controls)
        layout.addWidget(self.stack, 1)

        self.tabs.currentChanged.connect(self._tab_changed)
        self.alt_combo.currentIndexChanged.connect(self._alt_changed)
        self.basis_combo.currentIndexChanged.connect(lambda _i: self._redraw())
        self.signed_check.toggled.connect(lambda _b: self._redraw())
        self.export_button.clicked.connect(self._export_clicked)
        self._sync_controls()
        self._redraw()

    # ------------------------------------------------------------------ items
    def _build_items(self) -> None:
        """Create the reusable plot items once; set_result only updates their data."""
        self._aw_lines: list[pg.PlotDataItem] = []
        self._aw_esl: list[pg.ScatterPlotItem] = []
        p = self.plots["parts"].getPlotItem()
        self._cr_line = pg.PlotDataItem(pen=_pen(PALETTE[0]), symbol="s", symbolSize=6,
                                        symbolBrush=PALETTE[0], symbolPen=None,
                                        name="Capital recovery")
        self._op_line = pg.PlotDataItem(pen=_pen(PALETTE[1], 2, Qt.PenStyle.DashLine),
                                        symbol="t", symbolSize=7, symbolBrush=PALETTE[1],
                                        symbolPen=None, name="Operating")
        self._total_line = pg.PlotDataItem(pen=_pen("#000000", 3), symbol="o", symbolSize=6,
                                           symbolBrush="#000000", symbolPen=None, name="Total")
        self._parts_esl = pg.ScatterPlotItem(size=16, symbol="star", brush=pg.mkBrush("#000000"),
                                             pen=pg.mkPen("w"))
        for it in (self._cr_line, self._op_line, self._total_line):
            p.addItem(it)
        p.addItem(self._parts_esl)
        self._zero_parts = pg.InfiniteLine(pos=0, angle=0, pen=_pen("#444444", 1))
        p.addItem(self._zero_parts, ignoreBounds=True)

        m = self.plots["marginal"].getPlotItem()
        self._mc_keep = pg.BarGraphItem(x=[], height=[], width=0.6, brush=PALETTE[0],
                                        pen=pg.mkPen(PALETTE[0]), name="Defender marginal cost")
        self._mc_over = pg.BarGraphItem(x=[], height=[], width=0.6,
                                        brush=QBrush(QColor(PALETTE[1]), Qt.BrushStyle.BDiagPattern),
                                        pen=pg.mkPen(PALETTE[1], width=1.5),
                                        name="Marginal cost above the challenger's")
        self._challenger_line = pg.PlotDataItem(pen=_pen(PALETTE[2], 2.5, Qt.PenStyle.DashLine),
                                                name="Best challenger EAC at ESL")
        m.addItem(self._mc_keep)
        m.addItem(self._mc_over)
        m.addItem(self._challenger_line)

        self._option_bars: list[pg.BarGraphItem] = []
        o = self.plots["options"].getPlotItem()
        self._option_grey = pg.BarGraphItem(
            x=[], height=[], width=0.2, brush=QBrush(QColor(GREY), Qt.BrushStyle.BDiagPattern),
            pen=pg.mkPen(GREY), name="Infeasible")
        o.addItem(self._option_grey)
        self._option_best = pg.BarGraphItem(x=[], height=[], width=0.2, brush=None,
                                            pen=pg.mkPen("#000000", width=3))
        self._option_best.setZValue(20)
        o.addItem(self._option_best)
        for key in ("marginal", "options"):
            self.plots[key].getPlotItem().addItem(
                pg.InfiniteLine(pos=0, angle=0, pen=_pen("#444444", 1)), ignoreBounds=True)
        # A few items ahead, so a usual study's first set_result only updates data.
        self._aw_item(3)
        self._option_item(3)
        for plot in self.plots.values():
            plot.label(2, "", 0.0, 0.0, "k", (0.5, 0.0))
            plot.hide_labels()

    def _style(self, i: int) -> tuple[str, str, Qt.PenStyle]:
        return PALETTE[i % len(PALETTE)], SYMBOLS[i % len(SYMBOLS)], DASHES[i % len(DASHES)]

    def _aw_item(self, i: int) -> tuple[pg.PlotDataItem, pg.ScatterPlotItem]:
        p = self.plots["aw"].getPlotItem()
        while len(self._aw_lines) <= i:
            n = len(self._aw_lines)
            color, symbol, dash = self._style(n)
            line = pg.PlotDataItem(pen=_pen(color, 2.2, dash), symbol=symbol, symbolSize=7,
                                   symbolBrush=color, symbolPen=pg.mkPen(color))
            esl = pg.ScatterPlotItem(size=18, symbol="star", brush=pg.mkBrush(color),
                                     pen=pg.mkPen("k", width=1))
            esl.setZValue(30)
            p.addItem(line)
            p.addItem(esl)
            self._aw_lines.append(line)
            self._aw_esl.append(esl)
        return self._aw_lines[i], self._aw_esl[i]

    def _option_item(self, i: int) -> pg.BarGraphItem:
        o = self.plots["options"].getPlotItem()
        while len(self._option_bars) <= i:
            color = PALETTE[len(self._option_bars) % len(PALETTE)]
            bar = pg.BarGraphItem(x=[], height=[], width=0.2, brush=color, pen=pg.mkPen(color))
            o.addItem(bar)
            self._option_bars.append(bar)
        return self._option_bars[i]

    # --------------------------------------------------------------- public API
    def set_result(self, result: StudyResult | None) -> None:
        """Show ``result`` (a ``core.results.StudyResult``), or clear the charts for None."""
        self._result = result
        self._sync_controls()
        self._redraw()

    def result(self) -> StudyResult | None:
        return self._result

    def set_currency(self, symbol: str) -> None:
        """The currency symbol of axis titles and read-outs ('' for none)."""
        self._currency = symbol or ""
        self._redraw()

    def currency(self) -> str:
        return self._currency

    def set_view(self, key: str) -> None:
        """Select a view by key: 'aw', 'parts', 'marginal' or 'options'."""
        keys = [k for k, _ in VIEWS]
        if key not in keys:
            raise ValueError(f"unknown chart view {key!r}; expected one of {keys}")
        self.tabs.setCurrentIndex(keys.index(key))

    def view(self) -> str:
        return VIEWS[max(self.tabs.currentIndex(), 0)][0]

    def available_views(self) -> list[str]:
        return [VIEWS[i][0] for i in range(self.tabs.count()) if self.tabs.isTabEnabled(i)]

    def set_alternative(self, name: str) -> None:
        """The alternative the 'parts' view breaks down."""
        index = self.alt_combo.findText(name)
        if index < 0:
            raise KeyError(name)
        self.alt_combo.setCurrentIndex(index)

    def alternative(self) -> str | None:
        return self.alt_combo.currentText() or None

    def set_signed(self, signed: bool) -> None:
        """True: signed AW (costs negative); False: equivalent annual cost EAC = -AW."""
        self.signed_check.setChecked(bool(signed))

    def signed(self) -> bool:
        return self.signed_check.isChecked()

    def set_basis(self, basis: str) -> None:
        """'before-tax' or 'after-tax' (the latter only when the result has after-tax figures)."""
        index = self.basis_combo.findData(basis)
        if index < 0:
            raise ValueError(f"unknown basis {basis!r}")
        if basis == AFTER and not self.has_after_tax():
            raise ValueError("this result has no after-tax figures")
        self.basis_combo.setCurrentIndex(index)

    def basis(self) -> str:
        return BEFORE if not self.has_after_tax() else self.basis_combo.currentData()

    def has_after_tax(self) -> bool:
        return self._result is not None and self._result.after_tax is not None

    def series(self) -> dict[str, tuple[np.ndarray, np.ndarray]]:
        """The data of the current view, by series name, as (x, y) arrays.

        'aw': one entry per alternative (years, EAC or AW) plus '<name> ESL' (one point).
        'parts': 'Capital recovery', 'Operating', 'Total' and 'ESL'.
        'marginal': 'Defender marginal cost' (years, MC_j) and 'Best challenger' (x, level).
        'options': one entry per challenger (and 'Keep' for keeping to the end) with
        (defender years j, EAC or AW; NaN where infeasible).
        Values follow the sign toggle: EAC/costs positive, or signed AW (costs negative).
        """
        if self.view() in self._dirty:
            self._draw(self.view())
        return dict(self._series[self.view()])

    def hover_text(self, x: float, y: float) -> str:
        """The read-out the current view shows for the data point (x, y) ('' if none near)."""
        target = self.plots[self.view()].nearest(x, y)
        return target.text if target else ""

    def plot_widget(self, key: str | None = None) -> pg.PlotWidget:
        return self.plots[key or self.view()]

    def export(self, path: str | Path, width: int = 1600) -> Path:
        """Write the current chart to ``path``: PNG (``width`` pixels wide) or SVG, by suffix."""
        path = Path(path)
        suffix = path.suffix.lower()
        if self.view() in self._dirty:
            self._draw(self.view())
        item = self.plots[self.view()].getPlotItem()
        for plot in self.plots.values():
            plot.hide_readout()
        # The view box applies a new auto range lazily, at its next paint; the SVG exporter
        # does not paint first, so settle the range and transform now.
        item.getViewBox().updateAutoRange()
        item.getViewBox().updateMatrix()
        if suffix == ".png":
            exporter = pg.exporters.ImageExporter(item)
            exporter.parameters()["width"] = int(width)
            exporter.parameters()["background"] = QColor("white")
        elif suffix == ".svg":
            exporter = pg.exporters.SVGExporter(item)
            exporter.parameters()["background"] = QColor("white")
        else:
            raise ValueError(f"{path}: chart export needs a .png or .svg file name")
        path.parent.mkdir(parents=True, exist_ok=True)
        with _tolerant_svg_paths():
            exporter.export(str(path))
        self.exported.emit(str(path))
        return path

    # -------------------------------------------------------------- internals
    def _export_clicked(self) -> None:
        title = self._result.study.title if self._result is not None else "chart"
        safe = "".join(ch if ch.isalnum() or ch in "-_ " else "_" for ch in title).strip()
        suggested = f"{safe or 'chart'} - {dict(VIEWS)[self.view()]}.png"
        path, _ = QFileDialog.getSaveFileName(self, "Export chart", suggested,
                                              "PNG image (*.png);;SVG drawing (*.svg)")
        if not path:
            return
        if Path(path).suffix.lower() not in (".png", ".svg"):
            path += ".png"
        try:
            self.export(path)
        except (OSError, ValueError, RuntimeError) as exc:
            QMessageBox.warning(self, "Export chart", f"Could not export the chart:\n{exc}")

    def _tab_changed(self, index: int) -> None:
        self.stack.setCurrentIndex(index)
        self._sync_visibility()
        if self.view() in self._dirty:
            self._draw(self.view())
        if not self._updating:
            self.viewChanged.emit(self.view())

    def _alt_changed(self, _index: int) -> None:
        if self._updating:
            return
        if self.view() == "parts":
            self._draw("parts")
        else:
            self._dirty.add("parts")
        name = self.alternative()
        if name:
            self.alternativeChanged.emit(name)

    def _sync_controls(self) -> None:
        """Alternatives list, basis choice and the options tab follow the result."""
        self._updating = True
        try:
            r = self._result
            names = [a.name for a in r.alternatives] if r is not None else []
            current = self.alt_combo.currentText()
            if [self.alt_combo.itemText(i) for i in range(self.alt_combo.count())] != names:
                self.alt_combo.clear()
                self.alt_combo.addItems(names)
                if current in names:
                    self.alt_combo.setCurrentIndex(names.index(current))
                elif r is not None:
                    preferred = r.recommendation.challenger or r.recommendation.best_challenger
                    if preferred in names:
                        self.alt_combo.setCurrentIndex(names.index(preferred))
            after = self.has_after_tax()
            self.export_button.setEnabled(r is not None)
            self.basis_combo.setEnabled(after)
            if after and r is not None and r.recommendation.basis == AFTER:
                self.basis_combo.setCurrentIndex(1)
            elif not after:
                self.basis_combo.setCurrentIndex(0)
            has_options = r is not None and bool(r.study_period_options)
            options_index = [k for k, _ in VIEWS].index("options")
            self.tabs.setTabEnabled(options_index, has_options)
            self.tabs.setTabToolTip(options_index, "Keep-then-replace options over the study "
                                    "period" if has_options else "This study has no study period")
            if not has_options and self.tabs.currentIndex() == options_index:
                self.tabs.setCurrentIndex(0)
            self.stack.setCurrentIndex(self.tabs.currentIndex())
        finally:
            self._updating = False
        self._sync_visibility()

    def _sync_visibility(self) -> None:
        parts = self.view() == "parts"
        self.alt_label.setVisible(parts)
        self.alt_combo.setVisible(parts)
        self.basis_combo.setVisible(self.has_after_tax())

    def _redraw(self) -> None:
        """Redraw the current view now; the others when they are next shown."""
        if self._updating:
            return
        self._dirty = {key for key, _ in VIEWS}
        self._draw(self.view())

    def _draw(self, key: str) -> None:
        self.plots[key].hide_readout()
        {"aw": self._draw_aw, "parts": self._draw_parts, "marginal": self._draw_marginal,
         "options": self._draw_options}[key]()
        self._dirty.discard(key)

    # Data selection (basis) --------------------------------------------------
    def _shown(self, alt: AlternativeResult) -> AlternativeResult:
        """``alt`` on the chosen basis (its after-tax counterpart when after tax is shown)."""
        r = self._result
        if self.basis() == AFTER and r is not None and r.after_tax is not None:
            return r.after_tax.alternative(alt.name)
        return alt

    def _data(self, alt: AlternativeResult, field: str) -> tuple[np.ndarray | None, bool]:
        """(array, is_after_tax) of ``field`` for the chosen basis; None when the after-tax
        result has no such figure (capital recovery, operating part, marginal cost)."""
        shown = self._shown(alt)
        value = getattr(shown, field)
        if value is None:
            return None, False
        return np.asarray(value, dtype=float), shown is not alt

    def _esl(self, alt: AlternativeResult, after: bool) -> int:
        r = self._result
        if after and r is not None and r.after_tax is not None:
            return r.after_tax.alternative(alt.name).economic_life
        return alt.economic_life

    def _options(self, r: StudyResult) -> tuple[BasisResult, bool]:
        """(the basis whose study-period options are shown, after tax?)."""
        if self.basis() == AFTER and r.after_tax is not None:
            return r.after_tax, True
        return r.before_tax, False

    def _basis_words(self, after: bool) -> str:
        return "after tax" if after else "before tax"

    def _value_words(self) -> tuple[str, str]:
        """(short name for read-outs, axis title) for the sign toggle."""
        unit = self._unit()
        if self.signed():
            return "AW", f"Annual worth, AW ({unit}; costs negative)"
        return "EAC", f"Equivalent annual cost, EAC = -AW ({unit})"

    def _unit(self) -> str:
        return f"{self._currency}/year" if self._currency else "per year"

    def _sign(self) -> float:
        return 1.0 if self.signed() else -1.0

    def _money(self, v: float) -> str:
        return money(v, self._currency)

    def _empty(self, plot: _Plot, key: str, text: str) -> None:
        plot.targets = []
        plot.hide_labels()
        self._series[key] = {}
        plot.set_title("")
        plot.legend.clear()
        plot.legend.commit()
        plot.getPlotItem().hideAxis("left")
        plot.getPlotItem().hideAxis("bottom")
        plot.set_axis_label("left", "")
        plot.set_axis_label("bottom", "")
        plot.set_message(text)

    def _finish(self, key: str) -> None:
        plot = self.plots[key]
        plot.legend.commit()
        plot.show_axes()
        values = [y for _x, y in self._series[key].values()]
        item = plot.getPlotItem()
        x_range = None
        y_range = self._labelled_range(key)
        if key == "marginal" and "Defender marginal cost" in self._series[key]:
            n = len(self._series[key]["Defender marginal cost"][0])
            x_range = (0.4, n + 0.6)
        elif key == "aw" and self._series[key]:
            # Room right of the longest life for its star and "ESL n y" label.
            last = max(float(np.max(x)) for x, _y in self._series[key].values() if len(x))
            x_range = (0.4, last + 1.2)
        # Auto-range only the axes not fixed here: enabling both and then fixing one made
        # pyqtgraph compute and apply a throw-away range first (every curve re-plotted twice).
        if x_range is None:
            item.enableAutoRange(axis="x")
        if y_range is None:
            item.enableAutoRange(axis="y")
        if y_range is not None:
            item.setYRange(*y_range, padding=0.04)
        if x_range is not None:
            item.setXRange(*x_range, padding=0.0)
        plot.fit_left_axis(*values)

    def _labelled_range(self, key: str) -> tuple[float, float] | None:
        """The y range of the "aw" and "parts" views with room for the ESL labels: below
        the curves for EAC, above them for signed AW (None for the other views)."""
        if key not in ("aw", "parts") or not self._series.get(key):
            return None
        values = [y for _x, y in self._series[key].values()]
        finite = np.concatenate([np.asarray(v, dtype=float).ravel() for v in values])
        finite = finite[np.isfinite(finite)]
        if not finite.size:
            return None
        lo, hi = float(finite.min()), float(finite.max())
        span = (hi - lo) or max(abs(hi), 1.0)
        room = span * self.plots[key].label_room()
        return (lo, hi + room) if self.signed() else (lo - room, hi)

    def _view_resized(self, key: str) -> None:
        # The labels keep their size in pixels: a shorter plot needs more room in data units.
        y_range = self._labelled_range(key)
        if y_range is not None:
            self.plots[key].getPlotItem().setYRange(*y_range, padding=0.04)

    # Views ------------------------------------------------------------------
    def _draw_aw(self) -> None:
        plot = self.plots["aw"]
        r = self._result
        plot.legend.clear()
        if r is None:
            for line, esl in zip(self._aw_lines, self._aw_esl, strict=True):
                line.setData([], [])
                esl.setData([], [])
            self._empty(plot, "aw", "No study result")
            return
        plot.set_message("")
        short, axis_title = self._value_words()
        sign = self._sign()
        series: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        targets: list[_Target] = []
        any_after = False
        shown = 0
        esl_years: list[int] = []
        for i, alt in enumerate(r.alternatives):
            line, esl_item = self._aw_item(i)
            aw, after = self._data(alt, "annual_worth")
            if aw is None:
                aw, after = np.asarray(alt.annual_worth, dtype=float), False
            any_after = any_after or after
            years = np.arange(1, len(aw) + 1, dtype=float)
            values = sign * aw
            line.setData(years, values)
            role = "defender" if alt.role == "defender" else "challenger"
            plot.legend.addItem(line, f"{alt.name} ({role})")
            k = self._esl(alt, after)
            esl_y = values[k - 1]
            esl_item.setData([float(k)], [esl_y])
            color = PALETTE[i % len(PALETTE)]
            # Labels go away from the curves: below the EAC minimum, above the AW maximum;
            # alternatives sharing an ESL year stack their labels instead of overprinting.
            stack = esl_years.count(k)
            esl_years.append(k)
            plot.label(shown, f"ESL {k} y", float(k), esl_y, color,
                       (0.5, -0.35 - 1.1 * stack) if not self.signed()
                       else (0.5, 1.35 + 1.1 * stack))
            shown += 1
            series[alt.name] = (years, values)
            series[f"{alt.name} ESL"] = (np.array([float(k)]), np.array([esl_y]))
            for x, v in zip(years, values, strict=True):
                tag = ", ESL" if int(x) == k else ""
                targets.append(_Target(float(x), float(v),
                                       f"{alt.name}, {years_text(int(x))}: {short} "
                                       f"{self._money(v)}{tag}"))
        for line, esl in zip(self._aw_lines[len(r.alternatives):],
                             self._aw_esl[len(r.alternatives):], strict=True):
            line.setData([], [])
            esl.setData([], [])
        plot.hide_labels(shown)
        plot.targets = targets
        self._series["aw"] = series
        what, better = (("Annual worth", "higher") if self.signed()
                        else ("Equivalent annual cost", "lower"))
        plot.set_title(f"{what} by retention period, {self._basis_words(any_after)}",
                       f"{better} is better; a star marks each economic service life")
        plot.set_axis_label("left", axis_title)
        plot.set_axis_label("bottom", "Years kept (retention period k)")
        self._finish("aw")

    def _draw_parts(self) -> None:
        plot = self.plots["parts"]
        r = self._result
        name = self.alt_combo.currentText()
        if r is None or not name:
            for it in (self._cr_line, self._op_line, self._total_line):
                it.setData([], [])
            self._parts_esl.setData([], [])
            self._empty(plot, "parts", "No study result")
            return
        plot.set_message("")
        alt = r.alternative(name)
        cr, after_cr = self._data(alt, "capital_recovery")
        op, after_op = self._data(alt, "operating")
        aw, after_aw = self._data(alt, "annual_worth")
        note = ""
        if not (after_cr and after_op and after_aw) and self.basis() == AFTER:
            note = ("The after-tax result has no capital-recovery and operating split: before-tax figures shown.")
        if cr is None or op is None or aw is None or not (after_cr and after_op and after_aw):
            cr = np.asarray(alt.capital_recovery, dtype=float)
            op = np.asarray(alt.operating, dtype=float)
            aw = np.asarray(alt.annual_worth, dtype=float)
            after = False
        else:
            after = True
        # AW_k = -CR_k + OP_k (OP negative: a cost).  EAC view shows costs positive.
        sign = self._sign()
        cr_v, op_v, total = -sign * cr, sign * op, sign * aw
        years = np.arange(1, len(aw) + 1, dtype=float)
        self._cr_line.setData(years, cr_v)
        self._op_line.setData(years, op_v)
        self._total_line.setData(years, total)
        k = self._esl(alt, after)
        self._parts_esl.setData([float(k)], [total[k - 1]])
        plot.label(0, f"ESL {k} y", float(k), float(total[k - 1]), "#000000",
                   (0.5, -0.35) if not self.signed() else (0.5, 1.35))
        plot.hide_labels(1)
        plot.legend.clear()
        short, axis_title = self._value_words()
        if self.signed():
            names = ("Capital recovery, -CR", "Operating part", "Total, AW")
        else:
            names = ("Capital recovery, CR", "Operating cost (annualised)", "Total, EAC")
        for it, label in zip((self._cr_line, self._op_line, self._total_line), names,
                             strict=True):
            plot.legend.addItem(it, label)
        self._series["parts"] = {"Capital recovery": (years, cr_v), "Operating": (years, op_v),
                                 "Total": (years, total),
                                 "ESL": (np.array([float(k)]), np.array([total[k - 1]]))}
        targets = []
        for j, x in enumerate(years):
            y = int(x)
            targets.append(_Target(x, float(total[j]),
                                   f"{name}, {years_text(y)}: {short} {self._money(total[j])}"
                                   f"\n  capital recovery {self._money(cr_v[j])}"
                                   f"\n  operating {self._money(op_v[j])}"))
            targets.append(_Target(x, float(cr_v[j]),
                                   f"{name}, {years_text(y)}: capital recovery "
                                   f"{self._money(cr_v[j])}"))
            targets.append(_Target(x, float(op_v[j]),
                                   f"{name}, {years_text(y)}: operating {self._money(op_v[j])}"))
        plot.targets = targets
        plot.set_title(f"{name}: capital recovery and operating parts, "
                      f"{self._basis_words(after)}", note)
        plot.set_axis_label("left", axis_title)
        plot.set_axis_label("bottom", "Years kept (retention period k)")
        self._finish("parts")

    def _draw_marginal(self) -> None:
        plot = self.plots["marginal"]
        r = self._result
        plot.legend.clear()
        if r is None:
            self._mc_keep.setOpts(x=[], height=[])
            self._mc_over.setOpts(x=[], height=[])
            self._challenger_line.setData([], [])
            self._empty(plot, "marginal", "No study result")
            return
        plot.set_message("")
        d = r.defender
        mc, after_mc = self._data(d, "marginal_cost")
        note = ""
        if mc is None:
            mc = np.asarray(d.marginal_cost, dtype=float)
            note = ("The after-tax result has no marginal costs: before-tax figures shown.")
        after = after_mc
        basis = r.decision if after else r.before_tax
        best = basis.alternative(basis.recommendation.best_challenger)
        b_esl = best.economic_life
        level_cost = -best.annual_worth_at_economic_life  # the challenger's EAC at its ESL
        sign = self._sign()
        years = np.arange(1, len(mc) + 1, dtype=float)
        values = -sign * mc  # costs positive in the EAC view; -MC in the signed view
        level = -sign * level_cost
        above = ~keeps_next_year(mc, -level_cost)  # the one-more-year rule, year by year
        self._mc_keep.setOpts(x=years[~above], height=values[~above], width=0.6)
        self._mc_over.setOpts(x=years[above], height=values[above], width=0.6)
        x_line = np.array([0.4, len(mc) + 0.6])
        self._challenger_line.setData(x_line, np.array([level, level]))
        short = "AW" if self.signed() else "cost"
        plot.legend.addItem(self._challenger_line,
                            f"{best.name}: EAC at its ESL of {years_text(b_esl)}"
                            if not self.signed() else
                            f"{best.name}: AW at its ESL of {years_text(b_esl)}")
        if (~above).any():
            plot.legend.addItem(self._mc_keep, "Marginal cost below that EAC (keep)"
                                if not self.signed() else
                                "Marginal AW (-MC) better than that AW (keep)")
        if above.any():
            plot.legend.addItem(self._mc_over, "Marginal cost above that EAC"
                                if not self.signed() else
                                "Marginal AW (-MC) worse than that AW")
        plot.label(0, f"{best.name} {self._money(level)}", float(len(mc)) + 0.55, level,
                   PALETTE[2], (1.0, 1.1))
        plot.hide_labels(1)
        self._series["marginal"] = {"Defender marginal cost": (years, values),
                                    "Best challenger": (x_line, np.array([level, level]))}
        targets = []
        for j, x in enumerate(years):
            verdict = ("below: keeping that year costs less" if not above[j] else
                       "above: replacing before that year costs less")
            targets.append(_Target(float(x), float(values[j]),
                                   f"{d.name}, year {int(x)}: marginal {short} "
                                   f"{self._money(values[j])}\n{verdict} than {best.name} "
                                   f"({self._money(level)})", bar_width=0.6))
        plot.targets = targets
        plot.set_title(f"One more year? Marginal cost of {d.name}",
                       f"against the EAC of {best.name}, {self._basis_words(after)}"
                       + (f"; {note}" if note else ""))
        unit = self._unit()
        plot.set_axis_label("left", (f"Marginal cost of the year, MC ({unit})"
                                     if not self.signed() else
                                     f"Marginal AW of the year, -MC ({unit}; costs negative)"))
        plot.set_axis_label("bottom", f"Year of keeping {d.name} (j)")
        self._finish("marginal")

    def _draw_options(self) -> None:
        plot = self.plots["options"]
        r = self._result
        plot.legend.clear()
        options: list[StudyOption] = []
        after = False
        chosen = None
        if r is not None:
            shown, after = self._options(r)
            options = list(shown.study_period_options)
            if shown.best_option is not None:
                chosen = options[shown.best_option]
        if r is None or not options:
            for bar in self._option_bars:
                bar.setOpts(x=[], height=[])
            self._option_grey.setOpts(x=[], height=[])
            self._option_best.setOpts(x=[], height=[])
            self._empty(plot, "options", "No study result" if r is None else
                        "This study has no study period")
            return
        plot.set_message("")
        note = ""
        if self.basis() == AFTER and not after:
            note = ("The after-tax result has no study-period options: before-tax figures shown.")
        sign = self._sign()
        colour_of = {a.name: PALETTE[i % len(PALETTE)] for i, a in enumerate(r.alternatives)}
        groups: list[str | None] = [a.name for a in r.challengers
                                    if any(o.challenger == a.name for o in options)]
        if any(o.challenger is None for o in options):
            groups.append(None)
        n_side = max(1, sum(g is not None for g in groups))
        width = 0.8 / n_side
        feasible_values = [sign * o.annual_worth for o in options
                           if o.feasible and o.annual_worth is not None]
        scale = max((abs(v) for v in feasible_values), default=1.0) or 1.0
        stub = 0.06 * scale * (1.0 if not self.signed() else -1.0)
        period = r.study.study_period
        d_name = r.study.defender.name
        short, axis_title = self._value_words()
        series: dict[str, tuple[np.ndarray, np.ndarray]] = {}
        targets: list[_Target] = []
        grey_x: list[float] = []
        best: tuple[float, float, StudyOption] | None = None
        for gi, group in enumerate(groups):
            bar = self._option_item(gi)
            color = colour_of[group] if group is not None else colour_of[d_name]
            mine = [o for o in options if o.challenger == group]
            offset = (gi - (n_side - 1) / 2) * width if group is not None else 0.0
            xs, ys, fx, fy = [], [], [], []
            for o in mine:
                x = o.defender_years + offset
                words = option_text(d_name, o, period)
                if o.feasible and o.annual_worth is not None:
                    v = sign * o.annual_worth
                    fx.append(x)
                    fy.append(v)
                    ys.append(v)
                    if o is chosen:
                        best = (x, v, o)
                    text = f"{words}: {short} {self._money(v)}"
                    y_target = v
                else:
                    grey_x.append(x)
                    ys.append(np.nan)
                    text = f"{words}: infeasible\n{o.reason}"
                    y_target = stub
                xs.append(float(o.defender_years))
                targets.append(_Target(x, float(y_target), text, bar_width=width))
            bar.setOpts(x=fx, height=fy, width=width * 0.92, brush=pg.mkBrush(color),
                        pen=pg.mkPen(color))
            if fx:
                plot.legend.addItem(bar, f"Then {group}" if group is not None
                                    else f"Keep {d_name} to the end")
            if mine:
                series[group if group is not None else "Keep"] = (
                    np.asarray(xs, dtype=float), np.asarray(ys, dtype=float))
        for bar in self._option_bars[len(groups):]:
            bar.setOpts(x=[], height=[])
        self._option_grey.setOpts(x=grey_x, height=[stub] * len(grey_x), width=width * 0.92)
        if grey_x:
            plot.legend.addItem(self._option_grey, "Infeasible (hover for the reason)")
        if best is not None:
            self._option_best.setOpts(x=[best[0]], height=[best[1]], width=width * 0.92)
            plot.legend.addItem(self._option_best, "Best option")
            plot.label(0, f"best {self._money(best[1])}", best[0], best[1], "#000000",
                       (0.5, 1.0) if best[1] >= 0 else (0.5, 0.0))
            plot.hide_labels(1)
        else:
            self._option_best.setOpts(x=[], height=[])
            plot.hide_labels()
        plot.targets = targets
        self._series["options"] = series
        plot.set_title(f"Study-period options over {period} years, {self._basis_words(after)}",
                       note)
        plot.set_axis_label("left", axis_title)
        plot.set_axis_label("bottom", f"Years keeping {r.study.defender.name} before replacing (j)")
        self._finish("options")

    # Hover -------------------------------------------------------------------
    def _mouse_moved(self, key: str, pos: QPointF) -> None:
        plot = self.plots[key]
        vb = plot.getPlotItem().getViewBox()
        if not vb.sceneBoundingRect().contains(pos):
            plot.hide_readout()
            return
        point = vb.mapSceneToView(pos)
        target = plot.nearest(point.x(), point.y())
        if target is None:
            plot.hide_readout()
            QToolTip.hideText()
            return
        plot.show_readout(target)
        if target.bar_width > 0:
            QToolTip.showText(QCursor.pos(), target.text, plot)


@contextmanager
def _tolerant_svg_paths() -> Iterator[None]:
    """Let pyqtgraph's SVG exporter read the paths Qt 6 writes.

    Qt closes paths with a bare "Z" token, which pyqtgraph's coordinate fix-up
    (``correctCoordinates``, expecting only "x,y" pairs) cannot split.  The
    paths concerned are closed rectangles whose last point already equals the
    first, so dropping the token changes nothing drawn.  The patch lasts only
    for the one export.
    """
    module = sys.modules["pyqtgraph.exporters.SVGExporter"]
    original = module.correctCoordinates

    def correct(node, defs, item, options):
        for element in list(node.getElementsByTagName("rect")):
            _rect_to_path(element)
        for element in node.getElementsByTagName("path"):
            tokens = element.getAttribute("d").split()
            kept = [t for t in tokens if "," in t]
            if len(kept) != len(tokens):
                element.setAttribute("d", " ".join(kept))
        return original(node, defs, item, options)

    module.correctCoordinates = correct
    try:
        yield
    finally:
        module.correctCoordinates = original


def _rect_to_path(rect: Any) -> None:
    """Replace an SVG <rect> by the equivalent <path>, which pyqtgraph's fix-up transforms
    (it leaves <rect> alone, so a rectangle next to a path lost its transform)."""
    parent = rect.parentNode
    ancestor = parent
    while ancestor is not None and getattr(ancestor, "tagName", None) is not None:
        if ancestor.tagName in ("pattern", "mask", "defs", "clipPath"):
            return
        ancestor = ancestor.parentNode
    try:
        x, y = float(rect.getAttribute("x") or 0), float(rect.getAttribute("y") or 0)
        w, h = float(rect.getAttribute("width")), float(rect.getAttribute("height"))
    except ValueError:
        return
    path = rect.ownerDocument.createElement("path")
    for name, value in rect.attributes.items():
        if name not in ("x", "y", "width", "height"):
            path.setAttribute(name, value)
    path.setAttribute("d", f"M{x},{y} L{x + w},{y} L{x + w},{y + h} L{x},{y + h} L{x},{y}")
    parent.replaceChild(path, rect)


def _note(text: str) -> str:
    """A second, smaller title line (HTML) for a caveat."""
    return f"<br><span style='font-size:9pt; color:#8a4b00'>{text}</span>"


def years_text(n: int) -> str:
    """'1 year', '6 years'."""
    return f"{n} year" if n == 1 else f"{n} years"


def option_text(defender: str, option: StudyOption, period: int | None) -> str:
    """A study-period option in words: 'Keep Piston 40 2 years, then Screw 90 6 years'."""
    if option.challenger is None:
        return f"Keep {defender} all {years_text(option.defender_years)}"
    if option.defender_years == 0:
        return f"Replace now with {option.challenger} for {years_text(option.challenger_years)}"
    return (f"Keep {defender} {years_text(option.defender_years)}, then {option.challenger} "
            f"{years_text(option.challenger_years)}")
