"""Sign a memo PDF with a PAdES signature (pyHanko), and prepare its fields.

The memo renderer leaves one empty signature field per sign-off role
(``Prepared``, ``Reviewed``, ``Approved``) in the sign-off block. Each signer
fills one field; every signature after the first is an incremental update, so
earlier signatures stay valid (their bytes are untouched; the update only
fills a signature field, which the modification analysis accepts).

No network: no timestamp server, no revocation fetch. The signing time is the
signer's clock (reported as such by ``verify``).
"""

from __future__ import annotations

import io
import os
from dataclasses import dataclass
from pathlib import Path

from core.memo.errors import MemoError, NotAMemoError
from core.memo.identity import load_pkcs12_bytes
from core.memo.names import stamp_text
from core.memo.roles import FIELD_NAMES, ROLES
from core.memo.signers import INFO_SIGNOFF_KEY, signoff_info_value

__all__ = [
    "ROLES",
    "FIELD_NAMES",
    "SignResult",
    "finish_pdf",
    "sign_pdf_bytes",
    "sign_memo_file",
    "signature_fields",
]

ATTACHMENT_NAME = "study.tenure.json"
PLAN_ATTACHMENT_NAME = "plan.tenure.json"
INFO_FINGERPRINT_KEY = "/TenureFingerprint"
INFO_VERSION_KEY = "/TenureMemoVersion"


@dataclass(frozen=True)
class SignResult:
    """One signature just added."""

    role: str
    field: str
    signer: str
    output: str | None
    certificate_sha256: str = ""  # hex


def finish_pdf(
    pdf: bytes,
    *,
    attachment: bytes,
    fingerprint: str,
    fields: dict[str, tuple[int, tuple[float, float, float, float]]],
    title: str | None = None,
    attachment_name: str = ATTACHMENT_NAME,
    description: str | None = None,
    names: dict[str, str | None] | None = None,
) -> bytes:
    """Embed the study JSON, add the fingerprint keys and the empty signature fields.

    ``fields`` maps role -> (page index from 0, (x1, y1, x2, y2) in points).
    ``attachment_name`` and ``description`` name another attachment (the capital plan's
    inputs, ``PLAN_ATTACHMENT_NAME``); ``names`` (role -> the name printed in its box)
    goes into the ``/TenureSignOff`` Info key, for the signer checks of
    :mod:`core.memo.signers`.
    Returns the new PDF bytes (an incremental update on ``pdf``).
    """
    from pyhanko.pdf_utils import generic
    from pyhanko.pdf_utils.embed import EmbeddedFileObject, EmbeddedFileParams, FileSpec, embed_file
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign.fields import SigFieldSpec, append_signature_field

    w = IncrementalPdfFileWriter(io.BytesIO(pdf))
    ef = EmbeddedFileObject.from_file_data(
        w,
        data=attachment,
        mime_type="application/json",
        params=EmbeddedFileParams(embed_size=True),
    )
    spec = FileSpec(
        file_spec_string=attachment_name,
        file_name=attachment_name,
        embedded_data=ef,
        description=description or (f"Tenure study file{f' ({title})' if title else ''}; "
                                    f"SHA-256 fingerprint {fingerprint}"),
        af_relationship=generic.pdf_name("/Source"),
    )
    embed_file(w, spec)
    # the catalog's /AF array names the associated file (PDF 2.0 / PDF/A-3 style)
    w.root["/AF"] = generic.ArrayObject([w.add_object(spec.as_pdf_object())])
    w.update_root()
    # custom Info keys: what verify compares with the attachment
    info_ref = w.trailer.raw_get("/Info")
    info = info_ref.get_object()
    info[generic.pdf_name(INFO_FINGERPRINT_KEY)] = generic.TextStringObject(fingerprint)
    info[generic.pdf_name(INFO_VERSION_KEY)] = generic.TextStringObject("1")
    if names is not None:

        info[generic.pdf_name(INFO_SIGNOFF_KEY)] = generic.TextStringObject(
            signoff_info_value(names))
    w.mark_update(info_ref)
    for role in ROLES:
        if role not in fields:
            continue
        page, box = fields[role]
        append_signature_field(
            w,
            SigFieldSpec(
                sig_field_name=FIELD_NAMES[role],
                on_page=page,
                box=(int(round(box[0])), int(round(box[1])), int(round(box[2])),
                     int(round(box[3]))),
            ),
        )
    out = io.BytesIO()
    w.write(out)
    return out.getvalue()


