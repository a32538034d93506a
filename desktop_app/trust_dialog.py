"""Trust a colleague's certificate: show who it names and its fingerprint, then add it.

Views only: reading the certificate and the trust list is :mod:`core.memo.trust`.
The fingerprint is shown large, in groups of four, to be compared with the
colleague in person or by phone before trusting: anyone can make a certificate
with any name, and only the fingerprint tells two of them apart.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import Qt
from PySide6.QtGui import QFont, QFontDatabase
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFileDialog,
    QFormLayout,
    QLabel,
    QMessageBox,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError, escape_text
from core.memo import trust

CERT_FILTER = "Certificates (*.pem *.crt *.cer *.der);;All files (*)"


class TrustCertificateDialog(QDialog):
    """Shows one certificate (name, organisation, validity, fingerprint); Trust adds it."""

    def __init__(self, entry: trust.TrustedCert, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.entry = entry
        self.setWindowTitle("Trust a colleague's certificate")
        layout = QVBoxLayout(self)
        intro = QLabel(
            "Memos signed with this certificate will verify as trusted. Before you trust it, "
            f"read the fingerprint below to {escape_text(entry.name)} in person or by phone "
            "and check that theirs is the same. Anyone can make a certificate carrying any "
            "name; only the fingerprint tells them apart.")
        intro.setWordWrap(True)
        layout.addWidget(intro)
        form = QFormLayout()
        form.addRow("Name:", QLabel(escape_text(entry.name)))
        if entry.organisation:
            form.addRow("Organisation:", QLabel(escape_text(entry.organisation)))
        form.addRow("Kind:", QLabel("certificate authority (vouches for the certificates it "
                                    "issued)" if entry.is_ca else "a signer's own certificate"))
        form.addRow("Valid until:", QLabel(entry.not_after))
        layout.addLayout(form)
        groups = trust.format_fingerprint(entry.sha256).split(" ")
        lines = "\n".join(" ".join(groups[i:i + 4]) for i in range(0, len(groups), 4))
        layout.addWidget(QLabel("SHA-256 fingerprint:"))
        self.fingerprint = QLabel(lines)
        mono = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        mono.setPointSizeF(mono.pointSizeF() * 1.4)
        mono.setWeight(QFont.Weight.DemiBold)
        self.fingerprint.setFont(mono)
        self.fingerprint.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        layout.addWidget(self.fingerprint)
        others = trust.same_name_elsewhere(entry)
        self.warning = QLabel()
        self.warning.setWordWrap(True)
        if others:
            self.warning.setText(
                f"You already trust a different certificate named {escape_text(entry.name)} "
                f"(fingerprint {trust.format_fingerprint(others[0].sha256)[:19]} …). Two "
                "certificates with one name: make sure this one is really theirs.")
            self.warning.setStyleSheet("color: #9a3412;")
        self.warning.setVisible(bool(others))
        layout.addWidget(self.warning)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.trust_button = buttons.addButton("Trust this certificate",
                                              QDialogButtonBox.ButtonRole.AcceptRole)
        cancel = buttons.button(QDialogButtonBox.StandardButton.Cancel)
        cancel.setDefault(True)  # Enter alone never trusts a certificate
        self.trust_button.setAutoDefault(False)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.setMinimumWidth(520)


def trust_certificate(parent: QWidget | None = None, path: str | None = None) -> str | None:
    """Ask for a certificate file, show it, and add it on "Trust"; returns a status line."""
    if path is None:
        path, _ = QFileDialog.getOpenFileName(parent, "Trust a colleague's certificate",
                                              str(Path.home()), CERT_FILTER)
        if not path:
            return None
    try:
        entries = trust.inspect(path)
    except StudyError as exc:
        QMessageBox.warning(parent, "Tenure", f"This file cannot be trusted.\n\n"
                                              f"{escape_text(str(exc))}")
        return f"Not trusted: {escape_text(str(exc))}"
    added = []
    for entry in entries:
        dialog = TrustCertificateDialog(entry, parent)
        if dialog.exec() != QDialog.DialogCode.Accepted:
            continue
        try:
            trust.add(entry.path)
        except StudyError as exc:
            QMessageBox.warning(parent, "Tenure", f"Not trusted.\n\n{escape_text(str(exc))}")
            return f"Not trusted: {escape_text(str(exc))}"
        added.append(entry)
    if not added:
        return "No certificate was trusted"
    return "Trusted: " + "; ".join(
        f"{escape_text(e.name)} ({trust.format_fingerprint(e.sha256)[:19]} …)" for e in added)
