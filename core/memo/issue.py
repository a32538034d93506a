"""Issue a memo: render, optionally sign, write atomically. One call for the CLI and window.

>>> import tempfile, pathlib
>>> from core.estimates import Alternative, MarketValues, OperatingCosts, Study
>>> from core.study import run_study
>>> d = Alternative("Old press", "defender", 20000.0, 3, MarketValues(decline_rate=0.3),
...                 OperatingCosts(first=9000.0, gradient=2500.0))
>>> c = Alternative("New press", "challenger", 60000.0, 8, MarketValues(decline_rate=0.2),
...                 OperatingCosts(first=3000.0, gradient=500.0))
>>> out = pathlib.Path(tempfile.mkdtemp()) / "memo.pdf"
>>> issued = issue_memo(run_study(Study("Press line", 0.10, d, (c,))), out)
>>> issued.signed_by is None, out.exists()
(True, True)
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from core.memo.errors import MemoError
from core.memo.render import MemoOptions, render_memo_pages
from core.memo.sign import _atomic_write, sign_pdf_bytes
from core.studyfile import fingerprint

__all__ = ["IssuedMemo", "issue_memo"]


@dataclass(frozen=True)
class IssuedMemo:
    """A memo just written."""

    path: str
    fingerprint: str
    title: str
    pages: int
    role: str | None
    signed_by: str | None
    signer_cert_sha256: str | None


def issue_memo(
    result: Any,
    out: str | os.PathLike,
    options: MemoOptions | None = None,
    *,
    identity: str | os.PathLike | None = None,
    passphrase: bytes | None = None,
    role: str = "prepared",
    progress: Callable[[int, str], None] | None = None,
    confirmed: bool = False,
) -> IssuedMemo:
    """Render the memo of ``result`` into ``out``; sign it in ``role``'s field if an identity is given.

    ``progress(percent, text)`` is called at each step (the window's progress bar).
    When the identity's name differs from the name printed in ``role``'s box, raises
    :class:`core.memo.countersign.SignerNotConfirmed` unless ``confirmed``
    (docs/method.md §8); nothing is written then.
    """
    def step(p: int, text: str) -> None:
        if progress is not None:
            progress(p, text)

    opts = options or MemoOptions()
    cert_sha = None
    signer_name = None
    if identity is not None:
        if passphrase is None:
            raise MemoError("--passphrase-file", "a passphrase is needed to sign")
        from core.memo.identity import load_identity

        step(5, "Opening the identity")
        info = load_identity(identity, passphrase)
        cert_sha = info.sha256
        signer_name = info.common_name
        names = opts.names()
        from core.memo.countersign import SignerNotConfirmed
        from core.memo.signers import signer_findings

        findings = signer_findings(role, info.common_name, info.sha256,
                                   {r: n for r, n in names.items() if n}, {})
        if findings and not confirmed:
            raise SignerNotConfirmed(findings)
        if not names.get(role):
            opts = opts.with_signer(role, info.common_name)
    step(15, "Laying out the memo")
    pdf, pages = render_memo_pages(result, opts)
    step(70, "Attaching the study")
    role_done = None
    if identity is not None:
        step(80, "Signing")
        assert passphrase is not None  # checked above
        pdf, res = sign_pdf_bytes(pdf, identity, passphrase, role)
        role_done = res.role
        signer_name = res.signer
    step(95, "Writing the file")
    target = Path(out)
    _atomic_write(target, pdf)
    step(100, "Done")
    return IssuedMemo(path=str(target), fingerprint=fingerprint(result.study),
                      title=result.study.title, pages=pages, role=role_done,
                      signed_by=signer_name if role_done else None,
                      signer_cert_sha256=cert_sha if role_done else None)
