"""The "Risk" view: Monte Carlo, tornado, breakevens and two-way map of one study.

``RiskView(parent=None)``; ``set_result(StudyResult)`` shows the result's risk
analysis (when the engine ran one) and arms the Run button when the study has
an ``uncertainty`` block.  Run starts ``core.risk.run_risk`` on a
``QThreadPool`` worker with a progress bar and a Cancel button; the trial count
and seed default to the study's and can be changed before a run.

Panels (pyqtgraph, software rendering):

- tornado: each uncertain input swept from its 10th to its 90th percentile, the
  AW difference (best challenger minus defender; positive favours replacing) at
  the low and high ends as horizontal bars around the base case;
- histogram (or, ticked, the cumulative distribution) of the AW difference
  across trials, zero marked;
- the breakeven table (the value of each input at which the recommendation
  flips, the rest at their estimates);
- the two-way map: where replacing wins over the best challenger's first cost
  (x) against MARR (y), the estimates marked.

The view only draws what ``RiskResult`` holds; it computes no economics.
"""

from __future__ import annotations

import html
import threading
from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import (
    QCoreApplication,
    QObject,
    QRectF,
    QRunnable,
    QSize,
    Qt,
    QThreadPool,
    Signal,
)
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QCheckBox,
    QFrame,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from core.results import StudyResult
from core.text import money
from desktop_app import palette
from desktop_app.widget_parts import vertical_split

# Keep and replace as everywhere in the window (desktop_app/palette.py); the tornado's
# percentile bars in greys, so they never read as keep or replace.
LOW_COLOUR = palette.rgb(palette.LOW)
HIGH_COLOUR = palette.rgb(palette.HIGH)
REPLACE_COLOUR = palette.rgb(palette.REPLACE_TINT)
KEEP_COLOUR = palette.rgb(palette.KEEP_TINT)
#: Each chart's minimum size: readable tick labels and bars on a 1366x768 screen.
CHART_MINIMUM = QSize(380, 260)


class RiskSignals(QObject):
    progress = Signal(int)        # percent 0..100
    done = Signal(object)         # RiskResult
    failed = Signal(str)
    cancelled = Signal()


class RiskJob(QRunnable):
    """``core.risk.run_risk`` off the GUI thread; ``cancel()`` stops it between chunks."""

    def __init__(self, study: Any, trials: int, seed: int, best_challenger: str | None) -> None:
        super().__init__()
        self.study = study
        self.trials = trials
        self.seed = seed
        self.best_challenger = best_challenger
        self.signals = RiskSignals()
        self._cancel = threading.Event()
        self.finished = threading.Event()
        self.setAutoDelete(False)

    def cancel(self) -> None:
        self._cancel.set()

    def run(self) -> None:
        from core import risk

        try:
            result = risk.run_risk(self.study, self.trials, self.seed,
                                   progress=lambda f: self.signals.progress.emit(int(100 * f)),
                                   cancelled=self._cancel.is_set,
                                   best_challenger=self.best_challenger)
        except risk.RiskCancelled:
            self.signals.cancelled.emit()
        except Exception as exc:  # shown in the view, never a crash
            self.signals.failed.emit(str(exc) or type(exc).__name__)
        else:
            self.signals.done.emit(result)
        finally:
            self.finished.set()


def _plot(title: str, left: str, bottom: str) -> pg.PlotWidget:
    plot = pg.PlotWidget(background="w")
    plot.setTitle(title, color="k", size="10pt")
    plot.setLabel("left", left)
    plot.setLabel("bottom", bottom)
    plot.showGrid(x=True, y=True, alpha=0.2)
    plot.setMenuEnabled(False)
    return plot


def _value(x: float | None, address: str, currency: str = "") -> str:
    if x is None:
        return "no flip"
    rate = address == "marr" or address.endswith(("decline_rate", "growth"))
    return f"{x:.2%}" if rate else money(x, currency)   # the inputs not rates are money


