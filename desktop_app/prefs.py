"""Preferences kept with QSettings (organisation "Tenure"): default MARR, currency, page size."""

from __future__ import annotations

from PySide6.QtCore import QByteArray, QSettings
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QLineEdit,
    QSpinBox,
    QWidget,
)

ORGANISATION = "Tenure"
APPLICATION = "Tenure"
MAX_RECENT = 8


def settings() -> QSettings:
    """The settings store (an INI file in the user's config folder; tests point it elsewhere)."""
    return QSettings(QSettings.Format.IniFormat, QSettings.Scope.UserScope, ORGANISATION,
                     APPLICATION)


class Preferences:
    """Typed access to the stored preferences."""

    def __init__(self, store: QSettings | None = None) -> None:
        self.store = store or settings()

    def _get(self, key: str, default, kind):
        value = self.store.value(key, default)
        try:
            return kind(value)
        except (TypeError, ValueError):
            return default

    @property
    def default_marr(self) -> float:
        return self._get("prefs/default_marr", 0.10, float)

    @default_marr.setter
    def default_marr(self, value: float) -> None:
        self.store.setValue("prefs/default_marr", float(value))

    @property
    def currency(self) -> str:
        return str(self.store.value("prefs/currency", "£") or "£")

    @currency.setter
    def currency(self, value: str) -> None:
        self.store.setValue("prefs/currency", value)

    @property
    def page_size(self) -> str:
        value = str(self.store.value("prefs/page_size", "A4"))
        return value if value in ("A4", "Letter") else "A4"

    @page_size.setter
    def page_size(self, value: str) -> None:
        self.store.setValue("prefs/page_size", value)

    @property
    def autosave_seconds(self) -> int:
        return self._get("prefs/autosave_seconds", 60, int)

    @autosave_seconds.setter
    def autosave_seconds(self, value: int) -> None:
        self.store.setValue("prefs/autosave_seconds", int(value))

    # the window's layout: geometry and splitter states (QByteArray from save*/restore*)
    def layout(self, name: str) -> QByteArray | None:
        value = self.store.value(f"layout/{name}", None)
        return value if isinstance(value, QByteArray) and not value.isEmpty() else None

    def set_layout(self, name: str, state: QByteArray) -> None:
        self.store.setValue(f"layout/{name}", state)

    # recent files and the last workbook
    def recent(self) -> list[str]:
        value = self.store.value("recent_files", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def add_recent(self, path: str) -> None:
        items = [p for p in self.recent() if p != path]
        self.store.setValue("recent_files", [path, *items][:MAX_RECENT])
        self.store.setValue("last_file", path)

    def clear_recent(self) -> None:
        self.store.setValue("recent_files", [])

    @property
    def last_file(self) -> str | None:
        value = self.store.value("last_file", None)
        return str(value) if value else None


class PreferencesDialog(QDialog):
    def __init__(self, prefs: Preferences, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Preferences")
        self.prefs = prefs
        form = QFormLayout(self)
        self.marr = QDoubleSpinBox()
        self.marr.setRange(-99.0, 100.0)
        self.marr.setDecimals(2)
        self.marr.setSuffix(" %")
        self.marr.setValue(prefs.default_marr * 100)
        form.addRow("Default MARR for new studies", self.marr)
        self.currency = QLineEdit(prefs.currency)
        self.currency.setMaxLength(4)
        form.addRow("Currency symbol", self.currency)
        self.page = QComboBox()
        self.page.addItems(["A4", "Letter"])
        self.page.setCurrentText(prefs.page_size)
        form.addRow("Memo page size", self.page)
        self.autosave = QSpinBox()
        self.autosave.setRange(10, 3600)
        self.autosave.setSuffix(" s")
        self.autosave.setValue(prefs.autosave_seconds)
        form.addRow("Autosave every", self.autosave)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok
                                   | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)

    def apply(self) -> None:
        self.prefs.default_marr = round(self.marr.value() / 100.0, 6)
        self.prefs.currency = self.currency.text().strip() or "£"
        self.prefs.page_size = self.page.currentText()
        self.prefs.autosave_seconds = self.autosave.value()
