"""Sign an issued memo in a later role, and verify any memo (File ▸ Sign a memo, Verify a memo).

Views only: the checks, the signature and the verification are core's
(:func:`core.memo.countersign.sign_later`, :func:`core.memo.verify.verify_memo`).
Both run on a QThreadPool worker with a progress bar, as the Issue memo dialog
does. Signing warns and asks to confirm when the certificate's name differs from
the name printed in the role's box, or when the same certificate already signed
another role (docs/method.md §8); a signature made here is recorded in the open
workbook's memo register.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

from PySide6.QtCore import QObject, QRunnable, Qt, Signal, Slot
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QHeaderView,
    QLabel,
    QLineEdit,
    QProgressBar,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.errors import escape_text
from core.memo.signers import SignerFinding
from desktop_app.widget_parts import JobDialog, SigningDialog, browse_row
from desktop_app.widget_parts import html_text as _html

__all__ = ["LATER_ROLES", "SignMemoDialog", "VerifyMemoDialog"]

#: Roles signed after the memo is issued.
LATER_ROLES = ("reviewed", "approved")
MEMO_FILTER = "Decision memo (*.pdf)"


class _JobSignals(QObject):
    progress = Signal(int, str)
    done = Signal(object)
    failed = Signal(object)  # the exception (a MemoError carries what to show)


class _Job(QRunnable):
    """Run one core call off the GUI thread; ``work(progress)`` returns the result."""

    def __init__(self, work: Callable[[Callable[[int, str], None]], Any]) -> None:
        super().__init__()
        self.work = work
        self.signals = _JobSignals()
        self.setAutoDelete(False)

    def run(self) -> None:
        try:
            out = self.work(lambda p, t: self.signals.progress.emit(p, t))
        except Exception as exc:  # noqa: BLE001 - shown in the dialog, never lost
            self.signals.failed.emit(exc)
        else:
            self.signals.done.emit(out)


def _message(exc: BaseException) -> str:
    from core.errors import StudyError

    if isinstance(exc, StudyError):
        return str(exc)
    return f"{type(exc).__name__}: {exc}"


def _pick_memo(parent: QWidget, edit: QLineEdit, title: str) -> bool:
    """Ask for a memo (PDF) into ``edit``; False when the user cancels."""
    path, _ = QFileDialog.getOpenFileName(parent, title, edit.text(), MEMO_FILTER)
    if path:
        edit.setText(path)
    return bool(path)


class SignMemoDialog(SigningDialog):
    """Memo, identity, passphrase and role; checks who signs, confirms, signs on a worker."""

    signed = Signal(object)  # core.memo.countersign.LaterSignature

    def __init__(self, parent: QWidget | None = None, workbook_path: str | None = None,
                 memo_path: str | None = None) -> None:
        super().__init__(parent)
        self.workbook_path = workbook_path
        self.result: Any = None
        self.error: str | None = None
        self.register_note: str | None = None
        self._job: _Job | None = None
        self._passphrase: bytes | None = None
        self.setWindowTitle("Sign a memo")
        self.setMinimumWidth(600)
        root = QVBoxLayout(self)
        intro = QLabel("Sign an issued memo as its reviewer or approver. The signature is added "
                       "as an update that keeps earlier signatures valid. Tenure checks that the "
                       "certificate's name is the one printed in the box, and that no one signs "
                       "two roles, and asks before signing if not.")
        intro.setWordWrap(True)
        root.addWidget(intro)
        form = QFormLayout()
        self.memo_edit = QLineEdit(memo_path or "")
        self.memo_edit.setPlaceholderText("the memo (PDF) to sign")
        self.memo_edit.editingFinished.connect(self.refresh_boxes)
        form.addRow("Memo", browse_row(self.memo_edit, self._browse_memo))
        self.boxes = QLabel("")
        self.boxes.setWordWrap(True)
        self.boxes.setTextFormat(Qt.TextFormat.PlainText)
        form.addRow("Sign-off boxes", self.boxes)
        self._add_signing_rows(form, LATER_ROLES)
        root.addLayout(form)
        self._add_progress(root)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.sign_button = self.buttons.addButton("Sign", QDialogButtonBox.ButtonRole.AcceptRole)
        self.buttons.accepted.connect(self.start)
        self.buttons.rejected.connect(self.reject)
        root.addWidget(self.buttons)
        self.refresh_boxes()

    # -- widgets
    def _browse_memo(self) -> None:
        if _pick_memo(self, self.memo_edit, "Memo to sign"):
            self.refresh_boxes()

    @Slot()
    def refresh_boxes(self) -> None:
        """Show each box's printed name and whether it is signed (a quick read, no checks)."""
        from core.memo.sign import FIELD_NAMES, ROLES, signature_fields
        from core.memo.signers import printed_names

        path = self.memo_edit.text().strip()
        if not path:
            self.boxes.setText("choose a memo")
            return
        try:
            data = Path(path).read_bytes()
            fields = signature_fields(data)
            names = printed_names(data) or {}
        except Exception:  # noqa: BLE001 - a label; signing says what is wrong
            self.boxes.setText("not a readable memo")
            return
        lines = []
        for role in ROLES:
            state = ("signed" if fields.get(FIELD_NAMES[role]) else "empty") \
                if FIELD_NAMES[role] in fields else "no field"
            lines.append(f"{role.capitalize()}: {names.get(role) or '(no name printed)'}, "
                         f"{state}")
        self.boxes.setText("\n".join(escape_text(x) for x in lines))
        for role in LATER_ROLES:  # offer the first empty later box
            if fields.get(FIELD_NAMES[role]) is False:
                self.role.setCurrentText(role)
                break

    def ask_confirm(self, findings: tuple[SignerFinding, ...]) -> bool:
        """Ask the signer to confirm despite the findings (a dialog; tests patch it)."""
        return self._sign_anyway("\n\n".join(escape_text(f.message) for f in findings))

    # -- work
    def _fail(self, message: str) -> None:
        self._passphrase = None
        super()._fail(message)

    def _set_busy(self, busy: bool) -> None:
        for w in (self.sign_button, self.memo_edit, self.identity_edit, self.role):
            w.setEnabled(not busy)

    @Slot()
    def start(self) -> None:
        self.error = None
        if not self.memo_edit.text().strip():
            self._fail("Memo: choose the memo to sign")
            return
        problem = self._signing_problem()
        if problem:
            self._fail(problem)
            return
        self._passphrase = self.passphrase.text().encode("utf-8")
        self.passphrase.clear()
        self._run(confirmed=False)

    def _run(self, confirmed: bool) -> None:
        from core.memo.countersign import sign_later

        memo, identity = self.memo_edit.text().strip(), self.identity_edit.text().strip()
        role, passphrase = self.role.currentText(), self._passphrase or b""
        self._set_busy(True)
        self.progress.setValue(0)
        self.progress.setVisible(True)
        self.status.setText("Checking the memo...")
        job = _Job(lambda progress: sign_later(memo, identity, passphrase, role,
                                               confirmed=confirmed, progress=progress))
        job.signals.progress.connect(self._on_progress)
        job.signals.done.connect(self._on_done)
        job.signals.failed.connect(self._on_failed)
        self._launch(job)

    @Slot(object)
    def _on_failed(self, exc: BaseException) -> None:
        from core.memo.countersign import SignerNotConfirmed

        if isinstance(exc, SignerNotConfirmed):
            if self.ask_confirm(exc.findings):
                self._run(confirmed=True)
                return
            self._fail("Not signed: " + "; ".join(f.message for f in exc.findings))
            return
        self._fail(_message(exc))

    @Slot(object)
    def _on_done(self, res: Any) -> None:
        from core.memo.register import record_signature_in_workbook

        self._passphrase = None
        self.result = res
        self.progress.setValue(100)
        # on the GUI thread: the window's open workbook is this thread's connection
        self.register_note = record_signature_in_workbook(
            self.workbook_path, res.path, res.fingerprint, res.title, res.role, res.signer,
            res.certificate_sha256, res.signed_at)
        msg = f"Signed as {res.role} by {res.signer}: {res.path}."
        if self.workbook_path and not self.register_note:
            msg += " Recorded in the workbook's memo register."
        elif self.register_note:
            msg += f" Note: {self.register_note}."
        self.status.setText(_html(escape_text(msg)))
        self._set_busy(False)
        self.sign_button.setEnabled(False)
        self.buttons.button(QDialogButtonBox.StandardButton.Cancel).setText("Close")
        self.refresh_boxes()
        self.signed.emit(res)