class RiskView(QWidget):
    """The Risk tab (see the module docstring)."""

    risk_ready = Signal(object)   # RiskResult, after a run in the view

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._result: StudyResult | None = None
        self._currency = ""
        self._risk: Any = None
        self._job: RiskJob | None = None
        self._last_job: RiskJob | None = None
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(1)
        app = QCoreApplication.instance()
        if app is not None:   # never leave a worker running into interpreter shutdown
            app.aboutToQuit.connect(self.shutdown)

        self.trials = QSpinBox()
        self.trials.setRange(100, 5_000_000)
        self.trials.setSingleStep(10_000)
        self.trials.setGroupSeparatorShown(True)
        self.trials.setValue(20_000)
        self.trials.setToolTip("Monte Carlo trials (each redraws every uncertain input)")
        self.seed = QSpinBox()
        self.seed.setRange(0, 2_147_483_647)
        self.seed.setToolTip("Random seed: the same seed gives the same trials")
        self.run_button = QPushButton("Run")
        self.run_button.clicked.connect(self.run)
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.clicked.connect(self.cancel)
        self.cancel_button.setEnabled(False)
        self.progress = QProgressBar()
        self.progress.setRange(0, 100)
        self.status = QLabel("No study.")
        self.status.setWordWrap(True)
        self.summary = QLabel("")
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        bar = QHBoxLayout()
        bar.addWidget(QLabel("Trials"))
        bar.addWidget(self.trials)
        bar.addWidget(QLabel("Seed"))
        bar.addWidget(self.seed)
        bar.addWidget(self.run_button)
        bar.addWidget(self.cancel_button)
        bar.addWidget(self.progress, 1)

        self.tornado_plot = _plot("Tornado: AW difference, 10th to 90th percentile", "",
                                  "AW difference (best challenger - defender)")
        self.histogram_plot = _plot("AW difference across trials", "trials",
                                    "AW difference (best challenger - defender)")
        self.cumulative = QCheckBox("Cumulative")
        self.cumulative.toggled.connect(self._draw_histogram)
        self.map_plot = _plot("", "MARR", "first cost")
        self.map_plot.setTitle("Where replacing wins: REPLACE (orange) or KEEP (blue); "
                               "× marks the estimates", color="k", size="9pt")
        self.map_words: list[pg.TextItem] = []
        for name in ("left", "bottom"):
            self.map_plot.getAxis(name).enableAutoSIPrefix(False)
        self.map_image = pg.ImageItem()
        self.map_plot.addItem(self.map_image)
        self.map_marker = pg.ScatterPlotItem(size=10, symbol="x", pen=pg.mkPen("k", width=2),
                                             brush=pg.mkBrush("k"))
        self.map_plot.addItem(self.map_marker)
        self.breakeven_table = QTableWidget(0, 4)
        self.breakeven_table.setHorizontalHeaderLabels(["input", "estimate", "breakeven",
                                                        "searched"])
        self.breakeven_table.horizontalHeader().setSectionResizeMode(
            QHeaderView.ResizeMode.ResizeToContents)
        self.breakeven_table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.breakeven_table.verticalHeader().setVisible(False)

        hist_box = QWidget()
        hist_layout = QVBoxLayout(hist_box)
        hist_layout.setContentsMargins(0, 0, 0, 0)
        hist_layout.addWidget(self.histogram_plot, 1)
        hist_layout.addWidget(self.cumulative)
        be_box = QWidget()
        be_layout = QVBoxLayout(be_box)
        be_note = QLabel("Breakeven: the value at which the recommendation flips (the rest at "
                         "their estimates).")
        be_note.setWordWrap(True)
        be_layout.addWidget(be_note)
        be_layout.addWidget(self.breakeven_table)

        # One chart per sub-tab, each at a readable minimum size: four side by side were
        # cut off on a laptop screen.
        self.charts = QTabWidget()
        self.charts.setObjectName("risk_charts")
        for widget in (self.tornado_plot, self.histogram_plot, self.map_plot):
            widget.setMinimumSize(CHART_MINIMUM)
        self.charts.addTab(self.tornado_plot, "Tornado")
        self.charts.addTab(hist_box, "Distribution")
        self.charts.addTab(be_box, "Breakevens")
        self.charts.addTab(self.map_plot, "Two-way map")

        head = QWidget()
        head_layout = QVBoxLayout(head)
        head_layout.setContentsMargins(0, 0, 0, 0)
        head_layout.addLayout(bar)
        head_layout.addWidget(self.status)
        head_layout.addWidget(self.summary)
        head_layout.addStretch(1)
        self.head_scroll = QScrollArea()
        self.head_scroll.setWidgetResizable(True)
        self.head_scroll.setFrameShape(QFrame.Shape.NoFrame)
        self.head_scroll.setWidget(head)
        split = vertical_split(self.head_scroll, self.charts, stretch=(0, 1), sizes=[120, 560],
                              collapsible=False)
        self.split = split
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(split, 1)
        self._arm()

    # ------------------------------------------------------------------ state
    def set_currency(self, symbol: str) -> None:
        """The currency symbol of the money axis titles ('' for none)."""
        self._currency = symbol or ""
        unit = f" ({self._currency}/year)" if self._currency else ""  # as the Results charts
        label = f"AW difference (best challenger - defender){unit}"
        self.tornado_plot.setLabel("bottom", label)
        self.histogram_plot.setLabel("bottom", label)

    def currency(self) -> str:
        return self._currency

    def set_result(self, result: StudyResult | None) -> None:
        """Show ``result`` (its risk analysis when it has one); a running job is cancelled."""
        self.cancel()
        self._result = result
        study = None if result is None else result.study
        unc = None if study is None else study.uncertainty
        if unc is not None:
            self.trials.setValue(min(max(unc.trials, self.trials.minimum()),
                                     self.trials.maximum()))
            if unc.seed is not None:
                self.seed.setValue(min(unc.seed, self.seed.maximum()))
        self.show_risk(None if result is None else result.risk)
        self._arm()

    def risk(self) -> Any:
        """The RiskResult on show (None when there is none)."""
        return self._risk

    def is_running(self) -> bool:
        return self._job is not None

    def _arm(self) -> None:
        study = None if self._result is None else self._result.study
        can_run = study is not None and study.uncertainty is not None
        self.run_button.setEnabled(can_run and self._job is None)
        self.cancel_button.setEnabled(self._job is not None)
        if self._job is not None:
            return
        if study is None:
            self.status.setText("No study.")
        elif study.uncertainty is None:
            self.status.setText("This study has no uncertainty block: give distributions for "
                                "its uncertain inputs to run a risk analysis.")
        elif self._risk is None:
            self.status.setText("Press Run to simulate.")

    # ------------------------------------------------------------------ running
    def run(self) -> None:
        """Start the simulation on the worker pool (no-op while one runs)."""
        if self._job is not None or self._result is None or self._result.study.uncertainty is None:
            return
        job = RiskJob(self._result.study, int(self.trials.value()), int(self.seed.value()),
                      self._result.recommendation.best_challenger)
        job.signals.progress.connect(self.progress.setValue)
        job.signals.done.connect(self._done)
        job.signals.failed.connect(self._failed)
        job.signals.cancelled.connect(self._cancelled)
        self._job = job
        self.progress.setValue(0)
        self.status.setText(f"Simulating {self.trials.value():,} trials...")
        self._arm()
        self.pool.start(job)

    def cancel(self) -> None:
        """Ask a running simulation to stop (it stops before its next chunk of trials)."""
        if self._job is not None:
            self._job.cancel()
            self.status.setText("Cancelling...")

    def shutdown(self, timeout_ms: int = 10_000) -> None:
        """Cancel and wait for the worker (call before the window closes)."""
        self.cancel()
        self.pool.waitForDone(timeout_ms)

    def _finish(self) -> None:
        # keep the finished job alive until the next run: it must not be destroyed inside
        # the slot its own signal is calling
        self._last_job, self._job = self._job, None
        self._arm()

    def _done(self, risk: Any) -> None:
        self._finish()
        self.progress.setValue(100)
        self.show_risk(risk)
        self.risk_ready.emit(risk)

    def _failed(self, message: str) -> None:
        self._finish()
        self.status.setText(f"The risk analysis failed: {message}")

    def _cancelled(self) -> None:
        self._finish()
        self.progress.setValue(0)
        self.status.setText("Cancelled; the previous results (if any) stay on show.")

    # ------------------------------------------------------------------ drawing
    def show_risk(self, risk: Any) -> None:
        """Draw a RiskResult (None clears the panels)."""
        self._risk = risk
        for plot in (self.tornado_plot, self.histogram_plot):
            plot.clear()
        self.map_image.clear()
        self.map_marker.clear()
        self.breakeven_table.setRowCount(0)
        if risk is None:
            self.summary.setText("")
            return
        sim = risk.simulation
        s = risk.difference_summary()
        basis = str(risk.basis).replace("-", " ")     # "after tax", as the Results charts say
        self.tornado_plot.setTitle(f"Tornado: AW difference, 10th to 90th percentile, {basis}",
                                   color="k", size="10pt")
        self.histogram_plot.setTitle(f"AW difference across trials, {basis}", color="k",
                                     size="10pt")
        self.map_plot.setTitle(f"Where replacing wins, {basis}: REPLACE (orange) or KEEP "
                               "(blue); × marks the estimates", color="k", size="9pt")
        cur = self._currency
        se = sim.probability_standard_error
        self.summary.setText(
            f"<b>Replace wins in {risk.probability_replace:.1%} of {sim.trials:,} "
            f"trials</b> (standard error {se:.2%}; {risk.basis}; seed {sim.seed}). "
            f"AW difference (best challenger minus defender, positive favours replacing): "
            f"p10 {money(s['p10'], cur)}, median {money(s['p50'], cur)}, "
            f"p90 {money(s['p90'], cur)}; mean {money(s['mean'], cur)} "
            f"(standard error {money(s['mean_standard_error'], cur)})."
            + "".join(f"<br><span style='color:#8a4b00'>Note: {html.escape(n)}</span>"
                      for n in risk.notes))
        self.status.setText(f"Base case: {risk.base_action} "
                            f"(AW difference {money(risk.base_difference, cur)}).")
        self._draw_tornado(risk)
        self._draw_histogram()
        self._draw_breakevens(risk)
        self._draw_map(risk)

    def _label(self, address: str) -> str:
        """An input in words ("HP-4 hydraulic press: operating cost gradient")."""
        from core.risk.labels import input_label

        return input_label(address, None if self._result is None else self._result.study)

    def _draw_tornado(self, risk: Any) -> None:
        plot = self.tornado_plot
        if plot.plotItem.legend is None:
            plot.addLegend(offset=(-10, -10), labelTextColor="k")
        plot.plotItem.legend.clear()
        bars = list(risk.tornado)[::-1]   # widest on top
        base = float(risk.base_difference)
        ys = np.arange(len(bars), dtype=float)
        if not bars:
            return
        if not np.isfinite(base):
            return  # no AW difference with this study period (see the notes)
        lows = np.nan_to_num(np.array([b.difference_at_low for b in bars]), nan=base)
        highs = np.nan_to_num(np.array([b.difference_at_high for b in bars]), nan=base)
        plot.addItem(pg.BarGraphItem(x0=np.minimum(base, lows), y=ys, height=0.5,
                                     width=np.abs(lows - base), brush=LOW_COLOUR,
                                     name="input at its 10th percentile"))
        plot.addItem(pg.BarGraphItem(x0=np.minimum(base, highs), y=ys, height=0.5,
                                     width=np.abs(highs - base), brush=HIGH_COLOUR,
                                     name="input at its 90th percentile"))
        plot.addItem(pg.InfiniteLine(pos=base, angle=90, pen=pg.mkPen("k", width=1)))
        plot.addItem(pg.InfiniteLine(pos=0.0, angle=90,
                                     pen=pg.mkPen((60, 60, 60), width=1,
                                                  style=Qt.PenStyle.DashLine)))
        # Each input named in words just above its bar (a tick label that long would
        # take half the chart's width): the x range is set so the names start at its edge.
        values = np.concatenate([lows, highs, [base, 0.0]])
        lo, hi = float(values.min()), float(values.max())
        pad = 0.06 * (hi - lo or 1.0)
        plot.setXRange(lo - pad, hi + pad, padding=0)
        plot.setYRange(-1.4, len(bars) - 0.1, padding=0)  # room for the legend below
        for y, b, low, high in zip(ys, bars, lows, highs, strict=True):
            words = self._label(b.address)
            if max(abs(low - base), abs(high - base)) < 0.005:
                words += " (no effect here)"
            text = pg.TextItem(words, color="k", anchor=(0, 1))
            text.setPos(lo - pad, float(y) + 0.25)
            plot.addItem(text)
        axis = plot.getAxis("left")
        axis.setTicks([[(float(y), "") for y in ys]])
        axis.setWidth(8)

    def _draw_histogram(self, *_: Any) -> None:
        plot = self.histogram_plot
        plot.clear()
        risk = self._risk
        if risk is None:
            return
        if self.cumulative.isChecked():
            d = np.sort(risk.simulation.difference[np.isfinite(risk.simulation.difference)])
            if d.size:
                step = max(1, d.size // 2000)
                share = np.arange(1, d.size + 1) / d.size
                plot.plot(d[::step], share[::step], pen=pg.mkPen("k", width=2))
            plot.setLabel("left", "share of trials at or below")
        else:
            counts, edges = risk.histogram()
            if counts.size:
                # bins right of zero favour replacing, left of zero keeping: coloured and
                # named so (the legend), with a hatch on the keep side as a second cue
                if plot.plotItem.legend is None:
                    plot.addLegend(offset=(10, 10), labelTextColor="k")
                plot.plotItem.legend.clear()
                centres = 0.5 * (edges[:-1] + edges[1:])
                for side, colour, words, style in (
                        (centres > 0, palette.REPLACE, "favours replacing (> 0)",
                         Qt.BrushStyle.SolidPattern),
                        (centres <= 0, palette.KEEP, "favours keeping (≤ 0)",
                         Qt.BrushStyle.BDiagPattern)):
                    if side.any():
                        plot.addItem(pg.BarGraphItem(
                            x=centres[side], height=counts[side], width=np.diff(edges)[side],
                            brush=QBrush(QColor(colour), style), pen=pg.mkPen(colour),
                            name=words))
            plot.setLabel("left", "trials")
        plot.addItem(pg.InfiniteLine(pos=0.0, angle=90,
                                     pen=pg.mkPen((60, 60, 60), width=1,
                                                  style=Qt.PenStyle.DashLine)))

    def _draw_breakevens(self, risk: Any) -> None:
        table = self.breakeven_table
        table.setRowCount(len(risk.inputs))
        for row, item in enumerate(risk.inputs):
            lo, hi = risk.breakeven_ranges[item.address]
            cur = self._currency
            cells = [self._label(item.address), _value(item.estimate, item.address, cur),
                     _value(risk.breakeven[item.address], item.address, cur),
                     f"{_value(lo, item.address, cur)} to {_value(hi, item.address, cur)}"]
            for col, text in enumerate(cells):
                cell = QTableWidgetItem(text)
                if col:
                    cell.setTextAlignment(Qt.AlignmentFlag.AlignRight
                                          | Qt.AlignmentFlag.AlignVCenter)
                table.setItem(row, col, cell)

    def _draw_map(self, risk: Any) -> None:
        m = risk.two_way
        if m is None:
            return
        xs, ys = np.asarray(m.x_values, float), np.asarray(m.y_values, float)
        colours = np.array([KEEP_COLOUR, REPLACE_COLOUR], dtype=np.ubyte)
        rgb = colours[np.asarray(m.replace, dtype=int)]          # (len(y), len(x), 3)
        self.map_image.setImage(np.ascontiguousarray(rgb.transpose(1, 0, 2)), levels=(0, 255))
        dx = (xs[-1] - xs[0]) / max(len(xs) - 1, 1)
        dy = (ys[-1] - ys[0]) / max(len(ys) - 1, 1)
        self.map_image.setRect(QRectF(xs[0] - dx / 2, ys[0] - dy / 2,
                                      (xs[-1] - xs[0]) + dx or 1.0, (ys[-1] - ys[0]) + dy or 1e-3))
        for item in self.map_words:
            self.map_plot.removeItem(item)
        self.map_words = []
        grid_x, grid_y = np.meshgrid(xs, ys)
        won = np.asarray(m.replace, dtype=bool)
        for mask, words, colour in ((won, "REPLACE", palette.REPLACE),
                                    (~won, "KEEP", palette.KEEP)):
            if mask.any():  # the word at the middle of its region
                text = pg.TextItem(words, color=colour, anchor=(0.5, 0.5),
                                   fill=pg.mkBrush(255, 255, 255, 200))
                font = text.textItem.font()
                font.setBold(True)
                text.setFont(font)
                text.setPos(float(np.median(grid_x[mask])), float(np.median(grid_y[mask])))
                self.map_plot.addItem(text)
                self.map_words.append(text)
        self.map_plot.setLabel("bottom", self._label(m.x_input))
        self.map_plot.setLabel("left", self._label(m.y_input))
        x0, y0 = m.x_estimate, m.y_estimate
        self.map_marker.setData([x0], [y0])
        self.map_plot.autoRange()

    def map_image_array(self) -> np.ndarray | None:
        """The RGB image of the two-way map (for tests)."""
        return self.map_image.image
