"""Small widget pieces the window and its dialogs share, written once.

``browse_row`` (a line edit with a Browse... button), ``html_text`` (escape for a
rich-text label), ``vertical_split`` (a top/bottom QSplitter), ``JobDialog`` (a
dialog that runs its work on the QThreadPool with a progress bar and a status
line) and ``SigningDialog`` (a JobDialog that also asks for an identity file,
its passphrase and the role to sign as). Views only: no economics, no signing.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path

from PySide6.QtCore import QRunnable, Qt, QThreadPool, Slot
from PySide6.QtWidgets import (
    QComboBox,
    QDialog,
    QFileDialog,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QLineEdit,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QSplitter,
    QVBoxLayout,
    QWidget,
)

__all__ = ["IDENTITY_FILTER", "JobDialog", "SigningDialog", "browse_row", "html_text",
           "vertical_split"]

#: The file filter of the identity (certificate and key) a signer picks.
IDENTITY_FILTER = "PKCS#12 identity (*.p12 *.pfx)"


def html_text(text: object) -> str:
    """``text`` safe inside a rich-text label (``&``, ``<`` and ``>`` escaped)."""
    return str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def browse_row(edit: QLineEdit, slot: Callable[[], None]) -> QWidget:
    """``edit`` with a Browse... button beside it that calls ``slot``."""
    w = QWidget()
    lay = QHBoxLayout(w)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.addWidget(edit, 1)
    b = QPushButton("Browse...")
    b.clicked.connect(slot)
    lay.addWidget(b)
    return w


def vertical_split(top: QWidget, bottom: QWidget, stretch: tuple[int, int],
                   sizes: list[int], collapsible: bool) -> QSplitter:
    """A vertical QSplitter holding ``top`` over ``bottom``."""
    split = QSplitter(Qt.Orientation.Vertical)
    split.addWidget(top)
    split.addWidget(bottom)
    split.setStretchFactor(0, stretch[0])
    split.setStretchFactor(1, stretch[1])
    split.setSizes(sizes)
    split.setChildrenCollapsible(collapsible)
    return split


class JobDialog(QDialog):
    """A dialog whose work runs on the global QThreadPool, with a progress bar and status."""

    progress: QProgressBar
    status: QLabel
    error: str | None

    def _add_progress(self, root: QVBoxLayout) -> None:
        """Add the (hidden) 0-100 progress bar and the status line to ``root``."""
        self.progress = QProgressBar()
        self.progress.setRange(0, 100)
        self.progress.setVisible(False)
        root.addWidget(self.progress)
        self.status = QLabel("")
        self.status.setWordWrap(True)
        root.addWidget(self.status)

    def _launch(self, job: QRunnable) -> None:
        """Keep ``job`` (it is not auto-deleted) and start it on the global pool."""
        self._job = job
        QThreadPool.globalInstance().start(job)

    def _set_busy(self, busy: bool) -> None:
        raise NotImplementedError

    def _fail(self, message: str) -> None:
        self.error = message
        self.status.setText(f"<span style='color:#b00020'>{html_text(message)}</span>")
        self.progress.setVisible(False)
        self._set_busy(False)

    @Slot(int, str)
    def _on_progress(self, percent: int, text: str) -> None:
        self.progress.setValue(percent)
        self.status.setText(text)

    def wait_for_job(self, msecs: int = 30000) -> bool:
        """Block until the worker is done (tests, scripted use)."""
        return QThreadPool.globalInstance().waitForDone(msecs)


class SigningDialog(JobDialog):
    """A JobDialog that asks for an identity file, its passphrase and the role to sign as."""

    def _add_signing_rows(self, form: QFormLayout, roles: Sequence[str]) -> None:
        """Add the Identity (with Browse...), Passphrase and Sign as rows to ``form``."""
        self.identity_edit = QLineEdit()
        self.identity_edit.setPlaceholderText("your identity file (.p12)")
        form.addRow("Identity", browse_row(self.identity_edit, self._browse_identity))
        self.passphrase = QLineEdit()
        self.passphrase.setEchoMode(QLineEdit.EchoMode.Password)
        form.addRow("Passphrase", self.passphrase)
        self.role = QComboBox()
        self.role.addItems(list(roles))
        form.addRow("Sign as", self.role)

    def _browse_identity(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Identity", str(Path.home()),
                                              IDENTITY_FILTER)
        if path:
            self.identity_edit.setText(path)

    def _signing_problem(self) -> str | None:
        """What is missing before signing (identity file, passphrase), else None."""
        if not self.identity_edit.text().strip():
            return "Identity: choose your identity file (.p12)"
        if not self.passphrase.text():
            return "Passphrase: enter the passphrase of your identity"
        return None

    def _sign_anyway(self, text: str) -> bool:
        """Ask whether to sign in the chosen role despite ``text`` (a dialog; tests patch it)."""
        answer = QMessageBox.warning(
            self, "Check who signs", f"{text}\n\nSign as {self.role.currentText()} anyway?",
            QMessageBox.StandardButton.Yes | QMessageBox.StandardButton.No,
            QMessageBox.StandardButton.No)
        return answer == QMessageBox.StandardButton.Yes
