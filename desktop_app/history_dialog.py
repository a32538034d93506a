"""The "Import cost history…" dialog: file, column mapping, trend fit, save to the workbook.

``CostHistoryDialog(workbook_path, asset_tag=None, parent=None)``, three pages:

1. **File** - a CSV or XLSX file (``load_file(path)``), its sheet and a preview
   of the first rows (read by :func:`core.history.read_table`).
2. **Columns** - which column holds the asset tag, the date (or calendar year,
   or year of age), the amount and the kind, guessed from the header names;
   *Check* runs :func:`core.history.import_history` and lists every rejected
   row with its row number and reason.
3. **Fit** - for one asset, the operating-cost trend (arithmetic gradient or
   geometric growth, with R²) and the market-value decline rate, plotted with
   their data and residuals; the proposed estimates are editable fields.

*Save to workbook* stores the imported rows and the fits (with the values the
user accepted) in one transaction, emits ``estimatesAccepted(operating_costs,
market_values)`` (either may be ``None``) and closes the dialog;
:meth:`CostHistoryDialog.accepted_estimates` returns the same pair for the
window to apply through its undo stack. No economics here: the fits are
:mod:`core.history`'s.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import sqlite3
from pathlib import Path
from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (
    QAbstractItemView,
    QButtonGroup,
    QCheckBox,
    QComboBox,
    QDialog,
    QDoubleSpinBox,
    QFileDialog,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QMessageBox,
    QPushButton,
    QRadioButton,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.estimates import MarketValues, OperatingCosts
from core.history import (
    ColumnMapping,
    ImportReport,
    TrendFit,
    fit_market_values,
    fit_operating_costs,
    guess_history_columns,
    import_history,
    read_table,
    yearly_totals,
)
from core.text import money
from core.workbook import Asset, HistoryRow, Workbook, WorkbookInUse
from desktop_app.charts import MoneyAxis, guard_signal_refcount_bug

try:  # the workbook this process already has open for writing, if any, else a new writer
    from core.workbook.model import _writer
except ImportError:  # pragma: no cover - older core
    def _writer(path: Any) -> Any:
        return Workbook.open(path, write=True)

__all__ = ["CostHistoryDialog", "guess_columns"]

PREVIEW_ROWS = 20
NONE = "(none)"
FIXED_TAG = "(one asset: {tag})"
TIMING = (("date", "Date column (work-order or quote date)"),
          ("year", "Calendar-year column"),
          ("age", "Year-of-age column (1 = first year in service)"))
DECIMAL_CHOICES = (("auto", "read from the column"), (".", "point (1,234.50)"),
                   (",", "comma (1.234,50)"))
KINDS = (("operating", "operating cost"), ("maintenance", "maintenance cost"),
         ("resale", "resale quote"))

def guess_columns(columns: list[str]) -> dict[str, str | None]:
    """Guess which header names hold which role (``core.history.guess_history_columns``).

    >>> g = guess_columns(["Asset", "Closed", "Type", "Cost (EUR)", "Notes"])
    >>> g["tag"], g["date"], g["kind"], g["amount"], g["year"]
    ('Asset', 'Closed', 'Type', 'Cost (EUR)', None)
    """
    return guess_history_columns(columns)


def _cell(value: Any) -> QTableWidgetItem:
    """A preview cell: blanks empty, midnight datetimes as dates, numbers right-aligned."""
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return QTableWidgetItem("")
    if isinstance(value, _dt.datetime) and value.time() == _dt.time():
        value = value.date()
    item = QTableWidgetItem(value.isoformat() if isinstance(value, _dt.date) else str(value))
    number = isinstance(value, (int, float)) or (
        isinstance(value, str) and value.strip().replace(",", "").replace(".", "", 1)
        .lstrip("-").isdigit())
    if number:
        item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
    return item


def _row(*widgets: QWidget) -> QHBoxLayout:
    """The widgets side by side, left-aligned (one line of the column form)."""
    row = QHBoxLayout()
    for widget in widgets:
        row.addWidget(widget)
    row.addStretch(1)
    return row


class CostHistoryDialog(QDialog):
    """Import a cost-history file into a workbook and propose estimates from its trends."""

    estimatesAccepted = Signal(object, object)  # noqa: N815 (Qt naming): OperatingCosts, MarketValues

    def __init__(self, workbook_path: str | Path, asset_tag: str | None = None,
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        guard_signal_refcount_bug()
        pg.setConfigOptions(useOpenGL=False)  # software rendering only
        self.workbook_path = Path(workbook_path)
        self.asset_tag = asset_tag
        self.currency = "£"
        self.frame: Any = None
        self.file_path: Path | None = None
        self.report: ImportReport | None = None
        self.cost_fits: dict[str, TrendFit] = {}
        self.value_fit: TrendFit | None = None
        self._accepted: tuple[OperatingCosts | None, MarketValues | None] = (None, None)
        self.today = _dt.date.today()  # for "is the latest year of age complete yet?"
        self._partial: tuple[str, int] | None = None
        self._fitted_tag: str | None = None
        self.assets: dict[str, Asset] = {}
        self.study_year: dict[str, int] = {}
        self.setWindowTitle(f"Import cost history — {self.workbook_path.name}")
        self.resize(1040, 760)

        self.tabs = QTabWidget()
        self.tabs.addTab(self._file_page(), "1  File")
        self.tabs.addTab(self._columns_page(), "2  Columns")
        self.tabs.addTab(self._fit_page(), "3  Fit")
        self.tabs.currentChanged.connect(self._tab_changed)

        self.status = QLabel()
        self.status.setWordWrap(True)
        self.back_button = QPushButton("< Back")
        self.next_button = QPushButton("Next >")
        self.save_button = QPushButton("Save to workbook")
        self.cancel_button = QPushButton("Cancel")
        self.back_button.clicked.connect(lambda: self.tabs.setCurrentIndex(
            max(0, self.tabs.currentIndex() - 1)))
        self.next_button.clicked.connect(self._next)
        self.save_button.clicked.connect(self.save)
        self.cancel_button.clicked.connect(self.reject)
        buttons = QHBoxLayout()
        buttons.addWidget(self.status, 1)
        for b in (self.back_button, self.next_button, self.save_button, self.cancel_button):
            buttons.addWidget(b)
        layout = QVBoxLayout(self)
        layout.addWidget(self.tabs, 1)
        layout.addLayout(buttons)
        self._read_workbook()
        self._update_buttons()

    # ------------------------------------------------------------------ pages
    def _file_page(self) -> QWidget:
        page = QWidget()
        self.path_edit = QLineEdit()
        self.path_edit.setPlaceholderText("A CSV or Excel (.xlsx) file of work orders, "
                                          "yearly costs or resale quotes")
        self.path_edit.returnPressed.connect(lambda: self.load_file(self.path_edit.text()))
        browse = QPushButton("Browse…")
        browse.clicked.connect(self.browse)
        self.sheet_combo = QComboBox()
        self.sheet_combo.setEnabled(False)
        self.sheet_combo.currentIndexChanged.connect(self._sheet_changed)
        row = QHBoxLayout()
        row.addWidget(self.path_edit, 1)
        row.addWidget(browse)
        form = QFormLayout()
        form.addRow("File:", row)
        form.addRow("Sheet:", self.sheet_combo)
        self.file_info = QLabel("No file chosen yet.")
        self.preview = QTableWidget()
        self._read_only(self.preview)
        layout = QVBoxLayout(page)
        layout.addLayout(form)
        layout.addWidget(self.file_info)
        layout.addWidget(self.preview, 1)
        return page

    def _columns_page(self) -> QWidget:
        page = QWidget()
        self.tag_combo = QComboBox()
        self.timing_combo = QComboBox()
        for key, text in TIMING:
            self.timing_combo.addItem(text, key)
        self.time_column = QComboBox()
        self.dayfirst = QCheckBox("Dates are day first (31/03/2024)")
        self.dayfirst.setChecked(True)
        self.amount_combo = QComboBox()
        self.decimal_combo = QComboBox()
        for key, text in DECIMAL_CHOICES:
            self.decimal_combo.addItem(text, key)
        self.kind_combo = QComboBox()
        self.default_kind = QComboBox()
        for key, text in KINDS:
            self.default_kind.addItem(text, key)
        self.replace_box = QCheckBox("Replace the workbook's earlier history of these assets "
                                     "(same kinds) when saving")
        for combo in (self.tag_combo, self.timing_combo, self.time_column, self.amount_combo,
                      self.decimal_combo, self.kind_combo, self.default_kind):
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
            combo.currentIndexChanged.connect(self._mapping_changed)
        self.dayfirst.toggled.connect(self._mapping_changed)
        self.timing_combo.currentIndexChanged.connect(self._timing_changed)
        form = QFormLayout()
        form.addRow("Asset tag:", self.tag_combo)
        form.addRow("When:", _row(self.timing_combo, self.time_column, self.dayfirst))
        form.addRow("Amount:", _row(self.amount_combo, QLabel("decimal mark:"),
                                    self.decimal_combo))
        form.addRow("Kind:", _row(self.kind_combo, QLabel("blank or no column means:"),
                                  self.default_kind))
        form.addRow("", self.replace_box)
        self.keep_duplicates = QCheckBox("Keep exact duplicate rows")
        self.keep_future = QCheckBox("Keep rows dated after today")
        for box in (self.keep_duplicates, self.keep_future):
            box.setToolTip("Such rows are listed as warnings and left out unless ticked.")
            box.toggled.connect(self._mapping_changed)
        form.addRow("Flagged rows:", _row(self.keep_duplicates, self.keep_future))
        note = QLabel("Kind words understood: operating, energy, labour; maintenance, repair, "
                      "service, parts, overhaul; resale, quote, market value, trade-in.")
        note.setWordWrap(True)
        note.setStyleSheet("color: #555;")
        self.check_button = QPushButton("Check")
        self.check_button.clicked.connect(self.check)
        self.check_summary = QLabel("Press Check to import the rows and see what is refused.")
        self.check_summary.setWordWrap(True)
        top = QHBoxLayout()
        top.addWidget(self.check_button)
        top.addWidget(self.check_summary, 1)
        self.rejected_table = QTableWidget(0, 3)
        self.rejected_table.setHorizontalHeaderLabels(["Row", "Reason", "Values"])
        self._read_only(self.rejected_table)
        self.flagged_table = QTableWidget(0, 3)
        self.flagged_table.setHorizontalHeaderLabels(["Row", "Warning", "Values"])
        self._read_only(self.flagged_table)
        layout = QVBoxLayout(page)
        layout.addLayout(form)
        layout.addWidget(note)
        layout.addLayout(top)
        layout.addWidget(QLabel("Rejected rows (row numbers as the spreadsheet shows them; "
                                "the header is row 1):"))
        layout.addWidget(self.rejected_table, 1)
        layout.addWidget(QLabel("Warnings (exact duplicates and rows dated after today; "
                                "left out unless kept above):"))
        layout.addWidget(self.flagged_table, 1)
        return page

    def _fit_page(self) -> QWidget:
        page = QWidget()
        self.fit_asset = QComboBox()
        self.fit_asset.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.fit_asset.setMinimumContentsLength(32)
        self.fit_asset.currentIndexChanged.connect(self._refit)
        self.age_now = QSpinBox()
        self.age_now.setRange(0, 100)
        self.age_now.setSuffix(" years")
        self.age_now.valueChanged.connect(self._propose_costs)
        self.fit_info = QLabel()
        self.fit_info.setWordWrap(True)
        head = QHBoxLayout()
        head.addWidget(QLabel("Asset:"))
        head.addWidget(self.fit_asset)
        head.addSpacing(16)
        head.addWidget(QLabel("Age now (whole years in service):"))
        head.addWidget(self.age_now)
        head.addStretch(1)
        self.partial_box = QCheckBox()
        self.partial_box.setVisible(False)
        self.partial_box.toggled.connect(self._refit)

        # operating cost
        self.cost_box = QGroupBox("Operating cost by year of age")
        self.cost_box.setCheckable(True)
        self.cost_box.setToolTip("Untick to leave the defender's operating costs as they are")
        self.arith_radio = QRadioButton("Arithmetic gradient")
        self.geo_radio = QRadioButton("Geometric growth")
        self.arith_radio.setChecked(True)
        self.model_group = QButtonGroup(self)
        self.model_group.addButton(self.arith_radio)
        self.model_group.addButton(self.geo_radio)
        self.arith_radio.toggled.connect(self._model_changed)
        self.cost_plot, self.cost_resid = self._plot_pair()
        self.first_edit = self._money_spin()
        self.gradient_edit = self._money_spin(negative=True)
        self.growth_edit = QDoubleSpinBox()
        self.growth_edit.setRange(-99.0, 1000.0)
        self.growth_edit.setDecimals(2)
        self.growth_edit.setSuffix(" % per year")
        self.growth_edit.setAlignment(Qt.AlignmentFlag.AlignRight)
        self.growth_edit.setToolTip("Geometric growth of the yearly cost per year of age")
        self.first_edit.valueChanged.connect(self._move_marker)
        self._marker: Any = None
        self.cost_form = QFormLayout()
        self.cost_form.addRow("First-year cost:", self.first_edit)
        self.cost_form.addRow("Gradient:", self.gradient_edit)
        self.cost_form.addRow("Growth:", self.growth_edit)
        self.cost_note = QLabel()
        self.cost_note.setWordWrap(True)
        self.cost_note.setStyleSheet("color: #444;")
        models = QHBoxLayout()
        models.addWidget(self.arith_radio)
        models.addWidget(self.geo_radio)
        models.addStretch(1)
        cost_layout = QVBoxLayout(self.cost_box)
        cost_layout.addLayout(models)
        cost_layout.addWidget(self.cost_plot, 3)
        cost_layout.addWidget(self.cost_resid, 2)
        cost_layout.addLayout(self.cost_form)
        cost_layout.addWidget(self.cost_note)

        # market value
        self.value_box = QGroupBox("Market value (resale quotes) by years in service")
        self.value_box.setCheckable(True)
        self.value_box.setToolTip("Untick to leave the defender's market values as they are")
        self.value_plot, self.value_resid = self._plot_pair()
        self.decline_edit = QDoubleSpinBox()
        self.decline_edit.setRange(0.0, 99.99)
        self.decline_edit.setDecimals(2)
        self.decline_edit.setSuffix(" % per year")
        self.decline_edit.setAlignment(Qt.AlignmentFlag.AlignRight)
        self.decline_edit.setToolTip("Constant yearly decline rate d of the market value")
        self.value_note = QLabel()
        self.value_note.setWordWrap(True)
        self.value_note.setStyleSheet("color: #444;")
        value_form = QFormLayout()
        value_form.addRow("Decline rate:", self.decline_edit)
        value_layout = QVBoxLayout(self.value_box)
        value_layout.addWidget(QLabel("Log-linear (constant decline rate)"))
        value_layout.addWidget(self.value_plot, 3)
        value_layout.addWidget(self.value_resid, 2)
        value_layout.addLayout(value_form)
        value_layout.addWidget(self.value_note)
        self.value_form = value_form

        boxes = QHBoxLayout()
        boxes.addWidget(self.cost_box, 1)
        boxes.addWidget(self.value_box, 1)
        layout = QVBoxLayout(page)
        layout.addLayout(head)
        layout.addWidget(self.partial_box)
        layout.addWidget(self.fit_info)
        layout.addLayout(boxes, 1)
        return page

    # ------------------------------------------------------------------ widgets
    @staticmethod
    def _read_only(table: QTableWidget) -> None:
        table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        table.setAlternatingRowColors(True)
        table.verticalHeader().setVisible(False)
        table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        table.horizontalHeader().setStretchLastSection(True)

    def _money_spin(self, negative: bool = False) -> QDoubleSpinBox:
        spin = QDoubleSpinBox()
        spin.setRange(-1e9 if negative else 0.0, 1e9)
        spin.setDecimals(2)
        spin.setGroupSeparatorShown(True)
        spin.setAlignment(Qt.AlignmentFlag.AlignRight)
        return spin

    def _plot_pair(self) -> tuple[pg.PlotWidget, pg.PlotWidget]:
        plots = []
        for _ in range(2):
            plot = pg.PlotWidget(background="w", axisItems={"left": MoneyAxis("left")})
            plot.setMenuEnabled(False)
            plot.setMouseEnabled(False, False)
            plot.hideButtons()
            plot.showGrid(x=True, y=True, alpha=0.2)
            plot.setMinimumHeight(110)
            plot.getAxis("left").setWidth(70)
            for name in ("left", "bottom"):
                plot.getAxis(name).setPen(pg.mkPen("#444"))
                plot.getAxis(name).setTextPen(pg.mkPen("#222"))
            plots.append(plot)
        return plots[0], plots[1]

    def set_currency(self, symbol: str) -> None:
        """The currency symbol of money fields and plot titles ('' for none)."""
        self.currency = symbol or ""
        self._unit_labels()
        self._refit()

    def _unit_labels(self) -> None:
        c = self.currency or "money"
        self.first_edit.setSuffix(f" {c}/yr" if self.currency else " per year")
        self.gradient_edit.setSuffix(f" {c}/yr per year of age" if self.currency
                                     else " per year per year of age")
        self.first_edit.setToolTip("Operating cost of the first study year "
                                   "(the asset's next year of age), currency per year")
        self.gradient_edit.setToolTip("Increase of the yearly cost per year of age")

    # ------------------------------------------------------------------ workbook
    def _read_workbook(self) -> None:
        self._unit_labels()
        try:
            with Workbook.open(self.workbook_path, write=False) as wb:
                self.assets = {a.tag: a for a in wb.assets()}
                meta_year = wb.meta().get("current_year", "")
                for tag in self.assets:
                    year = wb.current_year(tag)
                    self.study_year[tag] = year if year is not None else (
                        int(meta_year) if meta_year.isdigit() else _dt.date.today().year)
        except (StudyError, OSError) as exc:
            self._error("Cannot read the workbook", str(exc))
            return
        self._fill_tag_combo()

    def _in_service(self) -> dict[str, _dt.date | None]:
        return {tag: a.in_service for tag, a in self.assets.items()}

    # ------------------------------------------------------------------ page 1
    def browse(self) -> None:
        start = str(self.file_path.parent) if self.file_path else str(self.workbook_path.parent)
        path, _ = QFileDialog.getOpenFileName(self, "Import cost history", start,
                                              "Cost history (*.csv *.xlsx *.xlsm *.txt *.tsv);;"
                                              "All files (*)")
        if path:
            self.load_file(path)

    def load_file(self, path: str | Path, sheet: str | int | None = None) -> bool:
        """Read ``path`` (CSV or XLSX) and preview it; False (with a message) if unreadable."""
        path = Path(str(path).strip())
        self.path_edit.setText(str(path))
        try:
            frame = read_table(path, sheet)
            if len(frame.columns) == 0:
                raise StudyError(str(path), "the table has no columns")
        except Exception as exc:  # noqa: BLE001 - the user sees a message, never a traceback
            text = str(exc) if isinstance(exc, StudyError) else (
                f"{path}: {type(exc).__name__}: {exc}")
            if self.file_path is not None:
                self.file_info.setText(f"Could not read {path.name}; still showing "
                                       f"{self.file_path.name}.")
            self._error("Cannot read the file", text)
            return False
        first_load = self.file_path != path
        self.file_path, self.frame, self.report = path, frame, None
        if first_load:
            self._fill_sheets(path)
        self._fill_preview()
        self._fill_column_combos()
        self._set_status(f"{path.name}: {len(frame)} data rows, {len(frame.columns)} columns.")
        self._update_buttons()
        return True

    def _fill_sheets(self, path: Path) -> None:
        names: list[str] = []
        if path.suffix.lower() in (".xlsx", ".xlsm"):
            with contextlib.suppress(Exception):
                import openpyxl

                book = openpyxl.load_workbook(path, read_only=True)
                names = list(book.sheetnames)
                book.close()
        self.sheet_combo.blockSignals(True)
        self.sheet_combo.clear()
        self.sheet_combo.addItems(names)
        self.sheet_combo.blockSignals(False)
        self.sheet_combo.setEnabled(len(names) > 1)

    def _sheet_changed(self, index: int) -> None:
        if self.file_path is not None and index >= 0:
            self.load_file(self.file_path, self.sheet_combo.currentText())

    def _fill_preview(self) -> None:
        frame = self.frame
        head = frame.head(PREVIEW_ROWS)
        self.preview.clear()
        self.preview.setColumnCount(len(frame.columns) + 1)
        self.preview.setRowCount(len(head))
        self.preview.setHorizontalHeaderLabels(["Row", *map(str, frame.columns)])
        for r, (rownum, row) in enumerate(head.iterrows()):
            item = QTableWidgetItem(str(rownum))
            item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            self.preview.setItem(r, 0, item)
            for c, value in enumerate(row.tolist()):
                self.preview.setItem(r, c + 1, _cell(value))
        more = len(frame) - len(head)
        self.file_info.setText(
            f"{self.file_path.name}: {len(frame)} data rows, {len(frame.columns)} columns"
            + (f" — the first {len(head)} are shown." if more > 0 else "."))

    # ------------------------------------------------------------------ page 2
    def _fill_tag_combo(self) -> None:
        columns = [] if self.frame is None else [str(c) for c in self.frame.columns]
        guess = guess_columns(columns)
        self.tag_combo.blockSignals(True)
        self.tag_combo.clear()
        for c in columns:
            self.tag_combo.addItem(f"column '{c}'", "column:" + c)
        for tag in self.assets:
            self.tag_combo.addItem(FIXED_TAG.format(tag=tag), "fixed:" + tag)
        want = (f"column:{guess['tag']}" if guess["tag"] else
                f"fixed:{self.asset_tag or next(iter(self.assets), '')}")
        index = self.tag_combo.findData(want)
        self.tag_combo.setCurrentIndex(max(0, index))
        self.tag_combo.blockSignals(False)

    def _fill_column_combos(self) -> None:
        columns = [str(c) for c in self.frame.columns]
        guess = guess_columns(columns)
        self._fill_tag_combo()
        for combo, role, optional in ((self.amount_combo, "amount", False),
                                      (self.kind_combo, "kind", True)):
            combo.blockSignals(True)
            combo.clear()
            if optional:
                combo.addItem(NONE, None)
            for c in columns:
                combo.addItem(c, c)
            combo.setCurrentIndex(max(0, combo.findData(guess[role])) if guess[role] else 0)
            combo.blockSignals(False)
        timing = next((k for k in ("date", "year", "age") if guess[k]), "date")
        self.timing_combo.blockSignals(True)
        self.timing_combo.setCurrentIndex(self.timing_combo.findData(timing))
        self.timing_combo.blockSignals(False)
        self._timing_changed(guess[timing])
        if guess["amount"] and "quote" in guess["amount"].lower() and not guess["kind"]:
            self.default_kind.setCurrentIndex(self.default_kind.findData("resale"))

    def _timing_changed(self, pick: Any = None) -> None:
        columns = [] if self.frame is None else [str(c) for c in self.frame.columns]
        key = self.timing_combo.currentData()
        if not isinstance(pick, str):
            pick = guess_columns(columns)[key]
        self.time_column.blockSignals(True)
        self.time_column.clear()
        self.time_column.addItems(columns)
        if pick in columns:
            self.time_column.setCurrentText(pick)
        self.time_column.blockSignals(False)
        self.dayfirst.setVisible(key == "date")
        self._mapping_changed()

    def _mapping_changed(self, *_: Any) -> None:
        if self.report is not None:
            self.report = None
            self.check_summary.setText("The mapping changed: press Check again.")
            self._update_buttons()

    def set_mapping(self, *, amount: str, tag: str | None = None, date: str | None = None,
                    year: str | None = None, age: str | None = None, kind: str | None = None,
                    default_kind: str = "operating", fixed_tag: str | None = None,
                    dayfirst: bool | None = None, decimal: str | None = None) -> None:
        """Set the column choices as a user would (for tests and scripted use)."""
        self.tag_combo.setCurrentIndex(self.tag_combo.findData(
            f"column:{tag}" if tag is not None else f"fixed:{fixed_tag}"))
        timing = "date" if date else "year" if year else "age"
        self.timing_combo.setCurrentIndex(self.timing_combo.findData(timing))
        self.time_column.setCurrentText(date or year or age or "")
        self.amount_combo.setCurrentIndex(self.amount_combo.findData(amount))
        self.kind_combo.setCurrentIndex(max(0, self.kind_combo.findData(kind)) if kind else 0)
        self.default_kind.setCurrentIndex(self.default_kind.findData(default_kind))
        if dayfirst is not None:
            self.dayfirst.setChecked(dayfirst)
        if decimal is not None:
            self.decimal_combo.setCurrentIndex(self.decimal_combo.findData(decimal))

    def mapping(self) -> ColumnMapping:
        """The :class:`core.history.ColumnMapping` the combo boxes say."""
        how, _, value = (self.tag_combo.currentData() or "fixed:").partition(":")
        timing = self.timing_combo.currentData()
        column = self.time_column.currentText() or None
        return ColumnMapping(
            amount=self.amount_combo.currentData(),
            tag=value if how == "column" else None,
            default_tag=(value or None) if how == "fixed" else None,
            date=column if timing == "date" else None,
            year=column if timing == "year" else None,
            age=column if timing == "age" else None,
            kind=self.kind_combo.currentData(),
            default_kind=self.default_kind.currentData(),
            dayfirst=self.dayfirst.isChecked(),
            decimal=self.decimal_combo.currentData() or "auto")

    def check(self) -> ImportReport | None:
        """Run the import with the current mapping; list every rejected row. None on error."""
        if self.frame is None:
            self._error("No file", "Choose a CSV or XLSX file on the File page first.")
            return None
        mapping = self.mapping()
        if mapping.amount is None:
            self._error("Columns", "Amount: choose the column that holds the amounts.")
            return None
        try:
            report = import_history(self.frame, mapping, self._in_service(),
                                    self.file_path.name if self.file_path else "",
                                    keep_duplicates=self.keep_duplicates.isChecked(),
                                    keep_future=self.keep_future.isChecked(), today=self.today)
        except StudyError as exc:
            self._error("Cannot import with these columns", str(exc))
            return None
        except Exception as exc:  # noqa: BLE001 - a message, never a traceback
            self._error("Cannot import with these columns",
                        f"{self.file_path}: {type(exc).__name__}: {exc}")
            return None
        self.report = report
        for table, listed in ((self.rejected_table, [(b.row, b.reason, b.values)
                                                     for b in report.rejected]),
                              (self.flagged_table, [(f.row, f"{f.reason} — "
                                                     f"{'kept' if f.kept else 'left out'}",
                                                     f.values) for f in report.flagged])):
            table.setRowCount(len(listed))
            for r, (number, reason, values) in enumerate(listed):
                row = QTableWidgetItem(str(number))
                row.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                table.setItem(r, 0, row)
                table.setItem(r, 1, QTableWidgetItem(reason))
                table.setItem(r, 2, QTableWidgetItem(" | ".join(values)))
        tags = sorted({h.tag for h in report.accepted})
        text = (f"{len(report.accepted)} of {report.rows} rows accepted, "
                f"{len(report.rejected)} rejected")
        if report.flagged:
            text += (f", {len(report.flagged)} flagged ({len(report.left_out)} left out)")
        text += f" — assets: {', '.join(tags)}." if tags else "."
        note = report.decimal_note()
        text += f" {note[0].upper()}{note[1:]}."
        self.check_summary.setText(text)
        self._set_status(report.summary())
        self._fill_fit_assets(tags)
        self._update_buttons()
        return report

    # ------------------------------------------------------------------ page 3
    def _fill_fit_assets(self, tags: list[str]) -> None:
        current = self.fit_asset.currentData() or self.asset_tag
        self.fit_asset.blockSignals(True)
        self.fit_asset.clear()
        for tag in tags:
            asset = self.assets.get(tag)
            self.fit_asset.addItem(f"{tag}  {asset.description if asset else ''}".strip(), tag)
        index = self.fit_asset.findData(current)
        self.fit_asset.setCurrentIndex(index if index >= 0 else 0)
        self.fit_asset.blockSignals(False)
        self._refit()

    def select_asset(self, tag: str) -> None:
        self.fit_asset.setCurrentIndex(self.fit_asset.findData(tag))

    def fitted_tag(self) -> str | None:
        """The asset whose estimates the Fit page proposes (the one to apply them to)."""
        return self.fit_asset.currentData()

    def _refit(self, *_: Any) -> None:
        tag = self.fit_asset.currentData()
        self.cost_fits, self.value_fit = {}, None
        for plot in (self.cost_plot, self.cost_resid, self.value_plot, self.value_resid):
            plot.clear()
        self._marker = None
        if self.report is None or tag is None:
            self.fit_info.setText("Check the columns first; the fit uses the accepted rows.")
            self.cost_box.setEnabled(False)
            self.value_box.setEnabled(False)
            self._update_buttons()
            return
        rows = [h for h in self.report.accepted if h.tag == tag]
        asset = self.assets.get(tag)
        year = self.study_year.get(tag, _dt.date.today().year)
        if tag != self._fitted_tag:  # a new asset: its age now; else keep the user's entry
            self._fitted_tag = tag
            self.age_now.blockSignals(True)
            self.age_now.setValue(max(0, (asset.age_in(year) if asset else None) or 0))
            self.age_now.blockSignals(False)
        since = (f"in service since {asset.in_service.isoformat()}"
                 if asset and asset.in_service else "no in-service date")
        self.fit_info.setText(
            f"{tag}: {len(rows)} rows of this file, {since}; the fit is kept with the {year} "
            "study. Costs are summed per year of age (work orders of one year add up); "
            "resale quotes of one age are averaged.")
        ages, totals = yearly_totals(rows)
        self._offer_partial(tag, ages)
        if self._partial is not None and self.partial_box.isChecked() and len(ages):
            ages, totals = ages[:-1], totals[:-1]
        self.cost_note.setText("")
        for model in ("arithmetic", "geometric"):
            try:
                self.cost_fits[model] = fit_operating_costs(ages, totals, model, tag)
            except StudyError as exc:
                self.cost_note.setText(str(exc))
        arith, geo = self.cost_fits.get("arithmetic"), self.cost_fits.get("geometric")
        self.arith_radio.setText("Arithmetic gradient" + (
            f"   R² {arith.r_squared:.3f}" if arith else ""))
        self.geo_radio.setText("Geometric growth" + (f"   R² {geo.r_squared:.3f}" if geo else ""))
        self.arith_radio.setEnabled(arith is not None)
        self.geo_radio.setEnabled(geo is not None)
        if geo is not None and arith is not None:
            best = max((arith, geo), key=lambda f: f.r_squared)
            (self.arith_radio if best is arith else self.geo_radio).setChecked(True)
        elif geo is not None:
            self.geo_radio.setChecked(True)
        elif arith is not None:
            self.arith_radio.setChecked(True)
        for plot in (self.cost_plot, self.cost_resid):
            plot.setVisible(bool(self.cost_fits))
        self.cost_box.setEnabled(bool(self.cost_fits))
        self.cost_box.setChecked(bool(self.cost_fits))
        if not self.cost_fits:
            reason = (self.cost_note.text().replace("operating cost fit: ", "") if len(ages)
                      else f"no operating or maintenance costs of {tag} in this file.")
            self.cost_note.setText(f"No operating-cost fit: {reason}")
        self._model_changed()

        q_ages, q_values = yearly_totals(rows, ("resale",))
        self.value_note.setText("")
        try:
            self.value_fit = fit_market_values(q_ages, q_values, tag=tag)
        except StudyError as exc:
            self.value_note.setText("No market-value fit: " + (
                exc.message if len(q_ages) else f"no resale quotes of {tag} in this file."))
        for plot in (self.value_plot, self.value_resid):
            plot.setVisible(self.value_fit is not None)
        self.value_box.setEnabled(self.value_fit is not None)
        self.value_box.setChecked(self.value_fit is not None)
        if self.value_fit is not None:
            fit = self.value_fit
            self.decline_edit.setValue(fit.params["decline_rate"] * 100.0)
            self.value_note.setText(
                f"Fitted MV_k = P(1 − d)^k (log-linear least squares): P = "
                f"{money(fit.params['price'], self.currency)}, d = "
                f"{fit.params['decline_rate']:.2%} per year; R² {fit.r_squared:.3f}; "
                f"{len(fit.ages)} ages, k = whole years in service.")
            self._draw(self.value_plot, self.value_resid, fit, "Years in service")
        self._update_buttons()

    def _year_of_age_end(self, tag: str, age: int) -> _dt.date | None:
        """The day year of age ``age`` of ``tag`` ends, as the mapping counts years."""
        asset = self.assets.get(tag)
        if asset is None or asset.in_service is None or self.report is None:
            return None
        start = asset.in_service
        if self.mapping().year is not None:  # calendar years: year of age 1 = in-service year
            return _dt.date(start.year + age - 1, 12, 31)
        if self.mapping().age is not None:
            return None  # ages given: taken as complete years
        try:
            return start.replace(year=start.year + age)
        except ValueError:  # 29 February
            return start.replace(year=start.year + age, day=28)

    def _offer_partial(self, tag: str, ages: Any) -> None:
        """Offer to leave out the latest year of age when it has not ended yet (default: out)."""
        end = self._year_of_age_end(tag, int(ages[-1])) if len(ages) else None
        incomplete = end is not None and end > self.today
        key = (tag, int(ages[-1])) if incomplete else None
        if key != self._partial:
            self._partial = key
            self.partial_box.blockSignals(True)
            self.partial_box.setChecked(incomplete)
            self.partial_box.blockSignals(False)
        self.partial_box.setVisible(incomplete)
        if incomplete:
            self.partial_box.setText(f"Leave out year of age {int(ages[-1])} "
                                     f"(runs to {end.isoformat()}, not complete yet)")

    def cost_model(self) -> str:
        return "geometric" if self.geo_radio.isChecked() else "arithmetic"

    def _model_changed(self, *_: Any) -> None:
        fit = self.cost_fits.get(self.cost_model())
        geometric = self.cost_model() == "geometric"
        self.gradient_edit.setVisible(not geometric)
        self.cost_form.labelForField(self.gradient_edit).setVisible(not geometric)
        self.growth_edit.setVisible(geometric)
        self.cost_form.labelForField(self.growth_edit).setVisible(geometric)
        self.cost_plot.clear()
        self.cost_resid.clear()
        self._marker = None
        if fit is None:
            return
        self._propose_costs()
        p = fit.params
        c = self.currency
        n = len(fit.ages)
        if geometric:
            eq = (f"Fitted C_j = a(1 + g)^(j−1) (log-linear least squares): a = "
                  f"{money(p['first'], c)}/yr, g = {p['growth']:.2%} per year; R² "
                  f"{fit.r_squared:.3f} on money"
                  + (f", {fit.r_squared_log:.3f} on logs" if fit.r_squared_log is not None
                     else ""))
        else:
            eq = (f"Fitted C_j = a + G(j−1) (least squares): a = {money(p['first'], c)}/yr, "
                  f"G = {money(p['gradient'], c)}/yr per year of age; R² {fit.r_squared:.3f}")
        self.cost_note.setText(f"{eq}; {n} years of age, j = 1 is the first year in service. "
                               "Dots: data; line: fit; ◇: the proposed first-year cost.")

    def _propose_costs(self, *_: Any) -> None:
        fit = self.cost_fits.get(self.cost_model())
        if fit is None:
            return
        proposal = fit.operating_costs(age_now=self.age_now.value())
        self.first_edit.setValue(float(proposal.first or 0.0))
        if proposal.gradient is not None:
            self.gradient_edit.setValue(proposal.gradient)
        if proposal.growth is not None:
            self.growth_edit.setValue(proposal.growth * 100.0)
        year1 = self.age_now.value() + 1
        self.first_edit.setToolTip(f"The fitted cost of year of age {year1} "
                                   "(the first study year), currency per year")
        self.cost_form.labelForField(self.first_edit).setText(
            f"First-year cost (year of age {year1}):")
        self._draw(self.cost_plot, self.cost_resid, fit, "Year of age")

    def _move_marker(self, value: float) -> None:
        if self._marker is not None:
            with contextlib.suppress(RuntimeError):
                self._marker.setData([self.age_now.value() + 1], [value])

    def _draw(self, plot: pg.PlotWidget, resid: pg.PlotWidget, fit: TrendFit, xlabel: str
              ) -> None:
        x = np.asarray(fit.ages, dtype=float)
        y = np.asarray(fit.values, dtype=float)
        lo, hi = float(x.min()), float(x.max())
        costs = fit.quantity == "operating_costs"
        if not costs and lo <= 3.0:
            lo = 0.0  # show the fitted price P at k = 0 when the quotes start young
        if costs:
            hi = max(hi, float(self.age_now.value() + 1))
        xs = np.linspace(lo, hi + (0.0 if costs else 1.0), 60)
        plot.clear()
        plot.plot(xs, fit.fitted(xs), pen=pg.mkPen("#1f5fa8", width=2), antialias=True)
        plot.plot(x, y, pen=None, symbol="o", symbolSize=7, symbolBrush="#d9822b",
                  symbolPen=pg.mkPen("#7a4410"))
        if costs:
            year1 = float(self.age_now.value() + 1)
            self._marker = plot.plot([year1], [self.first_edit.value()], pen=None, symbol="d",
                                     symbolSize=11, symbolBrush=None,
                                     symbolPen=pg.mkPen("#1f5fa8", width=2))
        unit = f" ({self.currency})" if self.currency else ""
        per_year = "/yr" if fit.quantity == "operating_costs" else ""
        unit_y = (f" ({self.currency}{per_year})" if self.currency else
                  (" (per year)" if per_year else ""))
        plot.setLabel("left", f"{'Cost' if per_year else 'Value'}{unit_y}", color="#222")
        plot.setLabel("bottom", xlabel, color="#222")
        right = hi + (0.5 if costs else 1.5)
        plot.setXRange(lo - 0.5, right, padding=0)
        ymax = float(max(y.max(), fit.fitted(xs).max(),
                         self.first_edit.value() if costs else 0.0))
        plot.setYRange(0.0, ymax * 1.08 if ymax > 0 else 1.0, padding=0)
        resid.clear()
        r = np.asarray(fit.residuals, dtype=float)
        resid.addItem(pg.InfiniteLine(0.0, angle=0, pen=pg.mkPen("#888")))
        resid.addItem(pg.BarGraphItem(x=x, height=r, width=0.5, brush="#9bb7d4",
                                      pen=pg.mkPen("#1f5fa8")))
        resid.setLabel("left", f"Observed − fitted{unit}", color="#222")
        resid.setLabel("bottom", xlabel, color="#222")
        resid.setXRange(lo - 0.5, right, padding=0)
        bound = float(np.abs(r).max()) if r.size else 1.0
        resid.setYRange(-bound * 1.2 or -1.0, bound * 1.2 or 1.0, padding=0)

    def set_estimates(self, *, first: float | None = None, gradient: float | None = None,
                      growth: float | None = None, decline_rate: float | None = None) -> None:
        """Edit the proposed estimates as a user would (rates as fractions: 0.05 = 5 %)."""
        if first is not None:
            self.first_edit.setValue(first)
        if gradient is not None:
            self.gradient_edit.setValue(gradient)
        if growth is not None:
            self.growth_edit.setValue(growth * 100.0)
        if decline_rate is not None:
            self.decline_edit.setValue(decline_rate * 100.0)

    def current_estimates(self) -> tuple[OperatingCosts | None, MarketValues | None]:
        """The estimates the fields say now (None for a group that is unticked or unfitted)."""
        costs = None
        if self.cost_box.isEnabled() and self.cost_box.isChecked() and self.cost_fits:
            first = round(self.first_edit.value(), 2)
            if self.cost_model() == "geometric":
                costs = OperatingCosts(first=first, growth=round(self.growth_edit.value() / 100, 6))
            else:
                costs = OperatingCosts(first=first, gradient=round(self.gradient_edit.value(), 2))
        values = None
        if self.value_box.isEnabled() and self.value_box.isChecked() and self.value_fit:
            values = MarketValues(decline_rate=round(self.decline_edit.value() / 100.0, 6))
        return costs, values

    def accepted_estimates(self) -> tuple[OperatingCosts | None, MarketValues | None]:
        """The estimates saved with *Save to workbook* ((None, None) before saving)."""
        return self._accepted

    # ------------------------------------------------------------------ saving
    def save(self) -> bool:
        """Store the rows and the fits in one transaction; emit the estimates; close."""
        if self.report is None:
            self._error("Nothing checked", "Press Check on the Columns page before saving.")
            return False
        if not self.report.accepted:
            self._error("Nothing to save", f"{self.report.source}: no row was accepted.")
            return False
        tag = self.fit_asset.currentData()
        costs, values = self.current_estimates()
        fits: list[dict] = []
        if costs is not None:
            fit = self.cost_fits[self.cost_model()].to_json()
            fit["accepted"] = {"first": costs.first, "gradient": costs.gradient,
                               "growth": costs.growth, "age_now": self.age_now.value()}
            fits.append(fit)
        if values is not None and self.value_fit is not None:
            fit = self.value_fit.to_json()
            fit["accepted"] = {"decline_rate": values.decline_rate}
            fits.append(fit)
        year = self.study_year.get(tag, _dt.date.today().year)
        rows = self._rows_to_add()
        if rows is None:
            return False
        try:
            with _writer(self.workbook_path) as wb, wb.transaction():
                wb.add_history(rows, replace=self.replace_box.isChecked())
                for fit in fits:
                    wb.save_fit(tag, year, fit)
        except WorkbookInUse as exc:
            self._error("The workbook is in use",
                        f"{exc}\nClose it in the other program and press Save again; "
                        "nothing was saved and your choices are kept.")
            return False
        except (StudyError, OSError, sqlite3.Error) as exc:
            self._error("Cannot save to the workbook",
                        f"{exc}\nNothing was saved; your choices are kept.")
            return False
        self._accepted = (costs, values)
        self._set_status(f"Saved {len(rows)} rows and {len(fits)} fit(s) "
                         f"to {self.workbook_path.name}.")
        self.estimatesAccepted.emit(costs, values)
        self.accept()
        return True

    def _rows_to_add(self) -> list[HistoryRow] | None:
        """The accepted rows to store; asks when this file's rows are already in the workbook.

        None when the user cancels or the workbook cannot be read.
        """
        rows = list(self.report.accepted)
        if self.replace_box.isChecked():
            return rows
        try:
            with Workbook.open(self.workbook_path, write=False) as wb:
                have = {(h.tag, h.kind, h.age, h.amount, h.source, h.source_row)
                        for tag in {r.tag for r in rows} for h in wb.history(tag)}
        except (StudyError, OSError, sqlite3.Error) as exc:
            self._error("Cannot read the workbook", f"{exc}\nNothing was saved.")
            return None
        fresh = [r for r in rows
                 if (r.tag, r.kind, r.age, r.amount, r.source, r.source_row) not in have]
        if len(fresh) == len(rows):
            return rows
        answer = QMessageBox.question(
            self, "Already imported",
            f"{len(rows) - len(fresh)} of the {len(rows)} rows of {self.report.source} are "
            "already in the workbook (same row, asset, year of age and amount).\n\n"
            "Yes: skip those and add the others.\nNo: add every row again.\n"
            "Cancel: save nothing.",
            QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No
            | QMessageBox.StandardButton.Cancel, QMessageBox.StandardButton.Yes)
        if answer == QMessageBox.StandardButton.Cancel:
            return None
        return fresh if answer == QMessageBox.StandardButton.Yes else rows

    # ------------------------------------------------------------------ navigation
    def _next(self) -> None:
        index = self.tabs.currentIndex()
        if index == 1 and self.report is None and self.check() is None:
            return
        self.tabs.setCurrentIndex(min(2, index + 1))

    def _tab_changed(self, index: int) -> None:
        if index == 2 and self.report is None and self.frame is not None:
            self.check()
        self._update_buttons()

    def _update_buttons(self) -> None:
        index = self.tabs.currentIndex()
        self.tabs.setTabEnabled(1, self.frame is not None)
        self.tabs.setTabEnabled(2, self.report is not None)
        self.back_button.setEnabled(index > 0)
        self.next_button.setEnabled(index < 2 and (self.frame is not None))
        self.save_button.setEnabled(self.report is not None and bool(self.report.accepted))

    def _set_status(self, text: str, error: bool = False) -> None:
        self.status.setText(text)
        self.status.setStyleSheet("color: #a01010;" if error else "color: #333;")

    def _error(self, title: str, text: str) -> None:
        self._set_status(text.splitlines()[0], error=True)
        QMessageBox.warning(self, title, text)
