"""The asset register: sites and their assets with recommendation and estimate state.

A QStandardItemModel mirrors the :class:`desktop_app.document.Document`
(rebuilt when assets come or go, rows updated in place otherwise) behind a
QSortFilterProxyModel for the filter box and column sorting.
"""

from __future__ import annotations

from PySide6.QtCore import QSortFilterProxyModel, Qt, QTimer, Signal
from PySide6.QtGui import QBrush, QColor, QStandardItem, QStandardItemModel
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHeaderView,
    QLineEdit,
    QTreeView,
    QVBoxLayout,
    QWidget,
)

from desktop_app import palette
from desktop_app.document import Document

KEY_ROLE = Qt.ItemDataRole.UserRole + 1
SORT_ROLE = Qt.ItemDataRole.UserRole + 2
COLUMNS = ["Site / asset", "Recommendation", "Year"]
STATE_COLOURS = palette.STATE_COLOURS


class RegisterProxy(QSortFilterProxyModel):
    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setRecursiveFilteringEnabled(True)
        self.setFilterCaseSensitivity(Qt.CaseSensitivity.CaseInsensitive)
        self.setFilterKeyColumn(-1)
        self.setSortRole(SORT_ROLE)

    def filterAcceptsRow(self, row: int, parent) -> bool:  # noqa: N802 - Qt's name
        """A row shows when it matches, or its site does (children of a matching site)."""
        if super().filterAcceptsRow(row, parent):
            return True
        if parent.isValid():
            return super().filterAcceptsRow(parent.row(), parent.parent())
        return False


