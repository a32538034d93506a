"""The "Capital plan" window: capital by year stacked by site, the budget line, the plan's
assets, budget entry that solves again in the background, and pins by hand.

``PlanDialog(parent=None)``; ``set_document(doc)`` takes the register's assets
(each entry's study, site and study year).  Solve runs ``core.plan`` (plan
inputs, ``make_plan``, and with pins ``override_cost``) on the dialog's own
one-thread ``QThreadPool``; the window stays responsive and shows progress.
No economics here: everything shown comes from ``core.plan.CapitalPlan``.
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QCoreApplication, QObject, QRunnable, Qt, QThreadPool, Signal
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDialog,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QProgressBar,
    QPushButton,
    QSpinBox,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.text import money
from desktop_app import palette
from desktop_app.charts import MoneyAxis, guard_signal_refcount_bug

guard_signal_refcount_bug()

COLUMNS = ("Asset", "Site", "Planned", "Best year", "Replace with", "Capital", "Value",
           "Deferral cost", "Must", "Pinned")


def _money(x: float | None, currency: str = "") -> str:
    """An amount as the rest of the window shows it (``core.text.money``: "-" for none).

    >>> _money(334100.4, "\u00a3"), _money(-14343.0), _money(None, "\u00a3")
    ('\u00a3334,100', '-14,343', '-')
    """
    return money(x, currency)


class PlanSignals(QObject):
    progress = Signal(int, str)        # percent, what
    done = Signal(object, object)      # CapitalPlan, override cost (float | None)
    failed = Signal(str)


class PlanJob(QRunnable):
    """Study results (the missing ones), plan inputs and the plan, off the GUI thread."""

    def __init__(self, items: list[tuple[str, str, Any, Any]], first_year: int, horizon: int,
                 budgets: list[float | None] | None, net: bool, limit: int | None,
                 must: set[str], pins: dict[str, int]) -> None:
        super().__init__()
        self.items, self.first_year, self.horizon = items, first_year, horizon
        self.budgets, self.net, self.limit = budgets, net, limit
        self.must, self.pins = set(must), dict(pins)
        self.inputs: list[Any] = []
        self.signals = PlanSignals()
        self._cancel = threading.Event()
        self.setAutoDelete(False)

    def cancel(self) -> None:
        self._cancel.set()

    def run(self) -> None:
        from core.errors import StudyError
        from core.plan import make_plan, plan_input
        from core.plan.build import override_cost
        from core.study import run_study

        try:
            inputs = []
            total = max(len(self.items), 1)
            for n, (key, site, study, result) in enumerate(self.items):
                if self._cancel.is_set():
                    return
                res = result if result is not None else run_study(study)
                inputs.append(plan_input(res, study, tag=key, site=site, must=key in self.must,
                                         must_reason="marked must-replace in the plan window"
                                         if key in self.must else ""))
                if n % 25 == 0:
                    self.signals.progress.emit(int(40 * n / total), "Reading the studies")
            self.inputs = inputs
            self.signals.progress.emit(45, "Solving the plan")
            index = {key: n for n, (key, *_rest) in enumerate(self.items)}
            pins = {index[k]: y for k, y in self.pins.items() if k in index}
            plan = make_plan(inputs, horizon=self.horizon, budgets=self.budgets, net=self.net,
                             per_site_limit=self.limit, pins=pins, first_year=self.first_year)
            cost = None
            if pins and not self._cancel.is_set():
                self.signals.progress.emit(75, "Pricing the pins")
                cost = override_cost(inputs, plan)
            self.signals.progress.emit(100, "Done")
            if not self._cancel.is_set():
                self.signals.done.emit(plan, cost)
        except StudyError as exc:
            self.signals.failed.emit(str(exc))
        except Exception as exc:  # noqa: BLE001 - reported in the dialog, never a crash
            self.signals.failed.emit(f"{type(exc).__name__}: {exc}")


class MemoJob(QRunnable):
    """Write the plan memo (core.plan.memo.issue_plan_memo) off the GUI thread."""

    def __init__(self, plan: Any, source: Any, path: str, pins: dict[int, int]) -> None:
        super().__init__()
        self.plan, self.source, self.path, self.pins = plan, source, path, pins
        self.signals = PlanSignals()
        self.setAutoDelete(False)

    def run(self) -> None:
        from core.plan.memo import issue_plan_memo

        try:
            issued = issue_plan_memo(self.plan, self.source, self.path, pins=self.pins,
                                     progress=lambda p, t: self.signals.progress.emit(p, t))
            self.signals.done.emit(issued, None)
        except Exception as exc:  # noqa: BLE001 - reported in the dialog
            self.signals.failed.emit(f"{type(exc).__name__}: {exc}")


class PlanDialog(QDialog):
    """The capital-plan window (non-modal)."""

    plan_ready = Signal(object)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Capital plan — Tenure")
        self.resize(1200, 760)
        self.items: list[tuple[str, str, Any, Any]] = []
        self.first_year = 0
        self.plan: Any = None
        self.currency = ""
        self.override: float | None = None
        self.must: set[str] = set()
        self.pins: dict[str, int] = {}
        self.job: PlanJob | None = None
        self.inputs: list[Any] = []
        self.memo_job: MemoJob | None = None
        self.memo_written: Any = None
        self._old_jobs: list[PlanJob] = []
        self.pool = QThreadPool(self)
        self.pool.setMaxThreadCount(1)
        app = QCoreApplication.instance()
        if app is not None:
            app.aboutToQuit.connect(self.shutdown)

        self.budget_edit = QLineEdit()
        self.budget_edit.setPlaceholderText("e.g. 200000, or one amount per year: 200000,150000,…")
        self.budget_edit.setToolTip("Capital budget per plan year: one amount for every year, "
                                    "or a comma-separated list (its length sets the horizon). "
                                    "Empty: no budget.")
        self.budget_edit.returnPressed.connect(self.solve)
        self.horizon = QSpinBox()
        self.horizon.setRange(1, 50)
        self.horizon.setValue(10)
        self.horizon.setSuffix(" years")
        self.net = QCheckBox("Budget on net capital")
        self.net.setToolTip("Count the old machine's sale proceeds against the budget")
        self.limit = QSpinBox()
        self.limit.setRange(0, 99)
        self.limit.setSpecialValueText("no limit")
        self.limit.setToolTip("Most replacements per site in one year (crews, outages)")
        self.solve_button = QPushButton("Solve")
        self.solve_button.setDefault(True)
        self.solve_button.clicked.connect(self.solve)
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.cancel_button.clicked.connect(self.cancel)
        self.memo_button = QPushButton("Write plan memo…")
        self.memo_button.setToolTip("The plan as a PDF memo with sign-off boxes (sign it with "
                                    "tenure sign; check it with tenure verify)")
        self.memo_button.setEnabled(False)
        self.memo_button.clicked.connect(self.write_memo)
        self.progress = QProgressBar()
        self.progress.setRange(0, 100)
        self.progress.setMaximumWidth(180)
        self.progress.setTextVisible(True)

        top = QHBoxLayout()
        top.addWidget(QLabel("Budget per year:"))
        top.addWidget(self.budget_edit, 3)
        top.addWidget(QLabel("Horizon:"))
        top.addWidget(self.horizon)
        top.addWidget(self.net)
        top.addWidget(QLabel("Per site and year:"))
        top.addWidget(self.limit)
        top.addWidget(self.solve_button)
        top.addWidget(self.cancel_button)
        top.addWidget(self.memo_button)
        top.addWidget(self.progress)

        self.summary = QLabel("Enter a budget and press Solve.")
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.RichText)

        self.plot = pg.PlotWidget(axisItems={"left": MoneyAxis("left")})
        self.plot.setBackground("w")
        self.plot.showGrid(x=False, y=True, alpha=0.25)
        self.plot.setLabel("left", "capital")   # set_currency adds the unit
        self.plot.setLabel("bottom", "plan year")
        self.plot.setMouseEnabled(x=False, y=False)
        self.plot.hideButtons()
        self.legend = self.plot.addLegend(offset=(-10, 5), colCount=4)

        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QTableWidget.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.setSortingEnabled(True)
        self.table.verticalHeader().setVisible(False)
        head = self.table.horizontalHeader()
        head.setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        head.setStretchLastSection(False)
        head.setSectionResizeMode(4, QHeaderView.ResizeMode.Stretch)   # "Replace with" takes the room
        self.table.itemSelectionChanged.connect(self._selection_changed)

        self.pin_year = QComboBox()
        self.pin_button = QPushButton("Pin to year")
        self.pin_button.setToolTip("Hold the selected asset to this year and see what it costs")
        self.pin_button.clicked.connect(self.pin_selected)
        self.unpin_button = QPushButton("Clear pin")
        self.unpin_button.clicked.connect(self.unpin_selected)
        self.must_box = QCheckBox("Must replace now")
        self.must_box.setToolTip("Safety or regulation: replace the selected asset in year 0")
        self.must_box.toggled.connect(self._must_toggled)
        self.pin_note = QLabel("")
        pins = QHBoxLayout()
        pins.addWidget(QLabel("Selected asset:"))
        pins.addWidget(self.pin_year)
        pins.addWidget(self.pin_button)
        pins.addWidget(self.unpin_button)
        pins.addWidget(self.must_box)
        pins.addWidget(self.pin_note, 1)

        lower = QWidget()
        lower_layout = QVBoxLayout(lower)
        lower_layout.setContentsMargins(0, 0, 0, 0)
        lower_layout.addLayout(pins)
        lower_layout.addWidget(self.table)
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(self.plot)
        split.addWidget(lower)
        split.setStretchFactor(0, 2)
        split.setStretchFactor(1, 3)
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addWidget(self.summary)
        layout.addWidget(split, 1)
        self._selection_changed()

    # ------------------------------------------------------------------ input
    def set_currency(self, symbol: str) -> None:
        """The currency symbol of amounts and the capital axis (the window's one currency)."""
        self.currency = symbol or ""
        self.plot.setLabel("left", f"capital ({self.currency})" if self.currency else "capital")
        if self.plan is not None:
            self.show_plan(self.plan, self.override)

    def set_document(self, doc: Any) -> None:
        """Take the register's assets that have a study (key, site, study, cached result)."""
        items = []
        years = []
        for key in doc.keys():
            entry = doc.entry(key)
            if entry.study is None:
                continue
            items.append((key, entry.site, entry.study, doc.cached_result(key)))
            if entry.study_year is not None:
                years.append(int(entry.study_year))
        self.items = items
        from desktop_app.document import this_year

        self.first_year = max(years) if years else this_year()
        self.must &= {k for k, *_ in items}
        self.pins = {k: y for k, y in self.pins.items() if k in {i[0] for i in items}}
        self._fill_years()

    def _fill_years(self) -> None:
        self.pin_year.clear()
        for y in range(self.horizon.value()):
            self.pin_year.addItem(str(self.first_year + y), y)
        self.pin_year.addItem("after the horizon", -1)

    def budgets(self) -> tuple[int, list[float | None] | None]:
        """(horizon, budgets) from the entry; raises StudyError on bad text."""
        from core.plan.cli import parse_budgets

        text = self.budget_edit.text().strip()
        if not text:
            return self.horizon.value(), None
        if "," in text:
            return parse_budgets(None, text, None)
        return parse_budgets(text, None, self.horizon.value())

    # ------------------------------------------------------------------ solving
    def solve(self) -> None:
        from core.errors import StudyError

        if not self.items:
            self.summary.setText("No asset with a study to plan.")
            return
        try:
            horizon, budgets = self.budgets()
        except StudyError as exc:
            self.summary.setText(f"<span style='color:#b00020'>Budget: {exc.message}</span>")
            return
        if horizon != self.horizon.value():
            self.horizon.setValue(horizon)
            self._fill_years()
        self.cancel()
        job = PlanJob(self.items, self.first_year, horizon, budgets, self.net.isChecked(),
                      self.limit.value() or None, self.must, self.pins)
        job.signals.progress.connect(self._progress)
        job.signals.done.connect(self._done)
        job.signals.failed.connect(self._failed)
        self.job = job
        self.progress.setValue(0)
        self.progress.setFormat("starting")
        self.cancel_button.setEnabled(True)
        self.pool.start(job)

    def cancel(self) -> None:
        if self.job is not None:
            self.job.cancel()
            self._old_jobs.append(self.job)   # keep it alive until its thread is done
            self.job = None
        self.cancel_button.setEnabled(False)

    def shutdown(self, timeout_ms: int = 20_000) -> None:
        """Cancel and wait for the worker (call before the window closes)."""
        self.cancel()
        self.pool.waitForDone(timeout_ms)

    def wait(self, timeout_ms: int = 60_000) -> bool:
        return self.pool.waitForDone(timeout_ms)

    def closeEvent(self, event: Any) -> None:  # noqa: N802 - Qt's name
        self.shutdown()
        super().closeEvent(event)

    def _progress(self, percent: int, text: str) -> None:
        if self.sender() is not (self.job.signals if self.job else None):
            return
        self.progress.setValue(percent)
        self.progress.setFormat(text)

    def _failed(self, message: str) -> None:
        if self.sender() is not (self.job.signals if self.job else None):
            return
        self.job = None
        self.cancel_button.setEnabled(False)
        self.progress.setFormat("no plan")
        self.summary.setText(f"<span style='color:#b00020'>{message}</span>")

    def _done(self, plan: Any, cost: float | None) -> None:
        if self.sender() is not (self.job.signals if self.job else None):
            return
        self.inputs = self.job.inputs
        self.job = None
        self.cancel_button.setEnabled(False)
        self.show_plan(plan, cost)
        self.memo_button.setEnabled(True)

    # ------------------------------------------------------------------ showing
    def show_plan(self, plan: Any, cost: float | None = None) -> None:
        self.plan, self.override = plan, cost
        self._draw_chart(plan)
        self._fill_table(plan)
        self._write_summary(plan, cost)
        self.plan_ready.emit(plan)

    def _write_summary(self, plan: Any, cost: float | None) -> None:
        cur = self.currency
        inside = sum(1 for a in plan.assets if a.year is not None)
        parts = [f"<b>{inside} of {len(plan.assets)} assets replaced</b> in "
                 f"{plan.first_year}–{plan.first_year + plan.horizon - 1} for "
                 f"<b>{_money(sum(plan.capital_by_year), cur)}</b> of capital "
                 f"({_money(sum(plan.net_capital_by_year), cur)} after sales)."]
        if plan.deferred:
            parts.append(f"The budget defers {len(plan.deferred)}; that costs "
                         f"<b>{_money(plan.budget_cost, cur)}</b> of value.")
        elif any(b is not None for b in plan.budgets):
            parts.append("The budget defers nothing.")
        if plan.rule_objective is not None:
            parts.append(f"Funding by value per unit of capital would lose "
                         f"{_money(plan.rule_gap, cur)} against this plan.")
        else:
            parts.append("Funding by value per unit of capital finds no plan in budget.")
        if cost is not None:
            parts.append(f"<span style='color:#8a4b00'>Your pins cost <b>{_money(cost, cur)}</b> "
                         f"against the best plan under the same budget.</span>")
        if plan.status != "optimal":
            parts.append(f"(Solver {plan.status}.)")
        if plan.basis_note:
            parts.append(f"<br><span style='color:#555555'>{plan.basis_note}</span>")
        self.summary.setText(" ".join(parts))
        self.progress.setFormat(plan.status if plan.status == "optimal" else "stopped")

    def _draw_chart(self, plan: Any) -> None:
        self.plot.clear()
        self.legend.clear()
        years = np.array(plan.calendar_years, dtype=float)
        base = np.zeros(len(years))
        for n, site in enumerate(plan.capital_by_site):
            heights = np.array(site.capital, dtype=float)
            colour = palette.SITES[n % len(palette.SITES)]
            bars = pg.BarGraphItem(x=years, height=heights, y0=base.copy(), width=0.6,
                                   brush=pg.mkBrush(colour), pen=pg.mkPen("w", width=0.5),
                                   name=site.site)
            self.plot.addItem(bars)        # named: the legend lists it
            base += heights
        if any(b is not None for b in plan.budgets):
            y = np.array([np.nan if b is None else b for b in plan.budgets], dtype=float)
            edges = np.concatenate([years - 0.5, [years[-1] + 0.5]])
            line = pg.PlotDataItem(edges, y, stepMode="center",
                                   pen=pg.mkPen("k", width=2, style=Qt.PenStyle.DashLine),
                                   name="budget")
            self.plot.addItem(line)
        top = max([*base.tolist(), *[b for b in plan.budgets if b is not None], 1.0])
        self.plot.setXRange(years[0] - 0.6, years[-1] + 0.6, padding=0)
        self.plot.setYRange(0, top * 1.22, padding=0)   # room for the legend above the bars
        axis = self.plot.getAxis("bottom")
        axis.setTicks([[(float(y), str(int(y))) for y in years]])

    def _fill_table(self, plan: Any) -> None:
        self.table.setSortingEnabled(False)
        self.table.setRowCount(len(plan.assets))

        cur = self.currency

        def when(y: int | None) -> str:
            return "after horizon" if y is None else str(plan.first_year + y)

        for r, a in enumerate(plan.assets):
            key = a.tag or a.title
            name = a.title
            if a.site and name.startswith(f"{a.site} — "):
                name = name[len(a.site) + 3:]      # the site has its own column
            values: list[tuple[str, Any]] = [
                (name, name), (a.site or "", a.site or ""),
                (when(a.year), a.year if a.year is not None else 10**6),
                (when(a.best_year), a.best_year if a.best_year is not None else 10**6),
                (a.challenger or "-", a.challenger or ""),
                (_money(a.capital, cur) if a.year is not None else "-", a.capital),
                (_money(a.value, cur), a.value), (_money(a.deferral_cost, cur), a.deferral_cost),
                ("yes" if a.forced else "", int(a.forced)),
                ("yes" if a.pinned else "", int(a.pinned))]
            for c, (text, sort) in enumerate(values):
                item = _SortItem(text, sort)
                if c == 0:
                    item.setData(Qt.ItemDataRole.UserRole, key)
                if c >= 5 and c <= 7:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                if a.deferred and c == 7:
                    item.setForeground(pg.mkColor(palette.ATTENTION))
                self.table.setItem(r, c, item)
        self.table.setSortingEnabled(True)
        self.table.sortItems(2, Qt.SortOrder.AscendingOrder)   # by planned year
        widths = (280, 120, 100, 100, 260, 90, 90, 100, 50, 60)
        for c, w in enumerate(widths):
            self.table.setColumnWidth(c, w)

    # ------------------------------------------------------------------ memo
    def write_memo(self, path: str | None = None) -> None:
        """Ask where, then write the plan memo of the plan shown, in the background."""
        from PySide6.QtWidgets import QFileDialog

        from core.plan.load import PlanSource

        if self.plan is None or not self.inputs:
            return
        if path is None:
            path, _ = QFileDialog.getSaveFileName(self, "Write plan memo", "capital-plan.pdf",
                                                  "PDF (*.pdf)")
            if not path:
                return
        by_key = {k: study for k, _site, study, _r in self.items}
        studies = tuple(by_key[a.tag] for a in self.inputs)
        source = PlanSource("", tuple(self.inputs), studies, self.first_year, True)
        index = {a.tag: n for n, a in enumerate(self.inputs)}
        pins = {index[k]: y for k, y in self.pins.items() if k in index}
        job = MemoJob(self.plan, source, path, pins)
        job.signals.progress.connect(lambda p, t: (self.progress.setValue(p),
                                                   self.progress.setFormat(t)))
        job.signals.done.connect(self._memo_written)
        job.signals.failed.connect(self._failed_memo)
        self.memo_job = job
        self.memo_button.setEnabled(False)
        self.pool.start(job)

    def _memo_written(self, issued: Any, _none: object) -> None:
        self.memo_button.setEnabled(True)
        self.memo_written = issued
        self.summary.setText(self.summary.text() + f"<br>Plan memo written: {issued.path} "
                             f"({issued.pages} pages, fingerprint {issued.fingerprint[:12]}…).")

    def _failed_memo(self, message: str) -> None:
        self.memo_button.setEnabled(True)
        self.summary.setText(f"<span style='color:#b00020'>Plan memo: {message}</span>")

    # ------------------------------------------------------------------ pins and must
    def selected_key(self) -> str | None:
        rows = self.table.selectionModel().selectedRows()
        if not rows:
            return None
        item = self.table.item(rows[0].row(), 0)
        return None if item is None else item.data(Qt.ItemDataRole.UserRole)

    def _selection_changed(self) -> None:
        key = self.selected_key()
        for w in (self.pin_year, self.pin_button, self.unpin_button, self.must_box):
            w.setEnabled(key is not None)
        if key is not None:
            with _blocked(self.must_box):
                self.must_box.setChecked(key in self.must)
            self.unpin_button.setEnabled(key in self.pins)
            self.pin_note.setText(f"pinned to {self._year_text(self.pins[key])}"
                                  if key in self.pins else "")

    def _year_text(self, y: int) -> str:
        return "after the horizon" if y < 0 else str(self.first_year + y)

    def pin_selected(self, year: int | None = None) -> None:
        key = self.selected_key()
        if key is None:
            return
        self.pins[key] = int(self.pin_year.currentData() if year is None else year)
        self.solve()

    def unpin_selected(self) -> None:
        key = self.selected_key()
        if key is not None and self.pins.pop(key, None) is not None:
            self.solve()

    def _must_toggled(self, on: bool) -> None:
        key = self.selected_key()
        if key is None:
            return
        if on:
            self.must.add(key)
        else:
            self.must.discard(key)
        self.solve()


class _SortItem(QTableWidgetItem):
    """A cell that sorts by a number (or text) rather than by its shown text."""

    def __init__(self, text: str, key: Any) -> None:
        super().__init__(text)
        self.key = key

    def __lt__(self, other: QTableWidgetItem) -> bool:
        mine, theirs = self.key, getattr(other, "key", other.text())
        try:
            return mine < theirs
        except TypeError:
            return str(mine) < str(theirs)


class _blocked:
    def __init__(self, widget: QWidget) -> None:
        self.widget = widget

    def __enter__(self) -> None:
        self.widget.blockSignals(True)

    def __exit__(self, *exc: object) -> None:
        self.widget.blockSignals(False)
