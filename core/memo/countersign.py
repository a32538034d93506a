"""Sign an issued memo in a later role, after the signer checks. One call for the CLI and window.

``sign_later`` refuses a memo that is not intact, checks who signs
(:mod:`core.memo.signers`: the printed name of the role's box, one certificate
in two roles) and raises :class:`SignerNotConfirmed`, carrying the findings,
unless ``confirmed``; then signs (an incremental update, written atomically)
and, with ``workbook``, records the signature in the workbook's memo register
(role, signer, certificate fingerprint, time).
"""

from __future__ import annotations

import datetime as _dt
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from core.memo.errors import MemoError
from core.memo.signers import SignerFinding, printed_names, signer_findings

__all__ = ["LaterSignature", "MemoNotIntact", "SignerNotConfirmed", "check_signer", "sign_later"]


class SignerNotConfirmed(MemoError):
    """Signer checks stand and the signer has not confirmed (the CLI's ``--confirm``)."""

    def __init__(self, findings: tuple[SignerFinding, ...]):
        super().__init__("--confirm", "; ".join(f.message for f in findings)
                         + "; sign anyway only after checking (--confirm)")
        self.findings = findings


class MemoNotIntact(MemoError):
    """The memo already fails verification; no signature is added to it."""


@dataclass(frozen=True)
class LaterSignature:
    """A signature just added to an issued memo."""

    path: str
    role: str
    signer: str
    certificate_sha256: str
    signed_at: str  # ISO 8601, UTC (the signer's clock)
    fingerprint: str
    title: str | None
    findings: tuple[SignerFinding, ...]  # the checks the signer confirmed
    register_note: str | None = None  # why it was not recorded, when a workbook was given
    recorded: bool = False


def check_signer(pdf: bytes, role: str, certificate_name: str,
                 certificate_sha256: str, signatures) -> tuple[SignerFinding, ...]:
    """The findings for signing ``role`` of ``pdf`` (``signatures``: verify's reports)."""
    done = {s.role: s.cert_sha256 for s in signatures if s.role and s.cert_sha256}
    return signer_findings(role, certificate_name, certificate_sha256, printed_names(pdf), done)


def sign_later(
    memo: str | os.PathLike,
    identity: str | os.PathLike,
    passphrase: bytes,
    role: str,
    *,
    output: str | os.PathLike | None = None,
    confirmed: bool = False,
    workbook: str | None = None,
    progress: Callable[[int, str], None] | None = None,
) -> LaterSignature:
    """Check, sign ``memo`` in ``role``'s field, and record it in ``workbook``'s register.

    Raises :class:`MemoNotIntact`, :class:`SignerNotConfirmed` (unless ``confirmed``)
    or :class:`MemoError` (bad identity, passphrase, role, field already signed).
    """
    from core.memo.identity import load_identity
    from core.memo.sign import FIELD_NAMES, ROLES, _atomic_write, sign_pdf_bytes, signature_fields
    from core.memo.verify import verify_memo_bytes

    def step(p: int, text: str) -> None:
        if progress is not None:
            progress(p, text)

    role = role.lower()
    if role not in ROLES:
        raise MemoError("--role", f"unknown role {role!r}; use one of {', '.join(ROLES)}")
    src = Path(memo)
    try:
        data = src.read_bytes()
    except OSError as e:
        raise MemoError(str(src), f"cannot read: {e.strerror or e}") from None
    step(5, "Opening the identity")
    info = load_identity(identity, passphrase)
    step(15, "Checking the memo")
    rep = verify_memo_bytes(data, path=str(src), use_user_trust=False)  # refuses non-memos
    if rep.signatures and not rep.integrity_ok:
        raise MemoNotIntact(str(src), "the memo is not intact; refusing to add a signature "
                            "(run tenure verify for details)")
    field = FIELD_NAMES[role]
    fields = signature_fields(data)
    if field not in fields:
        raise MemoError("--role", f"the memo has no {field} signature field")
    if fields[field]:
        raise MemoError("--role", f"the {field} field is already signed")
    findings = check_signer(data, role, info.common_name, info.sha256, rep.signatures)
    if findings and not confirmed:
        raise SignerNotConfirmed(findings)
    step(40, "Signing")
    new, res = sign_pdf_bytes(data, identity, passphrase, role)
    when = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
    step(85, "Writing the file")
    target = Path(output) if output else src
    _atomic_write(target, new)
    note = None
    if workbook:
        step(95, "Recording in the workbook")
        from core.memo.register import record_signature_in_workbook

        note = record_signature_in_workbook(workbook, str(target), rep.footer_fingerprint or "",
                                            rep.attachment_title, res.role, res.signer,
                                            res.certificate_sha256, when)
    step(100, "Done")
    return LaterSignature(path=str(target), role=res.role, signer=res.signer,
                          certificate_sha256=res.certificate_sha256, signed_at=when,
                          fingerprint=rep.footer_fingerprint or "", title=rep.attachment_title,
                          findings=findings, register_note=note,
                          recorded=bool(workbook) and note is None)
