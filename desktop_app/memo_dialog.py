"""The "Issue memo" dialog: render and sign the decision memo of one study.

``IssueMemoDialog(result, parent=None, workbook_path=None)``. The render and
the signature run on a QThreadPool worker with a progress bar; the dialog
then opens the PDF (QDesktopServices) and records it in the workbook's memo
register when the workbook offers ``core.workbook.record_memo``. No economics
here: the dialog calls :func:`core.memo.issue.issue_memo`.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from PySide6.QtCore import QObject, QRunnable, QUrl, Signal, Slot
from PySide6.QtGui import QDesktopServices
from PySide6.QtWidgets import (
    QCheckBox,
    QComboBox,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QGroupBox,
    QLabel,
    QLineEdit,
    QVBoxLayout,
    QWidget,
)

from core.memo.cautions import caution_texts
from core.memo.page_one import asset_facts, page_one_facts
from core.memo.register import record_in_workbook
from core.memo.render import MemoOptions
from core.memo.sign import ROLES
from desktop_app.widget_parts import SigningDialog, browse_row
from desktop_app.widget_parts import html_text as _html

__all__ = ["IssueMemoDialog", "MemoJob", "record_in_workbook"]


class MemoSignals(QObject):
    progress = Signal(int, str)
    done = Signal(object)  # IssuedMemo
    failed = Signal(str)
    confirm = Signal(object)  # the SignerFinding tuple to confirm before signing


class MemoJob(QRunnable):
    """Render (and sign) one memo off the GUI thread."""

    def __init__(self, result: Any, out: str, options: MemoOptions, identity: str | None,
                 passphrase: bytes | None, role: str, confirmed: bool = False) -> None:
        super().__init__()
        self.result, self.out, self.options = result, out, options
        self.identity, self.passphrase, self.role = identity, passphrase, role
        self.confirmed = confirmed
        self.signals = MemoSignals()
        self.setAutoDelete(False)

    def run(self) -> None:
        from core.errors import StudyError
        from core.memo.countersign import SignerNotConfirmed
        from core.memo.issue import issue_memo

        asking = False
        try:
            issued = issue_memo(self.result, self.out, self.options, identity=self.identity,
                                passphrase=self.passphrase, role=self.role,
                                progress=lambda p, t: self.signals.progress.emit(p, t),
                                confirmed=self.confirmed)
        except SignerNotConfirmed as exc:
            asking = True  # the passphrase stays with the job until the signer answers
            self.signals.confirm.emit(exc.findings)
        except StudyError as exc:  # MemoError included: a message the user can act on
            self.signals.failed.emit(str(exc))
        except Exception as exc:  # noqa: BLE001 - never let a worker die silently
            self.signals.failed.emit(f"could not issue the memo ({type(exc).__name__}: {exc})")
        else:
            self.signals.done.emit(issued)
        finally:
            if not asking:
                self.passphrase = None


def _safe_name(title: str) -> str:
    return re.sub(r"[^\w\- .]+", "_", title).strip() or "memo"


def _preferences() -> tuple[str, str]:
    """(currency, page size) from the window's preferences, with the memo's defaults."""
    try:
        from desktop_app.prefs import Preferences

        prefs = Preferences()
        return prefs.currency or "GBP", prefs.page_size
    except Exception:
        return "GBP", "A4"


def _headline(result: Any) -> str:
    """The memo's page-one sentence (plain words, EAC as a cost), else the engine's reason."""
    try:
        return page_one_facts(result, _preferences()[0]).sentence
    except Exception:  # noqa: BLE001 - a label; never a reason the dialog cannot open
        return str(result.recommendation.reason)


class IssueMemoDialog(SigningDialog):
    """Identity, passphrase, sign-off names, page size; issue on a worker; open the PDF."""

    memoIssued = Signal(object)  # noqa: N815 - Qt naming

    def __init__(self, result: Any, parent: QWidget | None = None,
                 workbook_path: str | None = None) -> None:
        super().__init__(parent)
        self.result = result
        self.workbook_path = workbook_path
        self.issued: Any = None
        self.error: str | None = None
        self._job: MemoJob | None = None
        self.setWindowTitle(f"Issue memo: {result.study.title}")
        self.setMinimumWidth(560)

        root = QVBoxLayout(self)
        rec = QLabel(_headline(result))
        rec.setWordWrap(True)
        rec.setStyleSheet("font-weight: bold;")
        rec.setMinimumWidth(540)
        rec.setMinimumHeight(rec.heightForWidth(540))  # a wrapped label is not squeezed
        root.addWidget(rec)

        form = QFormLayout()
        self.out_edit = QLineEdit(str(Path.home() / f"{_safe_name(result.study.title)} memo.pdf"))
        form.addRow("Save memo as", browse_row(self.out_edit, self._browse_out))
        self.page_size = QComboBox()
        self.page_size.addItems(["A4", "Letter"])
        prefs = _preferences()
        self.page_size.setCurrentText(prefs[1])
        form.addRow("Page size", self.page_size)
        self.currency = QLineEdit(prefs[0])
        form.addRow("Currency", self.currency)
        self.organisation = QLineEdit()
        form.addRow("Organisation", self.organisation)
        self.names = {}
        for role in ROLES:
            edit = QLineEdit()
            edit.setPlaceholderText("name (optional)")
            self.names[role] = edit
            form.addRow(f"{role.capitalize()} by", edit)
        root.addLayout(form)

        sign_box = QGroupBox("Sign now")
        sign_box.setCheckable(True)
        sign_box.setChecked(False)
        self.sign_box = sign_box
        self._add_signing_rows(QFormLayout(sign_box), ROLES)
        root.addWidget(sign_box)

        cautions = QLabel("<b>Cautions (printed in the memo):</b><ul>"
                          + "".join(f"<li>{_html(c)}</li>" for c in caution_texts()) + "</ul>")
        cautions.setWordWrap(True)
        root.addWidget(cautions)

        self.open_after = QCheckBox("Open the memo when it is written")
        self.open_after.setChecked(True)
        root.addWidget(self.open_after)
        self._add_progress(root)

        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.issue_button = self.buttons.addButton("Issue memo",
                                                   QDialogButtonBox.ButtonRole.AcceptRole)
        self.buttons.accepted.connect(self.start)
        self.buttons.rejected.connect(self.reject)
        root.addWidget(self.buttons)

    # -- widgets
    def _browse_out(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Save memo as", self.out_edit.text(),
                                              "PDF (*.pdf)")
        if path:
            self.out_edit.setText(path if path.lower().endswith(".pdf") else path + ".pdf")

    # -- work
    def options(self) -> MemoOptions:
        names = {r: (e.text().strip() or None) for r, e in self.names.items()}
        return MemoOptions(page_size=self.page_size.currentText(),
                           currency=self.currency.text().strip() or "GBP",
                           prepared_by=names["prepared"], reviewed_by=names["reviewed"],
                           approved_by=names["approved"],
                           organisation=self.organisation.text().strip() or None,
                           asset=(asset_facts(self.workbook_path, self.result.study)
                                  if self.workbook_path else None))

    def _set_busy(self, busy: bool) -> None:
        self.issue_button.setEnabled(not busy)
        for w in (self.out_edit, self.sign_box, self.page_size):
            w.setEnabled(not busy)

    @Slot()
    def start(self) -> None:
        self.error = None
        out = self.out_edit.text().strip()
        if not out:
            self._fail("Save memo as: choose a file name")
            return
        if not Path(out).parent.exists():
            self._fail(f"Save memo as: folder {Path(out).parent} does not exist")
            return
        identity = passphrase = None
        role = self.role.currentText()
        if self.sign_box.isChecked():
            problem = self._signing_problem()
            if problem:
                self._fail(problem)
                return
            identity = self.identity_edit.text().strip()
            passphrase = self.passphrase.text().encode("utf-8")
        self._set_busy(True)
        self.progress.setValue(0)
        self.progress.setVisible(True)
        self.passphrase.clear()
        self._start_job(out, identity, passphrase, role, confirmed=False)

    def _start_job(self, out: str, identity: str | None, passphrase: bytes | None, role: str,
                   confirmed: bool) -> None:
        self.status.setText("Issuing the memo...")
        job = MemoJob(self.result, out, self.options(), identity, passphrase, role, confirmed)
        job.signals.progress.connect(self._on_progress)
        job.signals.done.connect(self._on_done)
        job.signals.failed.connect(self._fail)
        job.signals.confirm.connect(self._on_confirm)
        self._launch(job)

    def ask_confirm(self, findings: tuple) -> bool:
        """Ask the signer to confirm despite the signer checks (a dialog; tests patch it)."""
        return self._sign_anyway("\n\n".join(f.message for f in findings))

    @Slot(object)
    def _on_confirm(self, findings: tuple) -> None:
        job = self._job
        if job is not None and self.ask_confirm(findings):
            self._start_job(job.out, job.identity, job.passphrase, job.role, confirmed=True)
            return
        if job is not None:
            job.passphrase = None
        self._fail("Not issued: " + "; ".join(f.message for f in findings))

    @Slot(object)
    def _on_done(self, issued: Any) -> None:
        self.issued = issued
        self.progress.setValue(100)
        note = record_in_workbook(self.workbook_path, issued)
        signed = f"signed as {issued.role} by {issued.signed_by}" if issued.signed_by \
            else "not signed yet"
        msg = f"Memo written: {issued.path} ({issued.pages} pages, {signed})."
        if note:
            msg += f" Note: {note}."
        self.status.setText(_html(msg))
        self._set_busy(False)
        self.issue_button.setEnabled(False)
        self.buttons.button(QDialogButtonBox.StandardButton.Cancel).setText("Close")
        self.memoIssued.emit(issued)
        if self.open_after.isChecked():
            QDesktopServices.openUrl(QUrl.fromLocalFile(issued.path))
