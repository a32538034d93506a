"""Editing a workbook's fleet in the window: new workbook, sites, assets, candidates, asset lists.

Every register edit is written to the workbook at once, in one transaction
(``core.workbook``), and pushed on the window's QUndoStack as a
:class:`WorkbookCommand` whose undo writes the inverse (again one transaction)
and whose redo writes it again. The dialogs keep what was typed when an entry
is refused: the message names the field and the dialog stays open. No
economics here: studies, results and the which-assets-change list come from core.
"""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as _dt
import sqlite3
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush, QColor, QUndoCommand
from PySide6.QtWidgets import (
    QButtonGroup,
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QGroupBox,
    QHBoxLayout,
    QInputDialog,
    QLabel,
    QLineEdit,
    QListWidget,
    QMessageBox,
    QPushButton,
    QRadioButton,
    QSpinBox,
    QSplitter,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.estimates import Alternative, MarketValues, OperatingCosts, Study
from core.workbook import Asset, Site, Workbook
from core.workbook.assetlist import (
    ASSET_FIELDS,
    AssetImportPlan,
    AssetMapping,
    apply_asset_import,
    parse_depreciation_text,
    plan_asset_import,
)
from core.workbook.fleetedit import (
    apply_candidate,
    candidate_changes,
    catalogue_challengers,
    offered,
    remove_candidate,
    result_snapshot,
)
from core.workbook.model import _check_asset, depreciation_to_dict
from desktop_app import workbook_bridge
from desktop_app.document import default_study

NONE = "(none)"
FIELD_LABELS = {"tag": "Tag", "description": "Description", "site": "Site",
                "asset_class": "Asset class", "in_service": "In-service date",
                "original_cost": "Original cost", "depreciation": "Tax depreciation"}


def _error_label() -> QLabel:
    label = QLabel("")
    label.setObjectName("error")
    label.setWordWrap(True)
    label.setStyleSheet("color: #b03a2e;")
    return label


@contextlib.contextmanager
def writing(path: str | Path) -> Iterator[Workbook]:
    with Workbook.open(path, write=True) as wb:
        yield wb


class WorkbookCommand(QUndoCommand):
    """A register edit already written; undo and redo write again (one transaction each)."""

    def __init__(self, actions: FleetActions, text: str, redo: Callable[[], None],
                 undo: Callable[[], None]) -> None:
        super().__init__(text)
        self.actions, self._redo, self._undo = actions, redo, undo
        self._done = True

    def redo(self) -> None:
        if self._done:  # the first redo happened before the push (refusals stay off the stack)
            self._done = False
            return
        self.actions.run(self.text(), self._redo)

    def undo(self) -> None:
        self.actions.run(f"Undo {self.text()}", self._undo)


# --------------------------------------------------------------------------- dialogs
class NewWorkbookDialog(QDialog):
    """File > New workbook: where, the organisation, its currency and the first study year."""

    def __init__(self, parent: QWidget | None = None, currency: str = "",
                 folder: str | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("New workbook")
        self.created: Path | None = None
        form = QFormLayout()
        self.organisation = QLineEdit()
        self.organisation.setPlaceholderText("e.g. Harrowgate Fabrication Ltd.")
        self.currency = QLineEdit(currency)
        self.currency.setPlaceholderText("GBP, EUR, $ …")
        self.first_year = QSpinBox()
        self.first_year.setRange(1900, 2200)
        self.first_year.setValue(_dt.date.today().year)
        self.path = QLineEdit(str(Path(folder or Path.home()) / "fleet.tenure"))
        browse = QPushButton("Browse…")
        browse.clicked.connect(self.browse)
        row = QHBoxLayout()
        row.addWidget(self.path, 1)
        row.addWidget(browse)
        form.addRow("Organisation:", self.organisation)
        form.addRow("Currency:", self.currency)
        form.addRow("First study year:", self.first_year)
        form.addRow("File:", row)
        self.error = _error_label()
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.create_button = buttons.addButton("Create", QDialogButtonBox.ButtonRole.AcceptRole)
        buttons.accepted.connect(self.create)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        layout.addWidget(self.error)
        layout.addWidget(buttons)

    def browse(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "New workbook", self.path.text(),
                                              "Workbooks (*.tenure)")
        if path:
            self.path.setText(path if path.endswith(".tenure") else path + ".tenure")

    def create(self) -> bool:
        path = Path(self.path.text().strip()).expanduser()
        if path.suffix.lower() != ".tenure":
            path = path.with_name(path.name + ".tenure")
        try:
            if not path.parent.is_dir():
                raise StudyError("File", f"the folder {path.parent} does not exist")
            Workbook.create(path, company=self.organisation.text().strip(),
                            currency=self.currency.text().strip(),
                            first_year=self.first_year.value()).close()
        except (StudyError, OSError, sqlite3.Error) as exc:
            self.error.setText(str(exc))  # everything typed stays
            return False
        self.created = path
        self.accept()
        return True


class AssetDialog(QDialog):
    """Add or edit one asset of the register (and, for a new one, where its study comes from)."""

    def __init__(self, wb: Workbook, asset: Asset | None = None, site: str = "",
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Edit asset" if asset else "Add asset")
        self.editing = asset
        self.study: Study | None = None
        form = QFormLayout()
        self.tag = QLineEdit(asset.tag if asset else "")
        self.description = QLineEdit(asset.description if asset else "")
        self.site = QComboBox()
        self.site.setEditable(True)
        self.site.addItems([s.name for s in wb.sites()])
        self.site.setCurrentText(asset.site if asset else site)
        self.asset_class = QComboBox()
        self.asset_class.setEditable(True)
        classes = sorted({a.asset_class for a in wb.assets() if a.asset_class}
                         | {c.asset_class for c in wb.candidates() if c.asset_class})
        self.asset_class.addItems(classes)
        self.asset_class.setCurrentText(asset.asset_class if asset else "")
        self.in_service = QLineEdit(asset.in_service.isoformat()
                                    if asset and asset.in_service else "")
        self.in_service.setPlaceholderText("YYYY-MM-DD (optional)")
        self.original_cost = QLineEdit("" if not asset or asset.original_cost is None
                                       else _text(asset.original_cost))
        self.original_cost.setPlaceholderText("tax basis (optional)")
        self.depreciation = QLineEdit(_dep_text(asset.depreciation) if asset else "")
        self.depreciation.setPlaceholderText("MACRS 7, SL 10, DB 8 25% or none")
        form.addRow("Tag:", self.tag)
        form.addRow("Description:", self.description)
        form.addRow("Site:", self.site)
        form.addRow("Asset class:", self.asset_class)
        form.addRow("In service:", self.in_service)
        form.addRow("Original cost:", self.original_cost)
        form.addRow("Tax depreciation:", self.depreciation)
        layout = QVBoxLayout(self)
        layout.addLayout(form)
        self.blank = QRadioButton("Start from a blank study with sensible defaults")
        self.from_file = QRadioButton("Take the study from a study file:")
        self.no_study = QRadioButton("No study yet")
        self.blank.setChecked(True)
        self.study_file = QLineEdit()
        self.study_title = QComboBox()
        browse = QPushButton("Browse…")
        browse.clicked.connect(self.browse)
        self.study_file.editingFinished.connect(self._read_titles)
        if asset is None:
            box = QGroupBox("Study")
            bl = QVBoxLayout(box)
            group = QButtonGroup(self)
            for b in (self.blank, self.from_file, self.no_study):
                group.addButton(b)
            bl.addWidget(self.blank)
            bl.addWidget(self.from_file)
            row = QHBoxLayout()
            row.addWidget(self.study_file, 1)
            row.addWidget(browse)
            bl.addLayout(row)
            bl.addWidget(self.study_title)
            bl.addWidget(self.no_study)
            layout.addWidget(box)
        self.error = _error_label()
        layout.addWidget(self.error)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.check)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.result_asset: Asset | None = None

    def browse(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Study file", "", "Study files (*.json)")
        if path:
            self.study_file.setText(path)
            self.from_file.setChecked(True)
            self._read_titles()

    def _read_titles(self) -> None:
        from core.studyfile import load_study_file

        self.study_title.clear()
        try:
            self._studies = load_study_file(self.study_file.text().strip())
        except StudyError as exc:
            self.error.setText(str(exc))
            return
        self.study_title.addItems([s.title for s in self._studies])

    def asset(self) -> Asset:
        """The asset as typed (raises StudyError naming the field)."""
        when = None
        text = self.in_service.text().strip()
        if text:
            try:
                when = _dt.date.fromisoformat(text)
            except ValueError:
                raise StudyError("In service", f"'{text}' is not a date YYYY-MM-DD") from None
        cost = None
        text = self.original_cost.text().strip().replace(",", "")
        if text:
            try:
                cost = float(text)
            except ValueError:
                raise StudyError("Original cost", f"'{text}' is not a number") from None
        try:
            dep = parse_depreciation_text(self.depreciation.text())
        except ValueError as exc:
            raise StudyError("Tax depreciation", str(exc)) from None
        base = self.editing or Asset("", "", "")
        asset = dataclasses.replace(
            base, tag=self.tag.text().strip(), description=self.description.text().strip(),
            site=" ".join(self.site.currentText().split()),
            asset_class=self.asset_class.currentText().strip(), in_service=when,
            original_cost=cost, depreciation=dep)
        try:
            _check_asset(asset)
        except StudyError as exc:
            raise StudyError(exc.path.capitalize(), exc.message) from None
        return asset

    def chosen_study(self, asset: Asset, marr: float, candidates: list[Alternative]) -> Study | None:
        if self.editing is not None or self.no_study.isChecked():
            return None
        if self.from_file.isChecked():
            studies = getattr(self, "_studies", None)
            if not studies:
                raise StudyError("Study file", "choose a study file that can be read")
            return studies[max(0, self.study_title.currentIndex())]
        return blank_study(asset, marr, candidates)

    def check(self) -> None:
        try:
            self.result_asset = self.asset()
        except StudyError as exc:
            self.error.setText(str(exc))
            return
        self.accept()


def blank_study(asset: Asset, marr: float, candidates: list[Alternative]) -> Study:
    """A new asset's first study: the defaults, named for the asset, with its class's candidates."""
    title = f"{asset.site} — {asset.tag} {asset.description}".rstrip()
    study = default_study(title, marr)
    name = asset.description or asset.tag
    defender = dataclasses.replace(study.defender, name=f"{name} (in place)")
    return dataclasses.replace(study, defender=defender,
                               challengers=tuple(candidates) or study.challengers)


def _dep_text(dep: Any) -> str:
    if dep is None:
        return ""
    d = depreciation_to_dict(dep)
    if d["method"] == "macrs":
        return f"MACRS {d['class']}"
    if d["method"] == "straight_line":
        return f"SL {d['years']}"
    return f"DB {d['years']} {_text(d['rate'] * 100)}%"


class RetireDialog(QDialog):
    def __init__(self, tag: str, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle(f"Retire {tag}")
        form = QFormLayout(self)
        self.when = QLineEdit(_dt.date.today().isoformat())
        self.reason = QLineEdit()
        self.reason.setPlaceholderText("sold, scrapped, replaced by …")
        form.addRow("Retired on:", self.when)
        form.addRow("Reason:", self.reason)
        form.addRow(QLabel("A retired asset keeps its studies, memos and cost history, "
                           "read only."))
        self.error = _error_label()
        form.addRow(self.error)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.check)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)

    def values(self) -> tuple[_dt.date, str]:
        try:
            when = _dt.date.fromisoformat(self.when.text().strip())
        except ValueError:
            raise StudyError("Retired on", f"'{self.when.text()}' is not a date YYYY-MM-DD") \
                from None
        if not self.reason.text().strip():
            raise StudyError("Reason", "say why the asset is retired")
        return when, self.reason.text().strip()

    def check(self) -> None:
        try:
            self.values()
        except StudyError as exc:
            self.error.setText(str(exc))
            return
        self.accept()


class CatalogueDialog(QDialog):
    """The challenger candidates per asset class; an edit lists the studies it changes first."""

    def __init__(self, actions: FleetActions, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.actions = actions
        self.setWindowTitle("Candidate catalogue")
        self.resize(980, 560)
        self.listing = QListWidget()
        self.listing.currentRowChanged.connect(self._show)
        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        ll.addWidget(QLabel("Candidates by asset class (each offered to every asset of its "
                            "class):"))
        ll.addWidget(self.listing, 1)
        row = QHBoxLayout()
        self.new_button = QPushButton("New")
        self.new_button.clicked.connect(self.new)
        self.take_button = QPushButton("From this study")
        self.take_button.setToolTip("Start from a challenger of the selected asset's study")
        self.take_button.clicked.connect(self.take_from_study)
        self.remove_button = QPushButton("Remove")
        self.remove_button.clicked.connect(self.remove)
        for b in (self.new_button, self.take_button, self.remove_button):
            row.addWidget(b)
        ll.addLayout(row)
        right = QWidget()
        form = QFormLayout(right)
        self.name = QLineEdit()
        self.asset_class = QComboBox()
        self.asset_class.setEditable(True)
        self.first_cost = QLineEdit()
        self.max_life = QLineEdit()
        self.decline = QLineEdit()
        self.op_first = QLineEdit()
        self.op_gradient = QLineEdit()
        self.op_growth = QLineEdit()
        form.addRow("Name:", self.name)
        form.addRow("Asset class:", self.asset_class)
        money = actions.window.prefs.currency
        unit = f" ({money})" if money else ""
        form.addRow(f"First cost{unit}:", self.first_cost)
        form.addRow("Max life (years):", self.max_life)
        form.addRow("Market value decline (% a year):", self.decline)
        form.addRow(f"Operating cost, first year{unit}:", self.op_first)
        form.addRow(f"… arithmetic gradient{unit.replace(')', ' a year)')}:", self.op_gradient)
        form.addRow("… or geometric growth (% a year):", self.op_growth)
        self.preview_button = QPushButton("Which assets change?")
        self.preview_button.clicked.connect(self.preview)
        self.apply_button = QPushButton("Apply")
        self.apply_button.clicked.connect(self.apply)
        self.offer_button = QPushButton("Add to this asset's study")
        self.offer_button.clicked.connect(self.offer)
        buttons = QHBoxLayout()
        for b in (self.preview_button, self.apply_button, self.offer_button):
            buttons.addWidget(b)
        form.addRow(buttons)
        self.changes = QListWidget()
        form.addRow("Studies this edit changes:", self.changes)
        self.error = _error_label()
        form.addRow(self.error)
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(right)
        split.setSizes([380, 600])
        close = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        close.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addWidget(split, 1)
        layout.addWidget(close)
        self._editing: str | None = None
        self._extra: Alternative | None = None
        self.refresh()

    def refresh(self, select: str | None = None) -> None:
        with Workbook.open(self.actions.path) as wb:
            self.candidates = sorted(wb.candidates(), key=lambda c: (c.asset_class, c.name))
            classes = sorted({c.asset_class for c in self.candidates if c.asset_class}
                             | {a.asset_class for a in wb.assets() if a.asset_class})
        self.asset_class.clear()
        self.asset_class.addItems(classes)
        self.listing.clear()
        for c in self.candidates:
            self.listing.addItem(f"{c.asset_class or '(no class)'}: {c.name} — "
                                 f"{len(c.tags)} linked")
        names = [c.name for c in self.candidates]
        if select in names:
            self.listing.setCurrentRow(names.index(select))
        elif names:
            self.listing.setCurrentRow(0)

    def _show(self, row: int) -> None:
        if not 0 <= row < len(self.candidates):
            return
        c = self.candidates[row]
        self._editing = c.name
        self.fill(c.alternative, c.asset_class)

    def fill(self, alt: Alternative, asset_class: str) -> None:
        self._extra = alt
        self.name.setText(alt.name)
        self.asset_class.setCurrentText(asset_class)
        self.first_cost.setText(_text(alt.price))
        self.max_life.setText(str(alt.max_life))
        mv = alt.market_values
        self.decline.setText("" if mv.decline_rate is None else _text(mv.decline_rate * 100))
        self.decline.setEnabled(mv.values is None)
        oc = alt.operating_costs
        self.op_first.setText("" if oc.first is None else _text(oc.first))
        self.op_gradient.setText("" if oc.gradient is None else _text(oc.gradient))
        self.op_growth.setText("" if oc.growth is None else _text(oc.growth * 100))
        for w in (self.op_first, self.op_gradient, self.op_growth):
            w.setEnabled(oc.values is None)
        self.changes.clear()
        self.error.setText("")

    def new(self) -> None:
        self._editing = None
        self.fill(Alternative("New candidate", "challenger", 50000.0, 10,
                              MarketValues(decline_rate=0.15),
                              OperatingCosts(first=5000.0, gradient=400.0)),
                  self.asset_class.currentText())

    def take_from_study(self) -> None:
        entry = self.actions.window.current_entry()
        if entry is None or entry.study is None or not entry.study.challengers:
            self.error.setText("Select an asset whose study has a challenger first.")
            return
        names = [c.name for c in entry.study.challengers]
        name, ok = QInputDialog.getItem(self, "From this study", "Challenger:", names, 0, False)
        if not ok:
            return
        alt = next(c for c in entry.study.challengers if c.name == name)
        self._editing = None
        with Workbook.open(self.actions.path) as wb:
            cls = wb.asset(entry.key).asset_class
        self.fill(alt, cls)

    def alternative(self) -> Alternative:
        """The candidate as typed (raises StudyError naming the field)."""
        base = self._extra or Alternative("", "challenger", 0.0, 1)

        def number(edit: QLineEdit, field: str, blank_ok: bool = False) -> float | None:
            text = edit.text().strip().replace(",", "")
            if not text and blank_ok:
                return None
            try:
                return float(text)
            except ValueError:
                raise StudyError(field, f"'{edit.text()}' is not a number") from None

        life_text = self.max_life.text().strip()
        if not life_text.isdigit() or int(life_text) < 1:
            raise StudyError("Max life", "must be a whole number of years ≥ 1")
        life = int(life_text)
        mv = base.market_values
        if mv.values is None:
            mv = MarketValues(decline_rate=number(self.decline, "Decline rate") / 100.0)
        elif len(mv.values) < life:
            raise StudyError("Max life", f"the market values list {len(mv.values)} years; "
                                         "edit them in the study")
        else:
            mv = MarketValues(values=mv.values[:life])
        oc = base.operating_costs
        if oc.values is None:
            gradient = number(self.op_gradient, "Gradient", True)
            growth = number(self.op_growth, "Growth", True)
            growth = None if growth is None else growth / 100.0
            if gradient is not None and growth is not None:
                raise StudyError("Growth", "give a gradient or a growth rate, not both")
            oc = OperatingCosts(first=number(self.op_first, "Operating cost"),
                                gradient=gradient, growth=growth)
        extra = tuple(x for x in base.extra_costs if x.year <= life)
        alt = dataclasses.replace(base, name=self.name.text().strip(), role="challenger",
                                  price=number(self.first_cost, "First cost"), max_life=life,
                                  market_values=mv, operating_costs=oc, extra_costs=extra)
        if not alt.name:
            raise StudyError("Name", "must not be empty")
        from core.workbook.fleetedit import _check_candidate

        try:
            return _check_candidate(alt, "candidate")
        except StudyError as exc:
            raise StudyError("Candidate", exc.message) from None

    def preview(self) -> list[Any] | None:
        self.changes.clear()
        try:
            alt = self.alternative()
        except StudyError as exc:
            self.error.setText(str(exc))
            return None
        with Workbook.open(self.actions.path) as wb:
            changes = candidate_changes(wb, self._editing or alt.name, alt)
        for ch in changes:
            self.changes.addItem(ch.describe())
        if not changes:
            self.changes.addItem("No stored study changes; the candidate is offered to every "
                                 f"asset of class '{self.asset_class.currentText()}'.")
        self.error.setText("")
        return changes

    def apply(self) -> bool:
        changes = self.preview()
        if changes is None:
            return False
        alt = self.alternative()
        ok = self.actions.apply_candidate(alt, self.asset_class.currentText().strip(),
                                          self._editing)
        if ok:
            self.refresh(alt.name)
            self._editing = alt.name
        return ok

    def remove(self) -> None:
        if self._editing is None:
            return
        if self.actions.remove_candidate(self._editing):
            self.refresh()

    def offer(self) -> bool:
        try:
            alt = self.alternative()
        except StudyError as exc:
            self.error.setText(str(exc))
            return False
        return self.actions.offer_to_current(alt)


class AssetListDialog(QDialog):
    """Import an equipment list: file, column mapping, preview of every row, then import."""

    def __init__(self, actions: FleetActions, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.actions = actions
        self.setWindowTitle("Import asset list")
        self.resize(1000, 640)
        self.table = None
        self.plan: AssetImportPlan | None = None
        self.path = QLineEdit()
        browse = QPushButton("Browse…")
        browse.clicked.connect(self.browse)
        row = QHBoxLayout()
        row.addWidget(QLabel("File:"))
        row.addWidget(self.path, 1)
        row.addWidget(browse)
        self.combos: dict[str, QComboBox] = {}
        mapping = QGroupBox("Columns")
        form = QFormLayout(mapping)
        for field in ASSET_FIELDS:
            combo = QComboBox()
            combo.currentIndexChanged.connect(lambda _i: self._stale())
            self.combos[field] = combo
            form.addRow(FIELD_LABELS[field] + ":", combo)
        self.dayfirst = QCheckBox("Dates are day first (31/03/2020)")
        self.update_existing = QCheckBox("Also apply the changes to existing assets")
        form.addRow(self.dayfirst)
        form.addRow(self.update_existing)
        self.preview_list = QListWidget()
        self.summary = QLabel("")
        self.summary.setWordWrap(True)
        self.error = _error_label()
        self.preview_button = QPushButton("Preview")
        self.preview_button.clicked.connect(self.preview)
        self.import_button = QPushButton("Import")
        self.import_button.clicked.connect(self.do_import)
        self.import_button.setEnabled(False)
        right = QVBoxLayout()
        right.addWidget(QLabel("What the import does (new assets, changes to existing ones, "
                               "every rejected row):"))
        right.addWidget(self.preview_list, 1)
        right.addWidget(self.summary)
        body = QHBoxLayout()
        body.addWidget(mapping)
        body.addLayout(right, 1)
        buttons = QHBoxLayout()
        buttons.addStretch(1)
        buttons.addWidget(self.preview_button)
        buttons.addWidget(self.import_button)
        close = QPushButton("Close")
        close.clicked.connect(self.reject)
        buttons.addWidget(close)
        layout = QVBoxLayout(self)
        layout.addLayout(row)
        layout.addLayout(body, 1)
        layout.addWidget(self.error)
        layout.addLayout(buttons)

    def browse(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Asset list", "",
                                              "Tables (*.csv *.xlsx);;All files (*)")
        if path:
            self.load_file(path)

    def load_file(self, path: str | Path) -> bool:
        from core.tables import read_table

        self.path.setText(str(path))
        try:
            self.table = read_table(path)
        except StudyError as exc:
            self.error.setText(str(exc))
            return False
        columns = list(self.table.columns)
        guess = AssetMapping.guess(columns)
        for field, combo in self.combos.items():
            combo.blockSignals(True)
            combo.clear()
            combo.addItem(NONE, None)
            for c in columns:
                combo.addItem(c, c)
            pick = getattr(guess, field)
            combo.setCurrentIndex(combo.findData(pick) if pick else 0)
            combo.blockSignals(False)
        self.error.setText("")
        self._stale()
        return True

    def set_column(self, field: str, column: str | None) -> None:
        combo = self.combos[field]
        combo.setCurrentIndex(combo.findData(column) if column else 0)

    def mapping(self) -> AssetMapping:
        return AssetMapping(**{f: c.currentData() for f, c in self.combos.items()},
                            dayfirst=self.dayfirst.isChecked())

    def _stale(self) -> None:
        self.plan = None
        self.import_button.setEnabled(False)

    def preview(self) -> AssetImportPlan | None:
        self.preview_list.clear()
        if self.table is None:
            self.error.setText("Choose a file first.")
            return None
        try:
            with Workbook.open(self.actions.path) as wb:
                existing = {a.tag: a for a in wb.assets()}
            plan = plan_asset_import(self.table, self.mapping(), existing,
                                     Path(self.path.text()).name)
        except StudyError as exc:
            self.error.setText(str(exc))
            return None
        self.plan = plan
        for line in plan.lines():
            self.preview_list.addItem(line.split(": ", 1)[1])
        red = QBrush(QColor("#b03a2e"))
        for i in range(len(plan.lines()) - len(plan.rejected), len(plan.lines())):
            self.preview_list.item(i).setForeground(red)
        self.summary.setText(plan.summary())
        self.error.setText("")
        self.import_button.setEnabled(bool(plan.new or plan.changed))
        return plan

    def do_import(self) -> bool:
        plan = self.preview()  # read again: the register may have changed
        if plan is None:
            return False
        ok = self.actions.import_assets(plan, self.update_existing.isChecked())
        if ok:
            self.accept()
        return ok


# --------------------------------------------------------------------------- controller
class FleetActions:
    """The window's fleet menu entries and the register edits behind them."""

    def __init__(self, window: Any) -> None:
        self.window = window

    @property
    def path(self) -> str:
        return str(self.window.doc.path)

    def is_workbook(self) -> bool:
        return self.window.doc.kind == "workbook" and self.window.doc.path is not None

    # ---------------------------------------------------------------- plumbing
    def run(self, what: str, fn: Callable[[], None]) -> bool:
        """Write (one transaction inside ``fn``), then bring the register in line."""
        try:
            fn()
        except (StudyError, OSError, sqlite3.Error) as exc:
            message = str(exc)
            self.window.report(f"{what}: {message}")
            QMessageBox.warning(self.window, "Tenure", f"{what}: nothing was changed.\n\n"
                                                       f"{message}")
            return False
        return True

    def edit(self, text: str, redo: Callable[[], None], undo: Callable[[], None],
             select: str | None = None) -> bool:
        if not self.run(text, redo):
            return False
        self.window.undo_stack.push(WorkbookCommand(self, text, redo, undo))
        if select is not None:
            self.window.select_asset(select)
        self.window.report(text)
        return True

    def _sync(self, renamed: dict[str, str] | None = None, reload: tuple[str, ...] = ()) -> None:
        workbook_bridge.sync(self.window.doc, renamed, reload)

    def _needs_workbook(self, what: str) -> bool:
        if self.is_workbook():
            return True
        self.window.report(f"{what}: open or create a workbook first (File ▸ New workbook)")
        return False

    # ---------------------------------------------------------------- workbook
    def new_workbook(self) -> None:
        if not self.window.maybe_save():
            return
        dialog = NewWorkbookDialog(self.window, self.window.prefs.currency)
        if dialog.exec() == QDialog.DialogCode.Accepted and dialog.created is not None:
            self.window.open_path(str(dialog.created), offer_recovery=False)
            self.window.report(f"New workbook {dialog.created.name}: add sites and assets, or "
                               "import an asset list (Asset ▸ Import asset list…)")

    # ---------------------------------------------------------------- sites
    def site_names(self) -> list[str]:
        with Workbook.open(self.path) as wb:
            return [s.name for s in wb.sites()]

    def add_site(self, name: str | None = None) -> bool:
        if not self._needs_workbook("Add site"):
            return False
        if name is None:
            name, ok = QInputDialog.getText(self.window, "Add site", "Site name:")
            if not ok:
                return False
        name = " ".join(name.split())
        if name in self.site_names():
            self.window.report(f"Add site: '{name}' already exists")
            return False

        def redo() -> None:
            with writing(self.path) as wb:
                wb.add_site(Site(name))
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb:
                wb.remove_site(name)
            self._sync()

        return self.edit(f"Add site {name}", redo, undo)

    def _pick_site(self, title: str) -> str | None:
        names = self.site_names()
        if not names:
            self.window.report(f"{title}: the workbook has no site yet")
            return None
        entry = self.window.current_entry()
        start = names.index(entry.site) if entry is not None and entry.site in names else 0
        name, ok = QInputDialog.getItem(self.window, title, "Site:", names, start, False)
        return name if ok else None

    def rename_site(self, old: str | None = None, new: str | None = None) -> bool:
        if not self._needs_workbook("Rename site"):
            return False
        old = old or self._pick_site("Rename site")
        if old is None:
            return False
        if new is None:
            new, ok = QInputDialog.getText(self.window, "Rename site", f"New name for {old}:",
                                           text=old)
            if not ok:
                return False
        new = " ".join(new.split())

        def redo() -> None:
            with writing(self.path) as wb:
                wb.rename_site(old, new)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb:
                wb.rename_site(new, old)
            self._sync()

        return self.edit(f"Rename site {old} to {new}", redo, undo)

    def remove_site(self, name: str | None = None) -> bool:
        if not self._needs_workbook("Remove site"):
            return False
        name = name or self._pick_site("Remove site")
        if name is None:
            return False
        with Workbook.open(self.path) as wb:
            location = next((s.location for s in wb.sites() if s.name == name), "")

        def redo() -> None:
            with writing(self.path) as wb:
                wb.remove_site(name)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb:
                wb.add_site(Site(name, location))
            self._sync()

        return self.edit(f"Remove site {name}", redo, undo)

    # ---------------------------------------------------------------- assets
    def add_asset(self, dialog: AssetDialog | None = None) -> bool:
        if not self._needs_workbook("Add asset"):
            return False
        entry = self.window.current_entry()
        with Workbook.open(self.path) as wb:
            dialog = dialog or AssetDialog(wb, site=entry.site if entry else "",
                                           parent=self.window)
            if dialog.exec() != QDialog.DialogCode.Accepted:
                return False
            asset = dialog.result_asset
            assert asset is not None
            candidates = [c.alternative for c in wb.candidates(asset_class=asset.asset_class)
                          ] if asset.asset_class else []
            sites = {s.name for s in wb.sites()}
            known = {c.name for c in wb.candidates()}
            year = wb.study_year
        try:
            study = dialog.chosen_study(asset, self.window.prefs.default_marr, candidates)
            snapshot = None if study is None else result_snapshot(study)
        except StudyError as exc:
            self.window.report(f"Add asset: {exc}")
            return False

        def redo() -> None:
            with writing(self.path) as wb, wb.transaction():
                wb.new_asset(asset)
                if study is not None:
                    catalogue_challengers(wb, study, asset)
                    wb.save_study(asset.tag, year, study, snapshot)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction() as c:
                c.execute("DELETE FROM studies WHERE tag = ?", (asset.tag,))
                c.execute("DELETE FROM fits WHERE tag = ?", (asset.tag,))
                for cand in wb.candidates():
                    if cand.name not in known:
                        c.execute("DELETE FROM candidates WHERE id = ?", (cand.id,))
                wb.remove_asset(asset.tag)
                if asset.site not in sites:
                    wb.remove_site(asset.site)
            self._sync()

        return self.edit(f"Add asset {asset.tag}", redo, undo, select=asset.tag)

    def _current_asset(self, what: str) -> Asset | None:
        if not self._needs_workbook(what):
            return None
        entry = self.window.current_entry()
        if entry is None:
            self.window.report(f"{what}: select an asset first")
            return None
        with Workbook.open(self.path) as wb:
            return wb.asset(entry.key)

    def _unsaved(self, tag: str) -> bool:
        entry = self.window.doc.entry(tag)
        return getattr(entry, "saved", (None, None)) != (entry.study, entry.study_year) and \
            entry.study is not None

    def edit_asset(self, dialog: AssetDialog | None = None) -> bool:
        before = self._current_asset("Edit asset")
        if before is None:
            return False
        with Workbook.open(self.path) as wb:
            dialog = dialog or AssetDialog(wb, before, parent=self.window)
            if dialog.exec() != QDialog.DialogCode.Accepted:
                return False
            sites = {s.name for s in wb.sites()}
        after = dialog.result_asset
        assert after is not None
        if after == before:
            return False
        if after.tag != before.tag and self._unsaved(before.tag):
            self.window.report(f"Edit asset: save {before.tag}'s study first, then change its tag")
            return False
        renamed = {before.tag: after.tag} if after.tag != before.tag else None
        back = {after.tag: before.tag} if renamed else None

        def redo() -> None:
            with writing(self.path) as wb:
                wb.edit_asset(before.tag, after)
            self._sync(renamed)

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction():
                wb.edit_asset(after.tag, before)
                if after.site not in sites and not wb.assets(site=after.site):
                    wb.remove_site(after.site)
            self._sync(back)

        return self.edit(f"Edit asset {after.tag}", redo, undo, select=after.tag)

    def move_asset(self, site: str | None = None) -> bool:
        before = self._current_asset("Move asset")
        if before is None:
            return False
        names = self.site_names()
        if site is None:
            site, ok = QInputDialog.getItem(self.window, f"Move {before.tag}", "To site:",
                                            names, names.index(before.site)
                                            if before.site in names else 0, True)
            if not ok:
                return False
        site = " ".join(site.split())
        if site == before.site:
            return False
        new_site = site not in names

        def redo() -> None:
            with writing(self.path) as wb:
                wb.move_asset(before.tag, site)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction():
                wb.move_asset(before.tag, before.site)
                if new_site:
                    wb.remove_site(site)
            self._sync()

        return self.edit(f"Move {before.tag} to {site}", redo, undo, select=before.tag)

    def retire_asset(self, dialog: RetireDialog | None = None) -> bool:
        before = self._current_asset("Retire asset")
        if before is None:
            return False
        if before.retired:
            self.window.report(f"Retire asset: {before.tag} is already retired")
            return False
        if self._unsaved(before.tag):
            self.window.report(f"Retire asset: save {before.tag}'s study first")
            return False
        dialog = dialog or RetireDialog(before.tag, self.window)
        if dialog.exec() != QDialog.DialogCode.Accepted:
            return False
        when, reason = dialog.values()

        def redo() -> None:
            with writing(self.path) as wb:
                wb.retire_asset(before.tag, when, reason)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb:
                wb.reinstate_asset(before.tag)
            self._sync()

        return self.edit(f"Retire {before.tag}", redo, undo, select=before.tag)

    def remove_asset(self) -> bool:
        before = self._current_asset("Remove asset")
        if before is None:
            return False
        if self._unsaved(before.tag):
            self.window.report(f"Remove asset: {before.tag} has an unsaved study; save it and "
                               "retire the asset instead")
            return False
        with Workbook.open(self.path) as wb:
            links = [c.id for c in wb.candidates(tag=before.tag)]

        def redo() -> None:
            with writing(self.path) as wb:
                wb.remove_asset(before.tag)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction():
                wb.new_asset(before)
                for cid in links:
                    wb.link_candidate(cid, before.tag)
            self._sync()

        return self.edit(f"Remove asset {before.tag}", redo, undo)

    # ---------------------------------------------------------------- candidates
    def open_catalogue(self) -> None:
        if self._needs_workbook("Candidate catalogue"):
            CatalogueDialog(self, self.window).exec()

    def apply_candidate(self, alt: Alternative, asset_class: str, name: str | None) -> bool:
        old_name = name or alt.name
        with Workbook.open(self.path) as wb:
            changes = candidate_changes(wb, old_name, alt)
            records = {ch.tag: wb.record(ch.tag, ch.year) for ch in changes}
            before = next((c for c in wb.candidates() if c.name == old_name), None)
        busy = [t for t in records if self._unsaved(t)]
        if busy:
            self.window.report(f"Candidate: save the studies of {', '.join(busy)} first; "
                               "this edit changes them")
            return False

        def redo() -> None:
            with writing(self.path) as wb:
                apply_candidate(wb, alt, asset_class, name)
            self._sync(reload=tuple(records))

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction() as c:
                c.execute("DELETE FROM candidates WHERE name = ?", (alt.name,))
                if before is not None:
                    c.execute("INSERT INTO candidates (id, name, asset_class, alternative_json) "
                              "VALUES (?, ?, ?, ?)", (before.id, before.name, before.asset_class,
                                                       _alt_json(before.alternative)))
                    c.executemany("INSERT OR IGNORE INTO asset_candidates VALUES (?, ?)",
                                  [(t, before.id) for t in before.tags])
                for tag, rec in records.items():
                    wb.save_study(tag, rec.year, rec.study, rec.result_json)
            self._sync(reload=tuple(records))

        label = f"Candidate {alt.name}" + (f" ({len(records)} studies)" if records else "")
        return self.edit(label, redo, undo)

    def remove_candidate(self, name: str) -> bool:
        with Workbook.open(self.path) as wb:
            before = next(c for c in wb.candidates() if c.name == name)

        def redo() -> None:
            with writing(self.path) as wb:
                remove_candidate(wb, name)

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction() as c:
                c.execute("INSERT INTO candidates (id, name, asset_class, alternative_json) "
                          "VALUES (?, ?, ?, ?)", (before.id, before.name, before.asset_class,
                                                   _alt_json(before.alternative)))
                c.executemany("INSERT OR IGNORE INTO asset_candidates VALUES (?, ?)",
                              [(t, before.id) for t in before.tags])

        return self.edit(f"Remove candidate {name}", redo, undo)

    def offer_to_current(self, alt: Alternative) -> bool:
        """Add a catalogue candidate to the selected asset's study (an ordinary study edit)."""
        entry = self.window.current_entry()
        if entry is None or entry.study is None:
            self.window.report("Add candidate: select an asset with a study first")
            return False
        if any(c.name == alt.name for c in entry.study.challengers):
            self.window.report(f"Add candidate: the study already has '{alt.name}'")
            return False
        new = dataclasses.replace(entry.study, challengers=entry.study.challengers + (alt,))
        return self.window.commit(new, f"Add candidate {alt.name}")

    def offered_names(self, tag: str) -> list[str]:
        with Workbook.open(self.path) as wb:
            return [c.name for c in offered(wb, tag)]

    # ---------------------------------------------------------------- asset list
    def open_asset_list(self) -> None:
        if self._needs_workbook("Import asset list"):
            AssetListDialog(self, self.window).exec()

    def import_assets(self, plan: AssetImportPlan, update_existing: bool) -> bool:
        with Workbook.open(self.path) as wb:
            sites = {s.name for s in wb.sites()}

        def redo() -> None:
            with writing(self.path) as wb:
                apply_asset_import(wb, plan, update_existing)
            self._sync()

        def undo() -> None:
            with writing(self.path) as wb, wb.transaction():
                for asset in plan.new:
                    wb.remove_asset(asset.tag)
                if update_existing:
                    for change in plan.changed:
                        wb.edit_asset(change.after.tag, change.before)
                for site in {s.name for s in wb.sites()} - sites:
                    if not wb.assets(site=site):
                        wb.remove_site(site)
            self._sync()

        n = len(plan.new) + (len(plan.changed) if update_existing else 0)
        return self.edit(f"Import {n} assets from {plan.source}", redo, undo)

    # ---------------------------------------------------------------- menus
    def install(self, file_menu: Any, asset_menu: Any, before: Any) -> None:
        w = self.window
        self.new_workbook_action = w._action("New &workbook…", self.new_workbook,
                                             tip="Create an empty workbook for your own fleet")
        file_menu.insertAction(before, self.new_workbook_action)
        sites = asset_menu.addMenu("S&ites")
        self.site_actions = [w._action("&Add site…", self.add_site),
                             w._action("&Rename site…", self.rename_site),
                             w._action("Re&move site…", self.remove_site)]
        for a in self.site_actions:
            sites.addAction(a)
        self.asset_actions = [w._action("&Edit asset…", self.edit_asset),
                              w._action("Mo&ve asset…", self.move_asset),
                              w._action("Re&tire asset…", self.retire_asset)]
        for a in self.asset_actions:
            asset_menu.addAction(a)
        self.catalogue_action = w._action("&Candidate catalogue…", self.open_catalogue)
        self.asset_list_action = w._action("Import asset &list…", self.open_asset_list)
        asset_menu.addAction(self.catalogue_action)
        asset_menu.addAction(self.asset_list_action)
        self.menus = (sites,)

    def enable(self, workbook: bool) -> None:
        for a in (*self.site_actions, *self.asset_actions, self.catalogue_action,
                  self.asset_list_action):
            a.setEnabled(workbook)


def _text(x: float) -> str:
    """A number for an edit box, to 12 significant digits (so a value round-trips).

    >>> _text(0.11 * 100), _text(1234567.5), _text(3.0)
    ('11', '1234567.5', '3')
    """
    return f"{x:.12g}"


def _alt_json(alt: Alternative) -> str:
    import json

    from core.studyfile import alternative_to_dict

    return json.dumps(alternative_to_dict(alt), ensure_ascii=False, allow_nan=False,
                      sort_keys=True)