class RegisterPane(QWidget):
    """Filter box over a tree of sites and assets; emits ``asset_selected(key)``."""

    asset_selected = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.doc: Document | None = None
        self._deferred: set[str] = set()
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        self.filter_edit = QLineEdit()
        self.filter_edit.setPlaceholderText("Filter assets, sites or states…")
        self.filter_edit.setClearButtonEnabled(True)
        self.filter_edit.setObjectName("register_filter")
        layout.addWidget(self.filter_edit)
        self.model = QStandardItemModel(0, len(COLUMNS), self)
        self.model.setHorizontalHeaderLabels(COLUMNS)
        self.proxy = RegisterProxy(self)
        self.proxy.setSourceModel(self.model)
        self.filter_edit.textChanged.connect(self._filter)
        self.view = QTreeView()
        self.view.setModel(self.proxy)
        self.view.setSortingEnabled(True)
        self.view.setUniformRowHeights(True)
        self.view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.view.header().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.view.header().setSectionResizeMode(1, QHeaderView.ResizeMode.ResizeToContents)
        self.view.header().setSectionResizeMode(2, QHeaderView.ResizeMode.ResizeToContents)
        self.view.header().setStretchLastSection(False)
        self.view.sortByColumn(-1, Qt.SortOrder.AscendingOrder)
        self.view.selectionModel().currentRowChanged.connect(self._current_changed)
        layout.addWidget(self.view)
        self._items: dict[str, list[QStandardItem]] = {}
        self._selected: str | None = None

    def _filter(self, text: str) -> None:
        self.proxy.setFilterFixedString(text)
        self.view.expandAll()

    # ------------------------------------------------------------------ document
    def set_document(self, doc: Document) -> None:
        """Show ``doc`` and observe it: rows follow its "study", "year", "result" events."""
        if self.doc is not None:
            self.doc.unsubscribe(self._on_doc_event)
        self.doc = doc
        doc.subscribe(self._on_doc_event)
        self.rebuild()

    def _on_doc_event(self, event: str, key: str | None) -> None:
        if event == "assets":
            self.rebuild()
        elif event == "study" and key is not None and self.doc is not None \
                and self.doc.cached_result(key) is None:
            # The window usually computes the new result at once ("result" follows in the
            # same call): showing "…" in between changed the row twice per edit, each
            # change re-running the sort and filter.  Show "…" on the next turn of the
            # event loop instead, if the result has not arrived by then.
            if not self._deferred:
                QTimer.singleShot(0, self, self._update_deferred)  # dropped if the pane goes
            self._deferred.add(key)
        elif key is not None:
            self.update_row(key)

    def _update_deferred(self) -> None:
        keys, self._deferred = self._deferred, set()
        for key in keys:
            self.update_row(key)

    def rebuild(self) -> None:
        doc = self.doc
        self.model.removeRows(0, self.model.rowCount())
        self._items.clear()
        if doc is None:
            return
        sites: dict[str, QStandardItem] = {}
        for entry in doc.entries:
            site = sites.get(entry.site)
            if site is None:
                site = QStandardItem(entry.site)
                font = site.font()
                font.setBold(True)
                site.setFont(font)
                site.setData(entry.site.lower(), SORT_ROLE)
                row = [site, QStandardItem(""), QStandardItem("")]
                for it in row[1:]:
                    it.setData("", SORT_ROLE)
                self.model.appendRow(row)
                sites[entry.site] = site
            items = [QStandardItem(), QStandardItem(), QStandardItem()]  # filled by update_row
            for it in items:
                it.setData(entry.key, KEY_ROLE)
            site.appendRow(items)
            self._items[entry.key] = items
            self.update_row(entry.key)
        for name in getattr(doc, "empty_sites", ()):  # a workbook's site without assets yet
            if name not in sites:
                site = QStandardItem(name)
                font = site.font()
                font.setBold(True)
                site.setFont(font)
                site.setData(name.lower(), SORT_ROLE)
                note = QStandardItem("no assets yet")
                note.setForeground(QBrush(QColor("#777777")))
                note.setData("", SORT_ROLE)
                empty = QStandardItem("")
                empty.setData("", SORT_ROLE)
                self.model.appendRow([site, note, empty])
        self.view.expandAll()
        self.select(self._selected if self._selected in self._items else
                    (doc.entries[0].key if doc.entries else None))

    def update_row(self, key: str) -> None:
        if self.doc is None or key not in self._items:
            return
        entry = self.doc.entry(key)
        state = self.doc.state(key)
        name, rec, est = self._items[key]
        parent = name.parent()
        if parent is not None and parent.text() != entry.site:
            self.rebuild()  # the asset moved to another site (its title changed)
            return
        if name.text() == entry.name and rec.text() == state.recommendation and \
                est.text() == state.estimates:
            return  # nothing changed: leave the model (and the view) alone
        # Each item is touched only if its own text changed: every setText/setData is a
        # dataChanged the sorting proxy acts on (a price edit changes the state alone).
        if name.text() != entry.name:
            name.setText(entry.name)
            name.setData(entry.name.lower(), SORT_ROLE)
            name.setToolTip(f"{entry.site}: {entry.name}")
        if rec.text() != state.recommendation:
            rec.setText(state.recommendation)
            rec.setData(state.sort_key, SORT_ROLE)
            colour = palette.state_colour(state.recommendation)
            rec.setForeground(QBrush(QColor(colour)))
        if est.text() != state.estimates:
            est.setText(state.estimates)
            est.setData((state.out_of_date, state.estimates), SORT_ROLE)
            est.setForeground(QBrush(QColor(palette.ATTENTION if state.out_of_date
                                            else palette.TEXT)))
            est.setToolTip("The study year is older than this year: restudy with fresh estimates."
                           if state.out_of_date else ("No study year recorded (study files carry "
                                                      "none; workbooks do)." if state.estimates == "—"
                                                      else "Estimates are this year's."))

    def update_all(self) -> None:
        for key in list(self._items):
            self.update_row(key)

    # ------------------------------------------------------------------ selection
    def select(self, key: str | None) -> None:
        self._selected = key
        if key is None or key not in self._items:
            return
        index = self.proxy.mapFromSource(self._items[key][0].index())
        if index.isValid():
            self.view.setCurrentIndex(index)

    def current_key(self) -> str | None:
        return self._selected

    def _current_changed(self, current, _previous) -> None:
        key = current.siblingAtColumn(0).data(KEY_ROLE)
        if key and key != self._selected:
            self._selected = key
            self.asset_selected.emit(key)
        elif key:
            self._selected = key

    def visible_keys(self) -> list[str]:
        """Asset keys in the order the view shows them (after filter and sort)."""
        out = []
        for r in range(self.proxy.rowCount()):
            site = self.proxy.index(r, 0)
            for c in range(self.proxy.rowCount(site)):
                key = self.proxy.index(c, 0, site).data(KEY_ROLE)
                if key:
                    out.append(key)
        return out
