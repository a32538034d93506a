"""The asset editor: study settings, the defender and its challengers, year-by-year tables.

The widgets here never hold estimates of their own: they show the current
:class:`core.estimates.Study` and, when the user changes something, build the
next study and hand it to ``commit(new_study, text, merge_key)``.  A refused
entry is reported through ``report(message)`` and the field shows the last
good value again.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

from PySide6.QtCore import QAbstractTableModel, QModelIndex, QSignalBlocker, Qt
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QComboBox,
    QFormLayout,
    QGridLayout,
    QGroupBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QPushButton,
    QSpinBox,
    QTableView,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.estimates import (
    Alternative,
    Depreciation,
    ExtraCost,
    Inflation,
    MarketValues,
    OperatingCosts,
    Study,
    Tax,
)
from desktop_app.document import rename_alternative, replace_alternative
from desktop_app.reflow import Reflow
from desktop_app.validation import (
    FieldError,
    fmt_money,
    fmt_percent,
    parse_money,
    parse_number,
    parse_percent,
    parse_text,
    parse_years,
)

Commit = Callable[[Study, str, object], bool]
Report = Callable[[str], None]
ERROR_STYLE = "QLineEdit { border: 1px solid #c0392b; background: #fdecea; }"


def compact(combo: QComboBox, chars: int = 10) -> QComboBox:
    """Let a combo box shrink to a few characters so the editor fits beside the results."""
    combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
    combo.setMinimumContentsLength(chars)
    return combo


def default_depreciation(alt: Alternative, method: str = "straight_line") -> Depreciation:
    """A starting depreciation for an alternative; the defender's tax basis starts at its
    market value today (a placeholder the user is told to replace)."""
    old = alt.depreciation
    basis = old.basis if old is not None and old.basis is not None else (
        alt.price if alt.role == "defender" else None)
    age = old.age if old is not None and alt.role == "defender" else 0
    if method == "macrs":
        return Depreciation("macrs", basis=basis, macrs_class=7, age=age)
    if method == "declining_balance":
        return Depreciation("declining_balance", basis=basis, years=alt.max_life, rate=0.2,
                            age=age)
    return Depreciation("straight_line", basis=basis, years=alt.max_life, age=age)


BASIS_NOTE = ("Tax basis of the defender set to its market value today as a start: enter its "
              "original tax basis")


class LineBinding:
    """A QLineEdit shown from the study and turned back into a study on editingFinished."""

    def __init__(self, edit: QLineEdit, label: str, getter: Callable[[Study], str],
                 setter: Callable[[Study, str], Study], owner: _StudyView, merge: object) -> None:
        self.edit, self.label, self.getter, self.setter = edit, label, getter, setter
        self.owner, self.merge = owner, merge
        edit.setObjectName(f"field:{label}")
        edit.editingFinished.connect(self.finish)

    def show(self, study: Study) -> None:
        text = self.getter(study)
        if self.edit.text() != text:
            with QSignalBlocker(self.edit):
                self.edit.setText(text)
                self.edit.setCursorPosition(0)

    def finish(self) -> None:
        study = self.owner.latest()
        if study is None or self.edit.text() == self.getter(study):
            return
        try:
            new = self.setter(study, self.edit.text())
        except FieldError as exc:
            self.refuse(str(exc))
            return
        if new == study:
            self.show(study)
            return
        if self.owner.commit(new, f"Change {self.label}", self.merge):
            if self.edit.styleSheet():  # clearing an empty style sheet still re-polishes
                self.edit.setStyleSheet("")
            if self.edit.toolTip():
                self.edit.setToolTip("")
        else:
            self.refuse(None)

    def refuse(self, message: str | None) -> None:
        if message is not None:
            self.owner.report(message)
            self.edit.setToolTip(message)
        self.edit.setStyleSheet(ERROR_STYLE)
        if self.owner.latest() is not None:
            self.show(self.owner.latest())


class _StudyView(QWidget):
    """Shared plumbing: current study, commit/report callbacks, line bindings."""

    def __init__(self, commit: Commit, report: Report, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.study: Study | None = None
        self.commit = commit
        self.report = report
        self.currency = "£"
        self.bindings: list[LineBinding] = []

    def bind(self, label: str, getter: Callable[[Study], str],
             setter: Callable[[Study, str], Study], merge: object = None,
             placeholder: str = "") -> QLineEdit:
        edit = QLineEdit()
        edit.setPlaceholderText(placeholder)
        self.bindings.append(LineBinding(edit, label, getter, setter, self, merge or label))
        return edit

    def latest(self) -> Study | None:
        """The newest study this view was given (a hidden tab may hold one not yet shown)."""
        pending = getattr(self, "pending", None)
        return pending if pending is not None else self.study

    def show_bindings(self) -> None:
        if self.study is not None:
            for b in self.bindings:
                b.show(self.study)


# --------------------------------------------------------------------------- study settings
class StudySettings(_StudyView):
    """Title, MARR, study period, tax basis, inflation basis and the study year."""

    def __init__(self, commit: Commit, report: Report, set_year: Callable[[int | None], None],
                 parent: QWidget | None = None) -> None:
        super().__init__(commit, report, parent)
        self.set_year = set_year
        grid = QGridLayout(self)
        grid.setContentsMargins(6, 6, 6, 6)
        top = QFormLayout()
        top.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        top.setContentsMargins(0, 0, 0, 0)
        left_box, right_box = QWidget(), QWidget()
        left, right = QFormLayout(left_box), QFormLayout(right_box)
        for form in (left, right):
            form.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
            form.setContentsMargins(0, 0, 0, 0)
        grid.addLayout(top, 0, 0)
        self.columns = Reflow(left_box, right_box)
        grid.addWidget(self.columns, 1, 0)

        # The title runs the full width: it holds the site and the asset's whole name.
        self.title_edit = self.bind(
            "Title", lambda s: s.title,
            lambda s, t: replace(s, title=parse_text(t, "Title")))
        top.addRow("Title", self.title_edit)
        self.marr_edit = self.bind(
            "MARR", lambda s: fmt_percent(s.marr),
            lambda s, t: replace(s, marr=parse_percent(t, "MARR")))
        left.addRow("MARR (% a year)", self.marr_edit)

        period_row = QHBoxLayout()
        self.period_mode = compact(QComboBox())
        self.period_mode.addItems(["No study period", "Fixed study period"])
        self.period_mode.setObjectName("period_mode")
        self.period_years = QSpinBox()
        self.period_years.setRange(1, 100)
        self.period_years.setSuffix(" years")
        self.period_years.setObjectName("period_years")
        period_row.addWidget(self.period_mode, 1)
        period_row.addWidget(self.period_years)
        left.addRow("Study period", period_row)
        self.period_mode.currentIndexChanged.connect(self._period_changed)
        self.period_years.valueChanged.connect(self._period_changed)

        self.year_spin = QSpinBox()
        self.year_spin.setRange(1900, 2200)
        self.year_spin.setSpecialValueText("not recorded")
        self.year_spin.setObjectName("study_year")
        self.year_spin.editingFinished.connect(self._year_changed)
        left.addRow("Study year", self.year_spin)

        tax_row = QHBoxLayout()
        self.tax_mode = compact(QComboBox())
        self.tax_mode.addItems(["Before tax", "After tax"])
        self.tax_mode.setObjectName("tax_mode")
        self.tax_mode.currentIndexChanged.connect(self._tax_changed)
        tax_row.addWidget(self.tax_mode)
        right.addRow("Tax", tax_row)
        self.tax_rate = self.bind(
            "Tax rate", lambda s: fmt_percent(s.tax.rate) if s.tax else "",
            self._set_tax_rate)
        right.addRow("Tax rate (%)", self.tax_rate)
        self.at_marr = self.bind(
            "After-tax MARR", lambda s: fmt_percent(s.tax.after_tax_marr) if s.tax else "",
            self._set_at_marr)
        right.addRow("After-tax MARR (%)", self.at_marr)

        self.infl_mode = compact(QComboBox())
        self.infl_mode.addItems(["No inflation", "Constant (today's) money",
                                 "Then-current money"])
        self.infl_mode.setObjectName("inflation_mode")
        self.infl_mode.currentIndexChanged.connect(self._inflation_changed)
        right.addRow("Inflation", self.infl_mode)
        self.infl_rate = self.bind(
            "Inflation rate", lambda s: fmt_percent(s.inflation.rate) if s.inflation else "",
            self._set_infl_rate)
        right.addRow("Inflation rate (%)", self.infl_rate)
        self.year: int | None = None

    def set_study(self, study: Study | None, year: int | None) -> None:
        self.study, self.year = study, year
        self.setEnabled(study is not None)
        if study is None:
            return
        self.show_bindings()
        with QSignalBlocker(self.period_mode), QSignalBlocker(self.period_years):
            self.period_mode.setCurrentIndex(0 if study.study_period is None else 1)
            longest = study.defender.max_life + max(c.max_life for c in study.challengers)
            if self.period_years.maximum() != max(longest, 1):
                self.period_years.setMaximum(max(longest, 1))
            period = study.study_period or max(c.max_life for c in study.challengers)
            if self.period_years.value() != period:
                self.period_years.setValue(period)
            self.period_years.setEnabled(study.study_period is not None)
        with QSignalBlocker(self.tax_mode):
            self.tax_mode.setCurrentIndex(0 if study.tax is None else 1)
        self.tax_rate.setEnabled(study.tax is not None)
        self.at_marr.setEnabled(study.tax is not None)
        with QSignalBlocker(self.infl_mode):
            self.infl_mode.setCurrentIndex(
                0 if study.inflation is None else
                (1 if study.inflation.estimates == "constant" else 2))
        self.infl_rate.setEnabled(study.inflation is not None)
        with QSignalBlocker(self.year_spin):
            value = year if year is not None else self.year_spin.minimum()
            if self.year_spin.value() != value:
                self.year_spin.setValue(value)

    # -- handlers
    def _period_changed(self) -> None:
        if self.study is None:
            return
        period = None if self.period_mode.currentIndex() == 0 else self.period_years.value()
        self.period_years.setEnabled(period is not None)
        if period != self.study.study_period:
            if not self.commit(replace(self.study, study_period=period),
                               "Change study period", "study_period"):
                self.set_study(self.study, self.year)

    def _year_changed(self) -> None:
        value = self.year_spin.value()
        year = None if value == self.year_spin.minimum() else value
        if year != self.year:
            self.set_year(year)

    def _tax_changed(self) -> None:
        s = self.study
        if s is None:
            return
        if self.tax_mode.currentIndex() == 0:
            new = replace(s, tax=None)
        else:
            alts = [a if a.depreciation is not None else replace(
                a, depreciation=default_depreciation(a)) for a in s.alternatives]
            new = replace(s, tax=Tax(rate=0.25, after_tax_marr=round(s.marr * 0.75, 6)),
                          defender=alts[0], challengers=tuple(alts[1:]))
        if new != s:
            if not self.commit(new, "Change tax basis", None):
                self.set_study(s, self.year)
            elif new.tax is not None and s.defender.depreciation is None:
                self.report(BASIS_NOTE)

    def _set_tax_rate(self, s: Study, t: str) -> Study:
        rate = parse_percent(t, "Tax rate", low=0.0, low_open=False, high=99.0)
        return replace(s, tax=replace(s.tax, rate=rate))

    def _set_at_marr(self, s: Study, t: str) -> Study:
        return replace(s, tax=replace(s.tax, after_tax_marr=parse_percent(t, "After-tax MARR")))

    def _inflation_changed(self) -> None:
        s = self.study
        if s is None:
            return
        k = self.infl_mode.currentIndex()
        rate = s.inflation.rate if s.inflation is not None else 0.03
        new = replace(s, inflation=None if k == 0 else
                      Inflation(rate, "constant" if k == 1 else "then-current"))
        if new != s and not self.commit(new, "Change inflation basis", None):
            self.set_study(s, self.year)

    def _set_infl_rate(self, s: Study, t: str) -> Study:
        return replace(s, inflation=replace(s.inflation,
                                            rate=parse_percent(t, "Inflation rate")))


# --------------------------------------------------------------------------- year table
YEAR, MARKET, OPERATING, EXTRA, LABEL = range(5)
_ROOT = QModelIndex()


class YearTableModel(QAbstractTableModel):
    """Year-by-year estimates of one alternative: market value, operating cost, extra cost."""

    def __init__(self, editor: AlternativeEditor) -> None:
        super().__init__(editor)
        self.editor = editor
        self.alt: Alternative | None = None
        self.s = self.c = self.x = None
        self.labels: list[str] = []

    def set_alternative(self, alt: Alternative | None) -> None:
        same_shape = (alt is not None and self.alt is not None
                      and alt.max_life == self.alt.max_life)
        if alt == self.alt:
            return
        if not same_shape:
            self.beginResetModel()
        else:
            old = (self.s, self.c, self.x, self.labels, self.generated(MARKET),
                   self.generated(OPERATING))
        self.alt = alt
        if alt is not None:
            self.s = alt.market_value_array()
            self.c = alt.operating_cost_array()
            self.x = alt.extra_cost_array()
            self.labels = [""] * alt.max_life
            for e in alt.extra_costs:
                if 1 <= e.year <= alt.max_life and e.label:
                    k = e.year - 1
                    self.labels[k] = e.label if not self.labels[k] else f"{self.labels[k]}; {e.label}"
        if same_shape:  # keep the selection and the current cell: only the values changed
            # Announce only the cells that changed (a price edit moves the market values
            # alone): the view then repaints and re-reads those, not the whole table.
            for col, new_col, old_col in ((MARKET, self.s, old[0]), (OPERATING, self.c, old[1]),
                                          (EXTRA, self.x, old[2]), (LABEL, self.labels, old[3])):
                rows = [r for r in range(len(new_col)) if new_col[r] != old_col[r]]
                if rows:
                    self.dataChanged.emit(self.index(rows[0], col), self.index(rows[-1], col))
            if self.generated(MARKET) != old[4] or self.generated(OPERATING) != old[5]:
                self.dataChanged.emit(self.index(0, MARKET), self.index(self.rowCount() - 1, OPERATING))
        else:
            self.endResetModel()

    def rowCount(self, parent: QModelIndex = _ROOT) -> int:  # noqa: N802
        return 0 if self.alt is None or parent.isValid() else self.alt.max_life

    def columnCount(self, parent: QModelIndex = _ROOT) -> int:  # noqa: N802
        return 5

    def headerData(self, section: int, orientation: Qt.Orientation,  # noqa: N802
                   role: int = Qt.ItemDataRole.DisplayRole):
        if role != Qt.ItemDataRole.DisplayRole or orientation != Qt.Orientation.Horizontal:
            return None
        cur = self.editor.currency
        return ["Year", f"Market value ({cur})", f"Operating cost ({cur})",
                f"Extra cost ({cur})", "Extra cost label"][section]

    def generated(self, col: int) -> bool:
        if self.alt is None:
            return False
        if col == MARKET:
            return self.alt.market_values.values is None
        if col == OPERATING:
            return self.alt.operating_costs.values is None
        return False

    def data(self, index: QModelIndex, role: int = Qt.ItemDataRole.DisplayRole):
        if not index.isValid() or self.alt is None:
            return None
        r, col = index.row(), index.column()
        if role in (Qt.ItemDataRole.DisplayRole, Qt.ItemDataRole.EditRole):
            if col == YEAR:
                return str(r + 1)
            if col == LABEL:
                return self.labels[r]
            arr = {MARKET: self.s, OPERATING: self.c, EXTRA: self.x}[col]
            v = float(arr[r])
            if role == Qt.ItemDataRole.EditRole:
                return fmt_money(round(v, 2))
            return "" if col == EXTRA and v == 0 else fmt_money(round(v))
        if role == Qt.ItemDataRole.TextAlignmentRole:
            if col in (MARKET, OPERATING, EXTRA, YEAR):
                return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == Qt.ItemDataRole.ForegroundRole and self.generated(col):
            return QBrush(QColor("#555f6d"))
        if role == Qt.ItemDataRole.ToolTipRole and self.generated(col):
            what = "decline rate" if col == MARKET else "first-year cost and its rule"
            return f"Filled from the {what}; type a value to switch to year-by-year values."
        return None

    def flags(self, index: QModelIndex) -> Qt.ItemFlag:
        base = Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsSelectable
        if index.column() == YEAR:
            return base
        return base | Qt.ItemFlag.ItemIsEditable

    def setData(self, index: QModelIndex, value, role: int = Qt.ItemDataRole.EditRole) -> bool:  # noqa: N802
        if role != Qt.ItemDataRole.EditRole or self.alt is None:
            return False
        return self.editor.edit_cell(index.row(), index.column(), str(value))


# --------------------------------------------------------------------------- one alternative
class AlternativeEditor(_StudyView):
    """Form and year table of the alternative at ``position`` (0 = defender)."""

    def __init__(self, position: int, commit: Commit, report: Report,
                 parent: QWidget | None = None) -> None:
        super().__init__(commit, report, parent)
        self.position = position
        self.pending: Study | None = None
        outer = QVBoxLayout(self)
        outer.setContentsMargins(6, 6, 6, 6)

        basics = QGroupBox("Alternative")
        form = QFormLayout(basics)
        # The name runs the full width, above the two boxes: it is the longest field.
        name_row = QFormLayout()
        name_row.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        self.name_edit = self.bind("Name", lambda s: self.alt_of(s).name, self._set_name)
        name_row.addRow("Name", self.name_edit)
        outer.addLayout(name_row)
        self.price_label = QLabel("First cost")
        self.price_edit = self.bind(
            "Price", lambda s: fmt_money(self.alt_of(s).price),
            lambda s, t: self._alt(s, price=parse_money(t, self.price_name(), self.currency)))
        form.addRow(self.price_label, self.price_edit)
        self.life_edit = self.bind("Max life", lambda s: str(self.alt_of(s).max_life),
                                   self._set_life)
        form.addRow("Max life (years)", self.life_edit)
        self.dep_method = compact(QComboBox())
        self.dep_method.addItems(["None", "Straight line", "MACRS (GDS)", "Declining balance"])
        self.dep_method.currentIndexChanged.connect(self._dep_changed)
        form.addRow("Tax depreciation", self.dep_method)
        self.dep_years = self.bind(
            "Recovery period", lambda s: self._dep_text(s, "years"), self._set_dep_years)
        self.dep_years_label = QLabel("Recovery (years)")
        form.addRow(self.dep_years_label, self.dep_years)
        self.dep_basis = self.bind("Tax basis", lambda s: self._dep_text(s, "basis"),
                                   self._set_dep_basis)
        self.dep_basis_label = QLabel()
        form.addRow(self.dep_basis_label, self.dep_basis)
        self.dep_age = self.bind("Tax age", lambda s: self._dep_text(s, "age"), self._set_dep_age)
        form.addRow("Tax age (years)", self.dep_age)

        rules = QGroupBox("Generators (fill the table)")
        rform = QFormLayout(rules)
        self.mv_mode = compact(QComboBox())
        self.mv_mode.addItems(["From a decline rate", "Year by year"])
        self.mv_mode.currentIndexChanged.connect(self._mv_mode_changed)
        rform.addRow("Market values", self.mv_mode)
        self.decline_edit = self.bind(
            "Decline rate", lambda s: fmt_percent(self.alt_of(s).market_values.decline_rate)
            if self.alt_of(s).market_values.values is None else "", self._set_decline)
        rform.addRow("Decline rate (% a year)", self.decline_edit)
        self.oc_mode = compact(QComboBox())
        self.oc_mode.addItems(["Arithmetic gradient", "Geometric growth", "Year by year"])
        self.oc_mode.currentIndexChanged.connect(self._oc_mode_changed)
        rform.addRow("Operating costs", self.oc_mode)
        self.first_edit = self.bind(
            "First-year cost", lambda s: self._oc_text(s, "first"),
            lambda s, t: self._set_oc(s, first=parse_money(t, "First-year cost", self.currency)))
        self.first_label = QLabel()
        rform.addRow(self.first_label, self.first_edit)
        self.gradient_edit = self.bind(
            "Gradient", lambda s: self._oc_text(s, "gradient"),
            lambda s, t: self._set_oc(s, gradient=parse_money(t, "Gradient", self.currency)))
        self.gradient_label = QLabel()
        rform.addRow(self.gradient_label, self.gradient_edit)
        self.growth_edit = self.bind(
            "Growth", lambda s: self._oc_text(s, "growth"),
            lambda s, t: self._set_oc(s, growth=parse_percent(t, "Growth")))
        rform.addRow("Growth (% a year)", self.growth_edit)
        self.columns = Reflow(basics, rules)
        outer.addWidget(self.columns)

        self.model = YearTableModel(self)
        self.table = QTableView()
        self.table.setModel(self.model)
        self.table.verticalHeader().setVisible(False)
        self.table.verticalHeader().setDefaultSectionSize(
            self.table.fontMetrics().height() + 8)
        self.table.setAlternatingRowColors(True)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked
                                   | QAbstractItemView.EditTrigger.EditKeyPressed
                                   | QAbstractItemView.EditTrigger.AnyKeyPressed)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        header.setSectionResizeMode(YEAR, QHeaderView.ResizeMode.ResizeToContents)
        outer.addWidget(self.table, 1)
        self.hint = QLabel("Grey values come from the generators; typing a value switches that "
                           "column to year-by-year values. Costs are positive amounts.")
        self.hint.setWordWrap(True)
        self.hint.setStyleSheet("color: #555f6d;")
        outer.addWidget(self.hint)
        self.retitle()

    # -- helpers
    def alt_of(self, s: Study) -> Alternative:
        return s.alternatives[self.position]

    def price_name(self) -> str:
        return "Market value today" if self.position == 0 else "First cost"

    def retitle(self) -> None:
        cur = self.currency
        self.price_label.setText(f"{self.price_name()} ({cur})")
        self.first_label.setText(f"First-year cost ({cur})")
        self.gradient_label.setText(f"Gradient ({cur} a year)")
        self.dep_basis_label.setText(f"Tax basis ({cur})")
        self.model.headerDataChanged.emit(Qt.Orientation.Horizontal, 0, 4)

    def _alt(self, s: Study, **changes) -> Study:
        alt = self.alt_of(s)
        return replace_alternative(s, alt.name, replace(alt, **changes))

    def set_study(self, study: Study | None) -> None:
        self.study = study
        self.pending = None
        if study is None:
            return
        alt = self.alt_of(study)
        self.show_bindings()
        with QSignalBlocker(self.mv_mode):
            self.mv_mode.setCurrentIndex(0 if alt.market_values.values is None else 1)
        self.decline_edit.setEnabled(alt.market_values.values is None)
        oc = alt.operating_costs
        with QSignalBlocker(self.oc_mode):
            self.oc_mode.setCurrentIndex(2 if oc.values is not None else
                                         (1 if oc.growth is not None else 0))
        self.first_edit.setEnabled(oc.values is None)
        self.gradient_edit.setEnabled(oc.values is None and oc.growth is None)
        self.growth_edit.setEnabled(oc.values is None and oc.growth is not None)
        dep = alt.depreciation
        with QSignalBlocker(self.dep_method):
            self.dep_method.setCurrentIndex(
                0 if dep is None else ["straight_line", "macrs", "declining_balance"]
                .index(dep.method) + 1)
        self.dep_years.setEnabled(dep is not None)
        self.dep_basis.setEnabled(dep is not None)
        self.dep_basis.setPlaceholderText("" if self.position == 0 else "= first cost")
        self.dep_age.setEnabled(dep is not None and self.position == 0)
        self.dep_years_label.setText("MACRS class" if dep is not None and
                                     dep.method == "macrs" else "Recovery (years)")
        self.model.set_alternative(alt)

    # -- setters (each returns the next study or raises FieldError)
    def _set_name(self, s: Study, t: str) -> Study:
        name = parse_text(t, "Name")
        old = self.alt_of(s).name
        if name != old and any(a.name == name for a in s.alternatives):
            raise FieldError("Name", f"'{name}' is already used in this study")
        return rename_alternative(s, old, name)

    def _set_life(self, s: Study, t: str) -> Study:
        life = parse_years(t, "Max life")
        alt = self.alt_of(s)
        changes: dict = {"max_life": life}
        notes = []
        mv, oc = alt.market_values, alt.operating_costs
        if mv.values is not None and len(mv.values) < life:
            pad = (mv.values[-1],) * (life - len(mv.values))
            changes["market_values"] = MarketValues(values=tuple(mv.values) + pad)
            notes.append("market values")
        if oc.values is not None and len(oc.values) < life:
            pad = (oc.values[-1],) * (life - len(oc.values))
            changes["operating_costs"] = OperatingCosts(values=tuple(oc.values) + pad)
            notes.append("operating costs")
        dropped = [e for e in alt.extra_costs if e.year > life]
        if dropped:
            changes["extra_costs"] = tuple(e for e in alt.extra_costs if e.year <= life)
            notes.append(f"{len(dropped)} extra cost(s) after year {life} removed (undo restores)")
        if notes:
            self.report(f"Max life {life}: " + "; ".join(
                n if "removed" in n else f"new years of {n} copied from the last year; check them"
                for n in notes))
        return self._alt(s, **changes)

    def _set_decline(self, s: Study, t: str) -> Study:
        rate = parse_percent(t, "Decline rate", low=None, high=100.0)
        return self._alt(s, market_values=MarketValues(decline_rate=rate))

    def _oc_text(self, s: Study, what: str) -> str:
        oc = self.alt_of(s).operating_costs
        if oc.values is not None:
            return ""
        value = getattr(oc, what)
        if what == "growth":
            return fmt_percent(value) if value is not None else ""
        return fmt_money(value if value is not None else 0.0) if (
            what == "first" or oc.growth is None) else ""

    def _set_oc(self, s: Study, **changes) -> Study:
        oc = self.alt_of(s).operating_costs
        return self._alt(s, operating_costs=replace(oc, **changes))

    def _mv_mode_changed(self, k: int) -> None:
        s = self.latest()
        if s is None:
            return
        alt = self.alt_of(s)
        if k == 1 and alt.market_values.values is None:
            mv = MarketValues(values=tuple(round(float(v), 2) for v in alt.market_value_array()))
        elif k == 0 and alt.market_values.values is not None:
            mv = MarketValues(decline_rate=0.15)
        else:
            return
        if not self.commit(self._alt(s, market_values=mv), "Change market-value rule", None):
            self.set_study(s)

    def _oc_mode_changed(self, k: int) -> None:
        s = self.latest()
        if s is None:
            return
        alt = self.alt_of(s)
        oc = alt.operating_costs
        arr = alt.operating_cost_array()
        first = float(oc.first) if oc.first is not None else float(arr[0])
        if k == 2:
            new = OperatingCosts(values=tuple(round(float(v), 2) for v in arr))
        elif k == 1:
            new = OperatingCosts(first=first, growth=0.04)
        else:
            gradient = float(arr[-1] - arr[0]) / max(len(arr) - 1, 1) if len(arr) > 1 else 0.0
            new = OperatingCosts(first=first, gradient=round(gradient, 2))
        if new != oc and not self.commit(self._alt(s, operating_costs=new),
                                         "Change operating-cost rule", None):
            self.set_study(s)

    def _dep_text(self, s: Study, what: str) -> str:
        dep = self.alt_of(s).depreciation
        if dep is None:
            return ""
        if what == "age":
            return str(dep.age)
        if what == "basis":
            return "" if dep.basis is None else fmt_money(dep.basis)
        value = dep.macrs_class if dep.method == "macrs" else dep.years
        return "" if value is None else str(value)

    def _dep_changed(self, k: int) -> None:
        s = self.latest()
        if s is None:
            return
        alt = self.alt_of(s)
        dep = None if k == 0 else default_depreciation(
            alt, ["straight_line", "macrs", "declining_balance"][k - 1])
        if not self.commit(self._alt(s, depreciation=dep), "Change depreciation", None):
            self.set_study(s)
        elif dep is not None and self.position == 0 and (
                alt.depreciation is None or alt.depreciation.basis is None):
            self.report(BASIS_NOTE)

    def _set_dep_years(self, s: Study, t: str) -> Study:
        dep = self.alt_of(s).depreciation
        if dep is None:
            raise FieldError("Recovery period", "choose a depreciation method first")
        if dep.method == "macrs":
            value = parse_years(t, "MACRS class")
            if value not in (3, 5, 7, 10, 15, 20):
                raise FieldError("MACRS class", "must be 3, 5, 7, 10, 15 or 20 years")
            return self._alt(s, depreciation=replace(dep, macrs_class=value))
        return self._alt(s, depreciation=replace(dep, years=parse_years(t, "Recovery period")))

    def _set_dep_basis(self, s: Study, t: str) -> Study:
        dep = self.alt_of(s).depreciation
        if dep is None:
            raise FieldError("Tax basis", "choose a depreciation method first")
        if not t.strip() and self.position > 0:
            return self._alt(s, depreciation=replace(dep, basis=None))
        basis = parse_money(t, "Tax basis", self.currency, allow_negative=False)
        return self._alt(s, depreciation=replace(dep, basis=basis))

    def _set_dep_age(self, s: Study, t: str) -> Study:
        dep = self.alt_of(s).depreciation
        if dep is None:
            raise FieldError("Tax age", "choose a depreciation method first")
        return self._alt(s, depreciation=replace(dep, age=parse_years(t, "Tax age", low=0)))

    # -- table edits
    def edit_cell(self, row: int, col: int, text: str) -> bool:
        s = self.latest()
        if s is None:
            return False
        alt = self.alt_of(s)
        year = row + 1
        try:
            if col == MARKET:
                value = parse_money(text, f"Market value, year {year}", self.currency)
                values = [round(float(v), 2) for v in alt.market_value_array()]
                values[row] = value
                new = self._alt(s, market_values=MarketValues(values=tuple(values)))
            elif col == OPERATING:
                value = parse_money(text, f"Operating cost, year {year}", self.currency)
                values = [round(float(v), 2) for v in alt.operating_cost_array()]
                values[row] = value
                new = self._alt(s, operating_costs=OperatingCosts(values=tuple(values)))
            elif col in (EXTRA, LABEL):
                same = [e for e in alt.extra_costs if e.year == year]
                others = tuple(e for e in alt.extra_costs if e.year != year)
                label = " ".join(e.label for e in same if e.label)
                amount = sum(e.amount for e in same)
                if col == EXTRA:
                    amount = (0.0 if not text.strip() else
                              parse_money(text, f"Extra cost, year {year}", self.currency))
                else:
                    label = text.strip()
                extra = () if amount == 0 and not label else (ExtraCost(year, amount, label),)
                new = self._alt(s, extra_costs=tuple(sorted(others + extra,
                                                            key=lambda e: e.year)))
            else:
                return False
        except FieldError as exc:
            self.report(str(exc))
            return False
        if new == s:
            return True
        return self.commit(new, f"Edit year {year}", ("cell", self.position, row, col))


# --------------------------------------------------------------------------- the study editor
class StudyEditor(QWidget):
    """Study settings above a tab per alternative (defender first), with add/remove challenger."""

    def __init__(self, commit: Commit, report: Report, set_year: Callable[[int | None], None],
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.commit, self.report = commit, report
        self.study: Study | None = None
        self.currency = "£"
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        box = QGroupBox("Study")
        inner = QVBoxLayout(box)
        inner.setContentsMargins(2, 2, 2, 2)
        self.settings = StudySettings(commit, report, set_year)
        inner.addWidget(self.settings)
        layout.addWidget(box)
        self.notice = QLabel("")
        self.notice.setObjectName("editor_notice")
        self.notice.setWordWrap(True)
        self.notice.setStyleSheet("color: #9b2c1f; font-weight: bold; padding: 2px 4px;")
        self.notice.hide()
        layout.addWidget(self.notice)
        # Two pages: the alternatives (a tab each) and the uncertainty of their estimates.
        self.pages = QTabWidget()
        self.pages.setObjectName("editor_pages")
        alternatives = QWidget()
        alt_layout = QVBoxLayout(alternatives)
        alt_layout.setContentsMargins(0, 4, 0, 0)
        bar = QHBoxLayout()
        self.add_button = QPushButton("Add challenger")
        self.add_button.clicked.connect(self.add_challenger)
        self.remove_button = QPushButton("Remove challenger")
        self.remove_button.clicked.connect(self.remove_challenger)
        bar.addStretch(1)
        bar.addWidget(self.add_button)
        bar.addWidget(self.remove_button)
        alt_layout.addLayout(bar)
        self.tabs = QTabWidget()
        self.tabs.setElideMode(Qt.TextElideMode.ElideRight)
        self.tabs.setUsesScrollButtons(True)
        self.tabs.currentChanged.connect(self._tab_opened)
        alt_layout.addWidget(self.tabs, 1)
        from desktop_app.uncertainty_editor import UncertaintyEditor  # it builds on this module

        self.uncertainty = UncertaintyEditor(commit, report)
        self.pages.addTab(alternatives, "Defender and challengers")
        self.pages.addTab(self.uncertainty, "Uncertainty")
        self.pages.setTabToolTip(1, "Distributions of uncertain estimates, for the Risk tab")
        self.pages.currentChanged.connect(self._page_opened)
        layout.addWidget(self.pages, 1)
        self.placeholder = QWidget()
        pl = QVBoxLayout(self.placeholder)
        note = QLabel("This asset has no study yet.")
        note.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.start_button = QPushButton("Start this year's study")
        self.start_button.setToolTip("Begin from default estimates (Asset ▸ Start or restudy "
                                     "this year); replace them with this asset's own")
        pl.addStretch(1)
        pl.addWidget(note)
        pl.addWidget(self.start_button, 0, Qt.AlignmentFlag.AlignCenter)
        pl.addStretch(2)
        layout.addWidget(self.placeholder, 1)
        self.placeholder.hide()

    def clear_errors(self) -> None:
        """Forget refusals shown for the previous asset (red fields, the inline notice)."""
        self.show_notice("")
        for view in [self.settings, *self.editors(), self.uncertainty]:
            for b in view.bindings:
                b.edit.setStyleSheet("")
                b.edit.setToolTip("")

    def show_notice(self, message: str) -> None:
        """The last refusal or note, shown inline above the alternatives."""
        self.notice.setText(message)
        self.notice.setVisible(bool(message))

    def editors(self) -> list[AlternativeEditor]:
        return [self.tabs.widget(i) for i in range(self.tabs.count())]

    def set_currency(self, currency: str) -> None:
        self.currency = currency
        self.settings.currency = currency
        for ed in self.editors():
            ed.currency = currency
            ed.retitle()
        self.uncertainty.currency = currency

    def set_study(self, study: Study | None, year: int | None) -> None:
        self.study = study
        self.settings.set_study(study, year)
        self.pages.setVisible(study is not None)
        self.placeholder.setVisible(study is None)
        if self.pages.currentWidget() is self.uncertainty:
            self.uncertainty.set_study(study)
        else:
            self.uncertainty.pending = study  # shown when its page is opened
        self.add_button.setEnabled(study is not None)
        if study is None:
            self._update_buttons()
            return
        alts = study.alternatives
        while self.tabs.count() > len(alts):
            w = self.tabs.widget(self.tabs.count() - 1)
            self.tabs.removeTab(self.tabs.count() - 1)
            w.deleteLater()
        while self.tabs.count() < len(alts):
            ed = AlternativeEditor(self.tabs.count(), self.commit, self.report)
            ed.currency = self.currency
            ed.retitle()
            self.tabs.addTab(ed, "")
        current = self.tabs.currentIndex()
        for i, alt in enumerate(alts):
            text = ("Defender: " if i == 0 else "") + alt.name
            if self.tabs.tabText(i) != text:
                self.tabs.setTabText(i, text)
                self.tabs.setTabToolTip(i, text)  # a narrow editor elides the tab text
            ed = self.tabs.widget(i)
            if i == current:
                ed.set_study(study)
            else:
                ed.pending = study  # shown when its tab is opened
        self._update_buttons()

    def _page_opened(self, _index: int) -> None:
        ed = self.uncertainty
        if self.pages.currentWidget() is ed and ed.pending is not None:
            study, ed.pending = ed.pending, None
            ed.set_study(study)

    def _tab_opened(self, index: int) -> None:
        ed = self.tabs.widget(index)
        if ed is not None and getattr(ed, "pending", None) is not None:
            study, ed.pending = ed.pending, None
            ed.set_study(study)
        self._update_buttons()

    def _update_buttons(self) -> None:
        s = self.study
        self.remove_button.setEnabled(s is not None and self.tabs.currentIndex() > 0
                                      and len(s.challengers) > 1)

    def add_challenger(self) -> None:
        s = self.study
        if s is None:
            return
        names = {a.name for a in s.alternatives}
        n = len(s.challengers) + 1
        while f"Challenger {n}" in names:
            n += 1
        base = s.challengers[-1]
        new_alt = replace(base, name=f"Challenger {n}", extra_costs=())
        if self.commit(replace(s, challengers=(*s.challengers, new_alt)), "Add challenger", None):
            self.tabs.setCurrentIndex(self.tabs.count() - 1)

    def remove_challenger(self, position: int | None = None) -> None:
        s = self.study
        if s is None:
            return
        position = self.tabs.currentIndex() if position is None else position
        if position <= 0:
            self.report("Remove challenger: the defender cannot be removed")
            return
        if len(s.challengers) <= 1:
            self.report("Remove challenger: a study needs at least one challenger")
            return
        name = s.alternatives[position].name
        rest = tuple(c for c in s.challengers if c.name != name)
        unc = s.uncertainty
        if unc is not None:
            inputs = tuple((a, d) for a, d in unc.inputs if not a.startswith(name + "."))
            unc = replace(unc, inputs=inputs) if inputs else None
        self.commit(replace(s, challengers=rest, uncertainty=unc), f"Remove {name}", None)


def check_failed(exc: StudyError) -> str:
    from desktop_app.validation import friendly

    return friendly(exc)


__all__ = ["StudyEditor", "AlternativeEditor", "StudySettings", "YearTableModel",
           "check_failed", "parse_number"]