#: The verify table's columns.
COLUMNS = ("Role", "Printed name", "Certificate name", "Names match", "Integrity", "Trust",
           "Certificate SHA-256")


class VerifyMemoDialog(JobDialog):
    """Verify a memo on a worker; a row per signature and the result in words."""

    verified = Signal(object)  # core.memo.verify.VerifyReport

    def __init__(self, parent: QWidget | None = None, memo_path: str | None = None) -> None:
        super().__init__(parent)
        self.report: Any = None
        self.error: str | None = None
        self._job: _Job | None = None
        self.setWindowTitle("Verify a memo")
        self.setMinimumWidth(940)
        root = QVBoxLayout(self)
        form = QFormLayout()
        self.memo_edit = QLineEdit(memo_path or "")
        self.memo_edit.setPlaceholderText("the memo (PDF) to verify")
        form.addRow("Memo", browse_row(self.memo_edit, self._browse_memo))
        root.addLayout(form)
        self.summary = QLabel("")
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.PlainText)
        root.addWidget(self.summary)
        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setWordWrap(False)
        self.table.verticalHeader().setVisible(False)
        head = self.table.horizontalHeader()
        for i in range(len(COLUMNS)):
            head.setSectionResizeMode(i, QHeaderView.ResizeMode.ResizeToContents)
        head.setStretchLastSection(True)
        self.table.setMinimumHeight(80)
        root.addWidget(self.table)
        from PySide6.QtGui import QFontDatabase

        self._mono = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        self.findings = QLabel("")
        self.findings.setWordWrap(True)
        self.findings.setTextFormat(Qt.TextFormat.PlainText)
        root.addWidget(self.findings)
        self.result_label = QLabel("")
        self.result_label.setWordWrap(True)
        self.result_label.setTextFormat(Qt.TextFormat.PlainText)
        self.result_label.setStyleSheet("font-weight: bold;")
        root.addWidget(self.result_label)
        self.progress = QProgressBar()
        self.progress.setRange(0, 0)
        self.progress.setVisible(False)
        root.addWidget(self.progress)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        self.verify_button = self.buttons.addButton("Verify",
                                                    QDialogButtonBox.ButtonRole.ActionRole)
        self.verify_button.clicked.connect(self.start)
        self.buttons.rejected.connect(self.reject)
        root.addWidget(self.buttons)

    def _browse_memo(self) -> None:
        if _pick_memo(self, self.memo_edit, "Memo to verify"):
            self.start()

    @Slot()
    def start(self) -> None:
        from core.memo.verify import verify_memo

        self.error = None
        memo = self.memo_edit.text().strip()
        if not memo:
            self._show_error("Memo: choose the memo to verify")
            return
        self.verify_button.setEnabled(False)
        self.progress.setVisible(True)
        self.result_label.setText("Verifying...")
        job = _Job(lambda _progress: verify_memo(memo))
        job.signals.done.connect(self.show_report)
        job.signals.failed.connect(self._on_failed)
        self._launch(job)

    @Slot(object)
    def _on_failed(self, exc: BaseException) -> None:
        self._show_error(_message(exc))

    def _show_error(self, message: str) -> None:
        self.error = message
        self.progress.setVisible(False)
        self.verify_button.setEnabled(True)
        self.table.setRowCount(0)
        self.summary.setText("")
        self.findings.setText("")
        self.result_label.setText(escape_text(message))
        self.result_label.setStyleSheet("font-weight: bold; color: #b00020;")

    @Slot(object)
    def show_report(self, rep: Any) -> None:
        from core.memo.trust import format_fingerprint

        self.report = rep
        self.progress.setVisible(False)
        self.verify_button.setEnabled(True)
        study = f"Study: {rep.attachment_title}. " if rep.attachment_title else ""
        attached = ("the attached study matches the footer fingerprint"
                    if rep.attachment_matches else "the attached study does NOT match the footer")
        empty = (f" Unsigned boxes: {', '.join(rep.empty_fields)}." if rep.empty_fields else "")
        self.summary.setText(escape_text(f"{study}{len(rep.signatures)} signature(s); "
                                         f"{attached}.{empty}"))
        self.table.setRowCount(len(rep.signatures))
        for r, s in enumerate(rep.signatures):
            intact = "intact" if s.integrity_ok else "BROKEN"
            groups = format_fingerprint(s.cert_sha256).split(" ")
            fp = " ".join(groups[:8]) + "\n" + " ".join(groups[8:])
            trust_short = "trusted" if s.trusted else "not vouched for"
            cells = ((s.role or s.field, ""), (s.printed_name or "(none printed)", ""),
                     (s.signer, ""), (s.name_words(), ""),
                     (intact, "; ".join(s.problems)), (trust_short, s.trust_state), (fp, ""))
            for c, (text, tip) in enumerate(cells):
                item = QTableWidgetItem("\n".join(escape_text(x) for x in text.split("\n")))
                item.setToolTip(escape_text(tip or text))
                if c == len(cells) - 1:
                    item.setFont(self._mono)
                self.table.setItem(r, c, item)
        self.table.resizeColumnsToContents()
        self.table.resizeRowsToContents()
        rows_h = sum(self.table.rowHeight(r) for r in range(self.table.rowCount()))
        self.table.setFixedHeight(min(400, self.table.horizontalHeader().height() + rows_h
                                      + 2 * self.table.frameWidth() + 4))
        self.adjustSize()
        notes = [f"Check: {f.message}" for f in rep.signer_findings]
        notes += [f"Problem: {p}" for p in rep.problems]
        self.findings.setText("\n".join(escape_text(n) for n in notes))
        verdict = rep.lines()[-1].removeprefix("result: ")
        if rep.exit_code() == 0 and rep.signer_findings:
            verdict += " (but check who signed: see above)"
        ok = rep.exit_code() == 0 and not rep.signer_findings
        self.result_label.setText(verdict)
        self.result_label.setStyleSheet(
            "font-weight: bold; color: %s;" % ("#1a7f37" if ok else "#b00020"))
        self.verified.emit(rep)