def signature_fields(pdf: bytes) -> dict[str, bool]:
    """Field name -> whether it already holds a signature."""
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.fields import enumerate_sig_fields

    r = PdfFileReader(io.BytesIO(pdf), strict=False)
    return {name: value is not None for name, value, _ in enumerate_sig_fields(r)}


def _signer_name(cert) -> str:
    try:
        return cert.subject.native.get("common_name") or cert.subject.human_friendly
    except Exception:  # noqa: BLE001
        return "unknown signer"


def sign_pdf_bytes(
    pdf: bytes,
    identity: str | os.PathLike,
    passphrase: bytes,
    role: str = "prepared",
    *,
    reason: str | None = None,
    location: str | None = None,
    display_name: str | None = None,
) -> tuple[bytes, SignResult]:
    """Add one PAdES signature into the role's field; returns (new bytes, result)."""
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.pdf_utils.misc import PdfError
    from pyhanko.pdf_utils.text import TextBoxStyle
    from pyhanko.sign import signers
    from pyhanko.sign.fields import SigSeedSubFilter
    from pyhanko.stamp import TextStampStyle

    role = role.lower()
    if role not in ROLES:
        raise MemoError("--role", f"unknown role {role!r}; use one of {', '.join(ROLES)}")
    p12, _key, _cert, _extra = load_pkcs12_bytes(identity, passphrase)
    try:
        signer = signers.SimpleSigner.load_pkcs12_data(p12, other_certs=[], passphrase=passphrase)
    except ValueError:
        raise MemoError("--passphrase-file", f"wrong passphrase for {identity}") from None
    field = FIELD_NAMES[role]
    try:
        fields = signature_fields(pdf)
    except Exception:  # noqa: BLE001
        raise NotAMemoError("MEMO", "not a readable PDF") from None
    if field not in fields:
        raise MemoError("--role", f"the memo has no {field} signature field")
    if fields[field]:
        raise MemoError("--role", f"the {field} field is already signed")
    name = _signer_name(signer.signing_cert)
    who = display_name or name
    meta = signers.PdfSignatureMetadata(
        field_name=field,
        md_algorithm="sha256",
        subfilter=SigSeedSubFilter.PADES,
        reason=reason or f"{role.capitalize()} (Tenure decision memo)",
        location=location,
        name=who,
        signer_key_usage={"non_repudiation"},
    )
    style = TextStampStyle(
        stamp_text=f"{role.capitalize()}: %(signer)s\nDigitally signed %(ts)s",
        text_box_style=TextBoxStyle(font_size=8),
        border_width=1,
        timestamp_format="%Y-%m-%d %H:%M UTC",
    )
    try:
        w = IncrementalPdfFileWriter(io.BytesIO(pdf))
        out = io.BytesIO()
        signers.PdfSigner(meta, signer, stamp_style=style).sign_pdf(
            w, output=out, appearance_text_params={"signer": stamp_text(who)}
        )
    except PdfError as e:
        raise MemoError("MEMO", f"cannot sign: {e}") from None
    return out.getvalue(), SignResult(role=role, field=field, signer=name, output=None,
                                      certificate_sha256=signer.signing_cert.sha256.hex())


def sign_memo_file(
    memo: str | os.PathLike,
    identity: str | os.PathLike,
    passphrase: bytes,
    role: str = "approved",
    *,
    output: str | os.PathLike | None = None,
    reason: str | None = None,
) -> SignResult:
    """Sign an existing memo file in place (or into ``output``) as an incremental update."""
    memo = Path(memo)
    try:
        data = memo.read_bytes()
    except OSError as e:
        raise NotAMemoError(str(memo), f"cannot read: {e.strerror or e}") from None
    if not data.startswith(b"%PDF-"):
        raise NotAMemoError(str(memo), "not a PDF file")
    new, res = sign_pdf_bytes(data, identity, passphrase, role, reason=reason)
    target = Path(output) if output else memo
    _atomic_write(target, new)
    return SignResult(res.role, res.field, res.signer, str(target), res.certificate_sha256)


def _atomic_write(target: Path, data: bytes) -> None:
    """Write the memo whole or not at all (fsync, rename, folder fsync); "disk full" in words."""
    from core.errors import StudyError
    from core.fsutil import atomic_write_bytes, remove_leftovers

    remove_leftovers(target.parent, stem=target.name + ".")
    try:
        atomic_write_bytes(target, data)
    except StudyError as e:
        raise MemoError(e.path, e.message) from None
