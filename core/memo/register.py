"""Record an issued memo in the workbook's memo register (docs/method.md §7), when there is one.

Calls ``core.workbook.record_memo``, passing only the keyword arguments it accepts.
Recording never makes issuing fail: problems come back as a short note.
"""

from __future__ import annotations

import inspect
from typing import Any

import core.workbook

__all__ = ["record_in_workbook", "record_signature_in_workbook"]


def record_in_workbook(workbook_path: str | None, issued: Any) -> str | None:
    """Record the memo in the workbook's register, if the workbook API offers it.

    Returns None when recorded (or nothing to do), else a short note why not.
    Passes only the keyword arguments ``core.workbook.record_memo`` accepts.
    """
    if not workbook_path:
        return None
    return _record(workbook_path, {
        "memo_path": issued.path, "pdf_path": issued.path, "memo": issued.path,
        "fingerprint": issued.fingerprint, "study_fingerprint": issued.fingerprint,
        "title": issued.title, "study_title": issued.title,
        "signer": issued.signed_by, "signed_by": issued.signed_by, "role": issued.role,
        "certificate_sha256": issued.signer_cert_sha256,
    })


def record_signature_in_workbook(workbook_path: str | None, memo_path: str, fingerprint: str,
                                 title: str | None, role: str, signer: str,
                                 certificate_sha256: str, time: str) -> str | None:
    """Record a later signature (reviewed, approved) of an issued memo in the register.

    One row per signature: role, signer, certificate fingerprint and time (ISO, UTC).
    Returns None when recorded (or no workbook), else a short note why not.
    """
    if not workbook_path:
        return None
    return _record(workbook_path, {
        "memo_path": memo_path, "pdf_path": memo_path, "memo": memo_path,
        "fingerprint": fingerprint, "study_fingerprint": fingerprint,
        "title": title, "study_title": title, "signer": signer, "signed_by": signer,
        "role": role, "certificate_sha256": certificate_sha256, "time": time,
    })


def _record(workbook_path: str, meta: dict[str, Any]) -> str | None:
    fn = core.workbook.record_memo  # looked up at call time (tests put a stand-in there)
    try:
        params = list(inspect.signature(fn).parameters.values())
        named = [p for p in params[1:]
                 if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)]
        kwargs = {p.name: meta[p.name] for p in named if p.name in meta}
        if any(p.kind == p.VAR_KEYWORD for p in params):
            for k in ("memo_path", "fingerprint", "title", "signer", "role"):
                kwargs.setdefault(k, meta[k])
        fn(workbook_path, **kwargs)
    except Exception as exc:  # noqa: BLE001 - the memo is issued either way
        return f"not recorded in the workbook ({exc})"
    return None
