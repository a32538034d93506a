"""The Tenure main window: register, editor, results; files, undo, autosave, errors.

Thin views over :class:`desktop_app.document.Document`.  Every edit is a
QUndoCommand that swaps one frozen Study for the next; the document tells the
views, the current asset is recomputed through ``core.study.run_study`` and the
result panels get the new :class:`core.results.StudyResult`.  The fleet
recompute across the register runs on a QThreadPool worker with progress and
cancel.
"""

from __future__ import annotations

import contextlib
import json
from pathlib import Path
from typing import Any

import shiboken6
from PySide6.QtCore import QSignalBlocker, Qt, QThreadPool, QTimer
from PySide6.QtGui import QAction, QKeySequence, QUndoStack
from PySide6.QtWidgets import (
    QFileDialog,
    QInputDialog,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QSplitter,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.estimates import Study
from core.export import export_csv, export_xlsx
from core.results import StudyResult
from desktop_app import recovery, screen
from desktop_app.commands import (
    AddAssetCommand,
    RemoveAssetCommand,
    SetStudyCommand,
    SetYearCommand,
)
from desktop_app.document import (
    AssetEntry,
    Document,
    check_study,
    default_study,
    from_studies,
    join_title,
    new_key,
    this_year,
)
from desktop_app.editor import StudyEditor
from desktop_app.panels import (
    make_chart_panel,
    make_results_panel,
    make_risk_view,
)
from desktop_app.prefs import Preferences, PreferencesDialog
from desktop_app.register import RegisterPane
from desktop_app.sources import FILE_FILTER, open_document, save_document
from desktop_app.validation import friendly
from desktop_app.widget_parts import vertical_split
from desktop_app.worker import FleetJob

APP_NAME = "Tenure"


class MainWindow(QMainWindow):
    def __init__(self, prefs: Preferences | None = None, parent: QWidget | None = None,
                 deferred: bool = False) -> None:
        super().__init__(parent)
        self._deferred = deferred
        self.startup_done = not deferred
        self.startup_path: str | None = None
        self.startup_fallback: str | None = None
        self.prefs = prefs or Preferences()
        self.doc = Document([], None, "new")
        self.current_key: str | None = None
        self.current_result: StudyResult | None = None
        self.last_message = ""
        self._forced_dirty = False
        self._job: FleetJob | None = None
        self._current_job: FleetJob | None = None
        self._showing = False
        self._jobs: list[FleetJob] = []
        self.pool = QThreadPool.globalInstance()
        self.undo_stack = QUndoStack(self)
        self.undo_stack.cleanChanged.connect(lambda _c: self._update_modified())
        self.undo_stack.indexChanged.connect(lambda _i: self._update_modified())
        self.setWindowTitle(f"[*]{APP_NAME}")
        screen.place_on_screen(self)
        self._sized = False
        self._build()
        self._build_menus()
        self.autosave_timer = QTimer(self)
        self.autosave_timer.timeout.connect(self.autosave)
        self.autosave_timer.start(max(self.prefs.autosave_seconds, 10) * 1000)
        self.apply_preferences()

    # ------------------------------------------------------------------ layout
    def _build(self) -> None:
        self.register = RegisterPane()
        self.register.asset_selected.connect(self.select_asset)
        self.editor = StudyEditor(self.commit, self.report, self.set_year)
        self.editor.start_button.clicked.connect(lambda _c=False: self.start_study())
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(self.editor)
        scroll.setMinimumWidth(380)

        self.chart_panel = self.results_panel = self.risk_view = None
        self.results_page = QWidget()
        self.results_layout = QVBoxLayout(self.results_page)
        self.results_layout.setContentsMargins(0, 0, 0, 0)
        self.loading_label = QLabel("Loading the charts…")
        self.loading_label.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.results_layout.addWidget(self.loading_label)
        self.right_tabs = QTabWidget()
        self.right_tabs.addTab(self.results_page, "Results")
        if not self._deferred:
            self.build_panels()

        left = QWidget()
        ll = QVBoxLayout(left)
        ll.setContentsMargins(0, 0, 0, 0)
        title = QLabel("Asset register")
        title.setStyleSheet("font-weight: bold; padding: 4px;")
        ll.addWidget(title)
        ll.addWidget(self.register)
        left.setMinimumWidth(240)  # room for the asset tags beside state and year

        self.splitter = QSplitter(Qt.Orientation.Horizontal)
        self.splitter.addWidget(left)
        self.splitter.addWidget(scroll)
        self.splitter.addWidget(self.right_tabs)
        self.splitter.setStretchFactor(0, 0)
        self.splitter.setStretchFactor(1, 3)
        self.splitter.setStretchFactor(2, 4)
        self.splitter.setSizes(screen.pane_sizes(1366))
        self.splitter.setChildrenCollapsible(True)  # drag a pane to its edge to hide it
        self.splitter.setObjectName("main_split")
        self.setCentralWidget(self.splitter)

        bar = self.statusBar()
        self.message_label = QLabel("")
        self.message_label.setObjectName("status_message")
        bar.addWidget(self.message_label, 1)
        self.progress = QProgressBar()
        self.progress.setMaximumWidth(180)
        self.progress.setFormat("Register %v/%m")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.clicked.connect(self.cancel_fleet)
        bar.addPermanentWidget(self.progress)
        bar.addPermanentWidget(self.cancel_button)
        self.progress.hide()
        self.cancel_button.hide()

    def build_panels(self) -> None:
        """Create the result panels (chart, results, risk); deferred at start-up so the
        window shows before pyqtgraph and the engine are imported."""
        if self.chart_panel is not None:
            return
        self.chart_panel = make_chart_panel()
        self.results_panel = make_results_panel()
        self.risk_view = make_risk_view()
        right_split = vertical_split(self.chart_panel, self.results_panel, stretch=(1, 1),
                                     sizes=[470, 430], collapsible=True)
        right_split.setObjectName("right_split")
        self.right_split = right_split
        state = self.prefs.layout("right_split")
        if state is None or not right_split.restoreState(state):
            right_split.setSizes(screen.chart_heights(max(self.right_tabs.height() - 30, 400)))
        self.loading_label.hide()
        self.results_layout.addWidget(right_split)
        self.right_tabs.addTab(self.risk_view, "Risk")
        from desktop_app.technology_view import TechnologyView

        self.technology_view = TechnologyView()
        self.right_tabs.addTab(self.technology_view, "Technology plan")
        self.apply_preferences()

    def finish_startup(self, path: str | None) -> None:
        """The second half of a deferred start: panels, then the file."""
        self.build_panels()
        if not self.offer_untitled_recovery() and path is not None:
            fallback = getattr(self, "startup_fallback", None)
            if not self.open_path(path) and fallback:
                self.open_path(fallback)
        self.startup_done = True

    def offer_untitled_recovery(self) -> bool:
        """After a crash with unsaved, never-saved work: offer it back.  True if restored."""
        data = recovery.read_recovery(None)
        if data is None:
            return False
        answer = QMessageBox.question(
            self, APP_NAME, f"Unsaved new work from {data.get('saved_at', 'earlier')} was "
            "recovered after the window closed unexpectedly.\n\nRestore it?",
            QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No)
        recovery.discard_recovery(None)
        if answer != QMessageBox.StandardButton.Yes:
            return False
        try:
            doc = Document.from_recovery(data)
        except (StudyError, KeyError, TypeError) as exc:
            self.report(f"The recovered work could not be read ({exc})")
            return False
        doc.path = None
        self.set_document(doc, dirty=True)
        self.report("Recovered unsaved work: save it to keep it")
        return True

    def _action(self, text: str, slot, shortcut=None, tip: str = "") -> QAction:
        action = QAction(text, self)
        if shortcut is not None:
            action.setShortcut(QKeySequence(shortcut))
        if tip:
            action.setStatusTip(tip)
        action.triggered.connect(lambda _checked=False: slot())
        return action

    def _build_menus(self) -> None:
        sk = QKeySequence.StandardKey
        m = self.menuBar().addMenu("&File")
        self.new_action = self._action("&New", self.new_document, sk.New)
        self.open_action = self._action("&Open…", self.open_dialog, sk.Open)
        self.save_action = self._action("&Save", self.save, sk.Save)
        self.save_as_action = self._action("Save &As…", self.save_as, sk.SaveAs)
        self.recent_menu = m.addMenu("Open &Recent")
        m.insertAction(self.recent_menu.menuAction(), self.new_action)
        m.insertAction(self.recent_menu.menuAction(), self.open_action)
        m.addSeparator()
        m.addAction(self.save_action)
        m.addAction(self.save_as_action)
        m.addSeparator()
        self.export_action = self._action("&Export tables…", self.export_tables,
                                          tip="Write this study's tables to CSV or XLSX")
        m.addAction(self.export_action)
        self.memo_action = self._action("Issue &memo…", self.issue_memo,
                                        tip="Write and sign the decision memo (PDF)")
        m.addAction(self.memo_action)
        m.addAction(self._action("&Sign a memo…", self.sign_memo,
                                 tip="Sign an issued memo as its reviewer or approver"))
        m.addAction(self._action("&Verify a memo…", self.verify_memo,
                                 tip="Check a memo's signatures, who signed, and trust"))
        m.addAction(self._action("&Trust a colleague's certificate…", self.trust_certificate,
                                 tip="Accept memos signed with a colleague's certificate, after "
                                     "comparing its fingerprint"))
        m.addSeparator()
        m.addAction(self._action("&Preferences…", self.edit_preferences, sk.Preferences))
        m.addSeparator()
        m.addAction(self._action("&Quit", self.close, sk.Quit))
        self._update_recent_menu()

        e = self.menuBar().addMenu("&Edit")
        undo = self.undo_stack.createUndoAction(self, "&Undo")
        undo.setShortcut(QKeySequence(sk.Undo))
        redo = self.undo_stack.createRedoAction(self, "&Redo")
        redo.setShortcut(QKeySequence(sk.Redo))
        self.undo_action, self.redo_action = undo, redo
        e.addAction(undo)
        e.addAction(redo)
        e.addSeparator()
        e.addAction(self._action("&Find asset", self.register.filter_edit.setFocus, sk.Find))
        e.addSeparator()
        e.addAction(self._action("Reset pane &layout", self.reset_layout,
                                 tip="Pane widths as shares of the window (drag a pane's edge "
                                     "to resize or hide it)"))

        a = self.menuBar().addMenu("&Asset")
        self.add_asset_action = self._action("&Add asset…", self.add_asset)
        a.addAction(self.add_asset_action)
        self.remove_asset_action = self._action("&Remove asset", self.remove_asset)
        a.addAction(self.remove_asset_action)
        a.addSeparator()
        self.start_study_action = self._action("&Start or restudy this year", self.start_study)
        a.addAction(self.start_study_action)
        a.addAction(self._action("Add &challenger", self.editor.add_challenger))
        a.addAction(self._action("Re&move challenger", self.editor.remove_challenger))
        self.history_action = self._action("&Import cost history…", self.import_history,
                                           tip="Fit estimates from recorded costs (workbooks)")
        a.addAction(self.history_action)
        self.study_years_action = self._action("Study &years…", self.show_study_years,
                                               tip="This asset's earlier studies and how "
                                                   "the decision changed (read only)")
        self.study_years_action.setEnabled(False)
        a.addAction(self.study_years_action)
        from desktop_app.fleet_actions import FleetActions

        self.fleet = FleetActions(self)
        a.addSeparator()
        self.fleet.install(m, a, self.open_action)
        a.addSeparator()
        a.addAction(self._action("Recompute &register", self.recompute_fleet, sk.Refresh))
        self.plan_action = self._action("Capital &plan…", self.show_capital_plan,
                                        tip="Which assets to replace in which year under a budget")
        a.addAction(self.plan_action)

        h = self.menuBar().addMenu("&Help")
        h.addAction(self._action("&About Tenure", self.about))

    # ------------------------------------------------------------------ messages
    def report(self, message: str) -> None:
        """Tell the user about a refused entry or a note (status bar; never a dialog)."""
        self.last_message = message
        self.message_label.setText(message)
        self.message_label.setToolTip(message)
        self.editor.show_notice(message if not message.startswith(("Opened", "Saved",
                                                                    "Exported")) else "")

    def _update_modified(self) -> None:
        if not (shiboken6.isValid(self) and shiboken6.isValid(self.undo_stack)):
            return  # the window is being torn down
        self.setWindowModified(self.is_dirty())
        self.save_action.setEnabled(True)

    def discard_changes(self) -> None:
        """Treat the current state as saved (tests, scripted shutdown): no question on close."""
        self.undo_stack.setClean()
        self._forced_dirty = False
        self._update_modified()

    def is_dirty(self) -> bool:
        if self._forced_dirty:
            return True
        if self.doc.kind == "workbook" and self.doc.path is not None:
            # register edits are written at once; only study edits wait for Save
            return any(e.study is not None and getattr(e, "saved", None) != (e.study,
                                                                             e.study_year)
                       for e in self.doc.entries)
        return not self.undo_stack.isClean()

    def _update_title(self) -> None:
        name = Path(self.doc.path).name if self.doc.path else "Untitled"
        self.setWindowTitle(f"{name}[*] — {APP_NAME}")
        self._update_modified()

    def currency(self) -> str:
        """The one currency display: the open workbook's own, else the preferences'."""
        from core.currency import workbook_currency

        path = self.doc.path if self.doc.kind == "workbook" else None
        return workbook_currency(path, default=self.prefs.currency)

    def apply_preferences(self) -> None:
        currency = self.currency()
        self.editor.set_currency(currency)
        for panel in (self.chart_panel, self.results_panel, self.risk_view,
                      getattr(self, "technology_view", None)):
            if panel is not None and hasattr(panel, "set_currency"):
                panel.set_currency(currency)
        if hasattr(self, "autosave_timer"):
            self.autosave_timer.setInterval(max(self.prefs.autosave_seconds, 10) * 1000)

    # ------------------------------------------------------------------ documents
    def set_document(self, doc: Document, dirty: bool = False) -> None:
        self.cancel_fleet()
        self.doc.unsubscribe(self._on_doc_event)
        self.doc = doc
        self.current_key = None
        self.undo_stack.clear()
        self._forced_dirty = dirty
        self.register.set_document(doc)  # the register observes the document first
        doc.subscribe(self._on_doc_event)
        workbook = doc.kind == "workbook"
        self.history_action.setEnabled(workbook)
        self.fleet.enable(workbook)
        if self.current_key is None:
            self.select_asset(doc.entries[0].key if doc.entries else None)
        self._update_title()
        self.apply_preferences()  # a workbook keeps its own currency
        self.recompute_fleet()

    def open_path(self, path: str, *, offer_recovery: bool = True) -> bool:
        try:
            doc = open_document(path)
        except StudyError as exc:
            self.report(f"Could not open {path}: {exc.message}")
            QMessageBox.warning(self, APP_NAME, f"Could not open the file.\n\n{exc}")
            return False
        dirty = False
        if offer_recovery:
            data = recovery.read_recovery(doc.path)
            if data is not None:
                answer = QMessageBox.question(
                    self, APP_NAME,
                    f"Unsaved work on {Path(path).name} from {data.get('saved_at', 'earlier')} "
                    "was recovered after the window closed unexpectedly.\n\nRestore it?",
                    QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No)
                if answer == QMessageBox.StandardButton.Yes:
                    try:
                        doc = Document.from_recovery(data)
                        doc.path = str(path)
                        dirty = True
                    except (StudyError, KeyError, TypeError) as exc:
                        self.report(f"The recovered work could not be read ({exc}); "
                                    "the saved file is open instead")
                else:
                    recovery.discard_recovery(doc.path)
        self.set_document(doc, dirty=dirty)
        self.prefs.add_recent(str(path))
        self._update_recent_menu()
        why = read_only_reason(doc)
        if why:
            self.report(f"Opened {Path(path).name} read-only: {why}. Edits can be kept with "
                        "File ▸ Save As")
        else:
            self.report(f"Opened {Path(path).name}")
        self.message_label.setToolTip(str(path))
        return True

    def new_document(self) -> None:
        if not self.maybe_save():
            return
        study = default_study("New asset", self.prefs.default_marr)
        doc = from_studies([study], None, "json", year=this_year())
        self.set_document(doc)
        self.report("New study file: edit the estimates, then Save")

    def open_dialog(self) -> None:
        if not self.maybe_save():
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open workbook or study file",
                                              str(Path.home()), FILE_FILTER)
        if path:
            self.open_path(path)

    def _update_recent_menu(self) -> None:
        self.recent_menu.clear()
        items = self.prefs.recent()
        for path in items:
            action = self.recent_menu.addAction(path)
            action.triggered.connect(lambda _c=False, p=path: self._open_recent(p))
        if not items:
            self.recent_menu.addAction("(none)").setEnabled(False)
        else:
            self.recent_menu.addSeparator()
            self.recent_menu.addAction("Clear list").triggered.connect(self._clear_recent)

    def _clear_recent(self) -> None:
        self.prefs.clear_recent()
        self._update_recent_menu()

    def _open_recent(self, path: str) -> None:
        if self.maybe_save():
            self.open_path(path)

    def save(self) -> bool:
        if self.doc.path is None:
            return self.save_as()
        return self._save_to(self.doc.path)

    def save_as(self) -> bool:
        start = self.doc.path or str(Path.home() / "study.json")
        path, _ = QFileDialog.getSaveFileName(self, "Save as", start,
                                              "Study files (*.json);;Workbooks (*.tenure)")
        _ = _ or ""
        if not path:
            return False
        if Path(path).suffix == "" and self.doc.kind != "workbook":
            path += ".tenure" if "tenure" in _ else ".json"
        return self._save_to(path)

    def _save_to(self, path: str) -> bool:
        old_path = self.doc.path
        to_workbook = self.doc.kind != "workbook" and Path(path).suffix.lower() == ".tenure"
        try:
            save_document(self.doc, path)
        except StudyError as exc:
            self.report(f"Not saved: {friendly(exc)}")
            if is_read_only_or_full(exc) and path == old_path:
                answer = QMessageBox.question(
                    self, APP_NAME, f"The file was not saved.\n\n{friendly(exc)}\n\nYour "
                    "changes are still open. Save them elsewhere with Save As?",
                    QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No)
                if answer == QMessageBox.StandardButton.Yes:
                    return self.save_as()
                return False
            QMessageBox.warning(self, APP_NAME, f"The file was not saved.\n\n{friendly(exc)}")
            return False
        except OSError as exc:
            self.report(f"Not saved: {path}: {exc.strerror or exc}")
            QMessageBox.warning(self, APP_NAME, f"The file was not saved.\n\n{path}: "
                                f"{exc.strerror or exc}")
            return False
        self.undo_stack.setClean()
        self._forced_dirty = False
        recovery.discard_recovery(old_path)
        recovery.discard_recovery(path)
        self.prefs.add_recent(path)
        self._update_recent_menu()
        self._update_title()
        self.report(f"Saved {path}")
        if to_workbook:  # a study file became a workbook: go on editing the workbook
            self.open_path(path, offer_recovery=False)
            self.report(f"Saved {path} as a workbook")
        return True

    def maybe_save(self) -> bool:
        """Ask before unsaved work would be dropped; True when it is fine to go on."""
        if not self.is_dirty():
            return True
        answer = QMessageBox.question(
            self, APP_NAME, "This file has unsaved changes. Save them first?",
            QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
            | QMessageBox.StandardButton.Cancel, QMessageBox.StandardButton.Save)
        if answer == QMessageBox.StandardButton.Save:
            return self.save()
        if answer == QMessageBox.StandardButton.Discard:
            recovery.discard_recovery(self.doc.path)
            return True
        return False

    def showEvent(self, event) -> None:  # noqa: N802 - Qt's name
        super().showEvent(event)
        if not self._sized:  # the saved layout, else a share of the window's own width
            self._sized = True
            if not screen.restore_layout(self.prefs, self, {"main_split": self.splitter}):
                self.reset_layout()

    def reset_layout(self) -> None:
        """Pane widths and the chart/results split as shares of the window's size now."""
        self.splitter.setSizes(screen.pane_sizes(max(self.splitter.width(), 1)))
        if getattr(self, "right_split", None) is not None:
            self.right_split.setSizes(screen.chart_heights(
                max(self.right_split.height(), self.right_tabs.height() - 30, 1)))

    def closeEvent(self, event) -> None:  # noqa: N802 - Qt's name
        if self.maybe_save():
            splitters = {"main_split": self.splitter}
            if getattr(self, "right_split", None) is not None:
                splitters["right_split"] = self.right_split
            screen.save_layout(self.prefs, self, splitters)
            self.cancel_fleet()
            self.autosave_timer.stop()
            self.pool.waitForDone(3000)  # let a running recompute stop before the views go
            event.accept()
        else:
            event.ignore()

    def autosave(self) -> Path | None:
        """Write the recovery sidecar when there is unsaved work."""
        if not self.is_dirty():
            return None
        try:
            return recovery.write_recovery(self.doc.to_recovery(), self.doc.path)
        except (OSError, TypeError, ValueError) as exc:
            self.report(f"Autosave failed: {exc}")
            return None

    def handle_unexpected(self, summary: str, log: Path) -> None:
        saved = self.autosave()
        kept = ("Your unsaved work was kept in a recovery file and will be offered the next "
                "time you open this file." if saved else "Nothing was left unsaved.")
        self.report(f"Unexpected error: {summary}")
        box = QMessageBox(QMessageBox.Icon.Critical, APP_NAME,
                          "Something went wrong inside Tenure. " + kept, parent=self)
        box.setInformativeText(f"{summary}\n\nDetails are in {log}.")
        box.exec()

    # ------------------------------------------------------------------ assets
    def select_asset(self, key: str | None) -> None:
        if key != self.current_key:
            self.editor.clear_errors()
        self.current_key = key
        if key is not None:
            self.register.select(key)
        self.refresh_current()

    def current_entry(self) -> AssetEntry | None:
        if self.current_key is None:
            return None
        try:
            return self.doc.entry(self.current_key)
        except KeyError:
            return None

    def refresh_current(self) -> None:
        entry = self.current_entry()
        study = entry.study if entry else None
        self.editor.set_study(study, entry.study_year if entry else None)
        if entry is not None and entry.retired:  # kept for reading; no edits
            self.editor.setEnabled(False)
            self.report(f"{entry.name}: {entry.retired}; its studies are read only")
        self.start_study_action.setEnabled(entry is not None)
        self.study_years_action.setEnabled(entry is not None and self.doc.kind == "workbook"
                                           and self.doc.path is not None)
        self.show_result()

    def show_result(self) -> None:
        entry = self.current_entry()
        result = None
        if entry is not None and entry.study is not None:
            result = self.doc.cached_result(entry.key)
            if result is None and entry.study.uncertainty is not None:
                # Monte Carlo trials can take a while: compute off the GUI thread and keep
                # showing the previous result until the new one arrives.
                self._compute_current(entry.key, entry.study)
                self.report(f"Recomputing with {entry.study.uncertainty.trials:,} risk trials…")
                return
            elif result is None:
                self._showing = True
                try:
                    result = self.doc.result(entry.key)  # the register hears "result"
                except StudyError as exc:
                    self.report(friendly(exc))
                finally:
                    self._showing = False
        self.current_result = result
        if self.chart_panel is None:
            return
        for panel in (self.results_panel, self.chart_panel, self.risk_view,
                      getattr(self, "technology_view", None)):
            if panel is not None:
                panel.set_result(result)
        self.memo_action.setEnabled(result is not None)
        self.export_action.setEnabled(result is not None)

    def _on_doc_event(self, event: str, key: str | None) -> None:
        """The document changed (the register, which observes it too, has already updated)."""
        if event == "assets":
            if self.current_entry() is None:
                self.select_asset(self.doc.entries[0].key if self.doc.entries else None)
            elif key is not None:
                self.select_asset(key)
            return
        if event in ("study", "year"):
            if key == self.current_key:
                self.refresh_current()
            else:
                self.select_asset(key)
        elif event == "result" and not self._showing:
            entry = self.current_entry()
            if key == self.current_key and entry is not None and (
                    self.current_result is None or self.current_result.study != entry.study):
                self.show_result()

    def commit(self, new: Study, text: str, merge_key: object = None) -> bool:
        """Check a proposed study with core and push it as one undoable edit."""
        entry = self.current_entry()
        if entry is None:
            return False
        if entry.retired:
            self.report(f"{entry.name} is {entry.retired}; its studies are read only")
            return False
        try:
            check_study(new)
        except StudyError as exc:
            self.report(friendly(exc))
            return False
        self.undo_stack.push(SetStudyCommand(self.doc, entry.key, entry.study, new, text,
                                             merge_key))
        if not self.last_message.startswith("Max life"):
            self.report("")
        return True

    def set_year(self, year: int | None) -> None:
        entry = self.current_entry()
        if entry is not None and year != entry.study_year:
            self.undo_stack.push(SetYearCommand(self.doc, entry.key, entry.study_year, year))

    def start_study(self) -> None:
        entry = self.current_entry()
        if entry is None:
            return
        if entry.retired:
            self.report(f"{entry.name} is {entry.retired}; its studies are read only")
            return
        year = this_year()
        if entry.study is None:
            study = default_study(join_title(entry.site, entry.name) if self.doc.kind != "workbook"
                                  else entry.name, self.prefs.default_marr)
            self.undo_stack.beginMacro("Start study")
            self.undo_stack.push(SetStudyCommand(self.doc, entry.key, None, study, "Start study"))
            self.undo_stack.push(SetYearCommand(self.doc, entry.key, entry.study_year, year))
            self.undo_stack.endMacro()
            self.report(f"Study started for {year} from default estimates: replace them with "
                        "this asset's own")
        elif entry.study_year != year:
            self.undo_stack.push(SetYearCommand(self.doc, entry.key, entry.study_year, year))
            self.report(f"Restudy for {year}: last study's estimates copied; review each one")
        else:
            self.report(f"This asset already has a {year} study")

    def add_asset(self) -> None:
        if self.doc.kind == "workbook":
            self.fleet.add_asset()
            return
        name, ok = QInputDialog.getText(self, "Add asset", "Site — asset name:",
                                        text="Kestrel Road — New asset")
        if not ok or not name.strip():
            return
        titles = {e.title for e in self.doc.entries}
        if name.strip() in titles:
            self.report(f"Add asset: '{name.strip()}' already exists")
            return
        study = default_study(name.strip(), self.prefs.default_marr)
        from desktop_app.document import split_title

        site, asset = split_title(study.title)
        entry = AssetEntry(new_key(), site, asset, study, this_year())
        self.undo_stack.push(AddAssetCommand(self.doc, entry))

    def remove_asset(self) -> None:
        entry = self.current_entry()
        if entry is not None and self.doc.kind == "workbook":
            self.fleet.remove_asset()
            return
        if entry is None:
            return
        if len(self.doc.entries) <= 1:
            self.report("Remove asset: a study file keeps at least one asset")
            return
        self.undo_stack.push(RemoveAssetCommand(self.doc, entry.key))

    # ------------------------------------------------------------------ fleet worker
    def recompute_fleet(self) -> None:
        """Recompute every asset's study on the thread pool (progress and cancel in the status bar)."""
        items = [(e.key, e.study) for e in self.doc.entries
                 if e.study is not None and self.doc.cached_result(e.key) is None]
        if items:
            self._compute_async(items, show=True)

    def _compute_current(self, key: str, study: Study) -> FleetJob:
        """One study on the pool (a study with risk trials); a newer edit cancels the older."""
        if self._current_job is not None:
            self._current_job.cancel()
        job = FleetJob([(key, study)])
        doc = self.doc
        job.signals.result.connect(lambda k, result: doc.store_result(k, result))
        job.signals.failed.connect(lambda k, msg: self.report(f"{k}: {msg}"))
        job.signals.finished.connect(lambda _c, j=job: self._current_finished(j))
        self._current_job = job
        self._jobs.append(job)
        self.pool.start(job)
        return job

    def _current_finished(self, job: FleetJob) -> None:
        if job in self._jobs:
            self._jobs.remove(job)
        if job is self._current_job:
            self._current_job = None
            entry = self.current_entry()
            if entry is not None and self.doc.cached_result(entry.key) is not None:
                if self.last_message.startswith("Recomputing with"):
                    self.report("")  # clear only our own progress note, never a warning
                self.show_result()

    def _compute_async(self, items: list[tuple[str, Study]], show: bool = False) -> FleetJob:
        if self._job is not None:
            self._job.cancel()
        job = FleetJob(items)
        doc = self.doc
        job.signals.result.connect(lambda key, result: doc.store_result(key, result))
        job.signals.failed.connect(lambda key, msg: self.report(f"{key}: {msg}"))
        job.signals.progress.connect(self._fleet_progress)
        job.signals.finished.connect(lambda _c, j=job: self._fleet_finished(j))
        self._job = job
        self._jobs.append(job)
        self.progress.setRange(0, len(items))
        self.progress.setValue(0)
        self.progress.setVisible(show or len(items) > 1)
        self.cancel_button.setVisible(show or len(items) > 1)
        self.pool.start(job)
        return job

    def _fleet_progress(self, done: int, total: int) -> None:
        self.progress.setRange(0, total)
        self.progress.setValue(done)

    def _fleet_finished(self, job: FleetJob) -> None:
        if job is self._job:
            self._job = None
            self.progress.hide()
            self.cancel_button.hide()
            if job.cancelled:
                self.report("Register recompute cancelled")
        if job in self._jobs:
            self._jobs.remove(job)
        self.register.update_all()
        if self.current_result is None:
            self.show_result()

    def cancel_fleet(self) -> None:
        for job in (self._job, self._current_job):
            if job is not None:
                job.cancel()

    def wait_for_jobs(self, msecs: int = 10000) -> bool:
        """Wait for the worker pool (tests, benchmarks, shutdown)."""
        ok = self.pool.waitForDone(msecs)
        from PySide6.QtCore import QCoreApplication

        QCoreApplication.processEvents()
        return ok

    # ------------------------------------------------------------------ other actions
    def trust_certificate(self) -> None:
        from desktop_app.trust_dialog import trust_certificate

        status = trust_certificate(self)
        if status:
            self.report(status)

    def sign_memo(self) -> None:
        from desktop_app.signoff_dialog import SignMemoDialog

        workbook = self.doc.path if self.doc.kind == "workbook" else None
        dialog = SignMemoDialog(self, workbook_path=workbook)
        dialog.signed.connect(lambda res: self.report(
            f"Signed as {res.role} by {res.signer}: {res.path}"))
        dialog.exec()

    def verify_memo(self) -> None:
        from desktop_app.signoff_dialog import VerifyMemoDialog

        VerifyMemoDialog(self).exec()

    def issue_memo(self) -> None:
        if self.current_result is None:
            self.report("Issue memo: select a studied asset first")
            return
        try:
            from desktop_app.memo_dialog import IssueMemoDialog
        except ImportError:
            self.report("Issue memo: the memo module is not available in this build")
            return
        workbook = self.doc.path if self.doc.kind == "workbook" else None
        dialog = IssueMemoDialog(self.current_result, self, workbook_path=workbook)
        if hasattr(dialog, "page_size"):
            dialog.page_size.setCurrentText(self.prefs.page_size)
        if hasattr(dialog, "currency"):
            dialog.currency.setText(self.currency())
        dialog.exec()

    def import_history(self) -> None:
        """The cost-history dialog; fitted estimates go to the defender through the undo stack."""
        if self.doc.kind != "workbook" or self.doc.path is None:
            self.report("Import cost history: open a workbook first (history is kept there)")
            return
        try:
            from desktop_app.history_dialog import CostHistoryDialog
        except ImportError:
            self.report("Import cost history: not available in this build")
            return
        dialog = CostHistoryDialog(self.doc.path, self.current_key, self)
        dialog.set_currency(self.currency())
        dialog.exec()
        costs, values = dialog.accepted_estimates()
        tag = None
        with contextlib.suppress(AttributeError, RuntimeError):
            tag = dialog.fitted_tag()
        self.apply_fitted_estimates(tag or self.current_key, costs, values)

    def show_study_years(self) -> None:
        """The read-only "Study years" dialog for the selected workbook asset."""
        if self.doc.kind != "workbook" or self.doc.path is None or self.current_key is None:
            self.report("Study years: open a workbook and select an asset first")
            return
        from desktop_app.study_years import StudyYearsDialog

        StudyYearsDialog(self.doc.path, self.current_key, self).exec()

    def show_capital_plan(self) -> None:
        """The non-modal "Capital plan" window on the register's current studies."""
        from desktop_app.plan_view import PlanDialog

        dialog = getattr(self, "plan_dialog", None)
        if dialog is None:
            dialog = self.plan_dialog = PlanDialog(self)
        dialog.set_currency(self.currency())
        dialog.set_document(self.doc)
        dialog.show()
        dialog.raise_()

    def apply_fitted_estimates(self, key: str | None, costs, values) -> bool:
        if key is None or (costs is None and values is None):
            return False
        try:
            entry = self.doc.entry(key)
        except KeyError:
            return False
        if entry.study is None:
            self.report(f"{entry.name}: start its study first, then import the history again")
            return False
        self.select_asset(key)
        from dataclasses import replace as _replace

        defender = entry.study.defender
        changes = {}
        if costs is not None:
            changes["operating_costs"] = costs
        if values is not None:
            changes["market_values"] = values
        new = _replace(entry.study, defender=_replace(defender, **changes))
        if self.commit(new, "Apply fitted estimates", None):
            self.report(f"{defender.name}: estimates fitted from cost history applied (undo "
                        "restores the previous ones)")
            return True
        return False

    def export_tables(self) -> None:
        result = self.current_result
        if result is None:
            self.report("Export: select a studied asset first")
            return
        path, _ = QFileDialog.getSaveFileName(self, "Export tables",
                                              str(Path.home() / "study tables.csv"),
                                              "CSV (*.csv);;Excel workbook (*.xlsx)")
        if not path:
            return
        try:
            if path.lower().endswith(".xlsx"):
                export_xlsx(result, path, currency=self.currency())
            else:
                export_csv(result, path, table="alternatives", currency=self.currency())
        except StudyError as exc:
            self.report(f"Not exported: {exc}")
            return
        except OSError as exc:
            self.report(f"Not exported: {path}: {exc.strerror or exc}")
            return
        self.report(f"Exported {path}")

    def edit_preferences(self) -> None:
        dialog = PreferencesDialog(self.prefs, self)
        if dialog.exec():
            dialog.apply()
            self.apply_preferences()
            self.refresh_current()

    def about(self) -> None:
        QMessageBox.about(self, "About Tenure",
                          "Tenure: keep-or-replace decisions for production equipment.\n"
                          "Annual worth, economic service life and replacement studies, "
                          "computed offline.")


def dump(obj: Any) -> str:
    return json.dumps(obj, indent=2, default=str)


__all__ = ["MainWindow", "QSignalBlocker"]


def read_only_reason(doc: Document) -> str | None:
    """Why the open workbook cannot be saved in place (read-only file or folder), or None."""
    if doc.kind != "workbook" or not doc.path:
        return None
    try:
        from core.workbook import write_problem
    except ImportError:
        return None
    return write_problem(doc.path)


def is_read_only_or_full(exc: StudyError) -> bool:
    """A save refused because the workbook is read-only or the disk is full."""
    return "read-only" in exc.message or exc.message.startswith("disk full")
