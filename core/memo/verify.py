"""Verify a signed memo: integrity, changes after signing, attachment, trust.

Two questions are kept apart (docs/method.md §8):

* integrity: each signature's digest matches the signed bytes, the CMS
  signature checks out with the signer's certificate, and nothing but later
  signatures was added after it (pyHanko's coverage + modification analysis);
  and the attached study JSON has the fingerprint printed in the footer
  (stored in the ``/TenureFingerprint`` Info key, so no OCR is needed);
* trust: whether the signer's certificate chains to a root the user trusts
  (``--trust CERT.pem`` files or the user's trust folder). A fresh
  self-signed identity is intact but "not vouched for".

Offline: no revocation fetch, no timestamp server.
"""

from __future__ import annotations

import contextlib
import io
import json
import logging
import os
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from core.memo.errors import MemoError, NotAMemoError
from core.memo.sign import ATTACHMENT_NAME, FIELD_NAMES, INFO_FINGERPRINT_KEY
from core.studyfile import fingerprint, parse_study_document

__all__ = [
    "SignatureReport",
    "VerifyReport",
    "verify_memo",
    "verify_memo_bytes",
    "read_attachment",
    "load_trust_certs",
    "user_trust_dir",
]

_ROLE_OF_FIELD = {v: k for k, v in FIELD_NAMES.items()}


@dataclass(frozen=True)
class SignatureReport:
    """What verify found about one signature."""

    field: str
    role: str | None
    signer: str
    organisation: str | None
    signing_time: datetime | None  # the signer's own clock (no timestamp server)
    intact: bool  # digest of the signed byte ranges matches
    valid: bool  # the CMS signature checks out with the signer's key
    coverage: str  # "entire file" | "entire revision" | "partial"
    changes_after: str  # "none" | "later signatures only" | "other changes"
    trusted: bool
    trust_state: str  # "trusted (...)" | "not vouched for (...)"
    cert_sha256: str
    problems: tuple[str, ...] = ()

    @property
    def integrity_ok(self) -> bool:
        return not self.problems


@dataclass(frozen=True)
class VerifyReport:
    """Everything verify found about one memo file."""

    path: str
    revisions: int
    footer_fingerprint: str | None
    attachment_fingerprint: str | None
    attachment_title: str | None
    signatures: tuple[SignatureReport, ...]
    empty_fields: tuple[str, ...]
    problems: tuple[str, ...] = field(default=())

    @property
    def attachment_matches(self) -> bool:
        return (
            self.footer_fingerprint is not None
            and self.attachment_fingerprint == self.footer_fingerprint
        )

    @property
    def integrity_ok(self) -> bool:
        return bool(self.signatures) and not self.problems and all(
            s.integrity_ok for s in self.signatures
        )

    @property
    def all_trusted(self) -> bool:
        return bool(self.signatures) and all(s.trusted for s in self.signatures)

    def exit_code(self, require_trust: bool = False) -> int:
        if not self.integrity_ok:
            return 1
        if require_trust and not self.all_trusted:
            return 1
        return 0

    def lines(self, require_trust: bool = False) -> list[str]:
        out = [f"memo: {self.path}"]
        if self.attachment_title:
            out.append(f"study: {self.attachment_title}")
        out.append(f"study fingerprint (footer): {self.footer_fingerprint or 'missing'}")
        if self.attachment_fingerprint is None:
            out.append("attached study: missing or unreadable")
        elif self.attachment_matches:
            out.append("attached study: matches the footer fingerprint")
        else:
            out.append(f"attached study: DOES NOT MATCH (its fingerprint is {self.attachment_fingerprint})")
        out.append(f"revisions: {self.revisions}; signatures: {len(self.signatures)}")
        for n, s in enumerate(self.signatures, 1):
            when = s.signing_time.strftime("%Y-%m-%d %H:%M:%S %Z") if s.signing_time else "unknown"
            org = f", {s.organisation}" if s.organisation else ""
            out.append(f"signature {n}: field {s.field} ({s.role or 'other'})")
            out.append(f"  signer: {s.signer}{org}")
            out.append(f"  signing time: {when} (signer's clock)")
            out.append(f"  integrity: {'intact' if s.intact and s.valid else 'BROKEN'}"
                       f" (digest {'ok' if s.intact else 'mismatch'}, signature {'ok' if s.valid else 'invalid'})")
            out.append(f"  coverage: {s.coverage}; changes after signing: {s.changes_after}")
            out.append(f"  trust: {s.trust_state}")
            out.append(f"  certificate SHA-256: {s.cert_sha256}")
            for p in s.problems:
                out.append(f"  problem: {p}")
        if self.empty_fields:
            out.append("unsigned fields: " + ", ".join(self.empty_fields))
        for p in self.problems:
            out.append(f"problem: {p}")
        code = self.exit_code(require_trust)
        if not self.signatures:
            verdict = "FAILED: the memo carries no signature"
        elif not self.integrity_ok:
            verdict = "FAILED: the memo is not intact"
        elif code:
            verdict = "FAILED: intact, but a signer is not vouched for (--require-trust)"
        elif self.all_trusted:
            verdict = "OK: intact, and every signer is trusted"
        else:
            verdict = "OK: intact; some signers are not vouched for"
        out.append(f"result: {verdict}")
        return out


@contextlib.contextmanager
def quiet_pyhanko():
    """Keep pyHanko's validation log (tracebacks for untrusted certificates) off stderr."""
    loggers = [logging.getLogger(n) for n in ("pyhanko", "pyhanko_certvalidator")]
    saved = [(lg.level, lg.propagate) for lg in loggers]
    for lg in loggers:
        lg.setLevel(logging.CRITICAL + 1)
        lg.propagate = False
    try:
        yield
    finally:
        for lg, (level, prop) in zip(loggers, saved, strict=True):
            lg.setLevel(level)
            lg.propagate = prop


def user_trust_dir() -> Path:
    """The user's trust folder: ``<user config dir>/tenure/trusted`` (PEM/DER certificates)."""
    from platformdirs import user_config_dir

    return Path(user_config_dir("tenure")) / "trusted"


def _load_cert_file(path: Path):
    from asn1crypto import pem, x509

    data = path.read_bytes()
    certs = []
    if pem.detect(data):
        for _, _, der in pem.unarmor(data, multiple=True):
            certs.append(x509.Certificate.load(der))
    else:
        certs.append(x509.Certificate.load(data))
    for c in certs:
        _ = c.subject.native  # force a parse now, so bad files fail here
    return certs


def load_trust_certs(paths=(), use_user_dir: bool = True) -> list:
    """Certificates the user trusts: the given files plus the user's trust folder."""
    certs = []
    for p in paths:
        p = Path(p)
        try:
            certs.extend(_load_cert_file(p))
        except OSError as e:
            raise MemoError("--trust", f"cannot read {p}: {e.strerror or e}") from None
        except Exception:  # noqa: BLE001
            raise MemoError("--trust", f"{p} is not a PEM or DER certificate") from None
    if use_user_dir:
        d = user_trust_dir()
        if d.is_dir():
            for p in sorted(d.iterdir()):
                if p.suffix.lower() in (".pem", ".crt", ".cer", ".der"):
                    try:
                        certs.extend(_load_cert_file(p))
                    except Exception:  # noqa: BLE001 - a bad file in the folder is skipped
                        continue
    return certs


def read_attachment(pdf: bytes) -> bytes | None:
    """The embedded study JSON, or None."""
    from pyhanko.pdf_utils.reader import PdfFileReader

    r = PdfFileReader(io.BytesIO(pdf), strict=False)
    try:
        names = r.root["/Names"]["/EmbeddedFiles"]["/Names"]
    except (KeyError, TypeError):
        return None
    for i in range(0, len(names) - 1, 2):
        spec = names[i + 1].get_object()
        if str(names[i]) == ATTACHMENT_NAME or str(spec.get("/UF", "")) == ATTACHMENT_NAME:
            return spec["/EF"]["/F"].get_object().data
    return None


def _attachment_fingerprint(data: bytes) -> tuple[str | None, str | None, str | None]:
    """(fingerprint, title, problem) of the attached study document."""
    try:
        studies = parse_study_document(json.loads(data.decode("utf-8")))
    except Exception as e:  # noqa: BLE001
        return None, None, f"the attached study does not load: {e}"
    if len(studies) != 1:
        return None, None, f"the attachment holds {len(studies)} studies, expected 1"
    return fingerprint(studies[0]), studies[0].title, None


def _cert_name(cert) -> tuple[str, str | None]:
    subj = cert.subject.native
    return subj.get("common_name") or cert.subject.human_friendly, subj.get("organization_name")


def verify_memo_bytes(
    pdf: bytes,
    *,
    path: str = "MEMO",
    trust=(),
    use_user_trust: bool = True,
) -> VerifyReport:
    """Verify memo bytes. Raises NotAMemoError when it is not a readable Tenure memo."""
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.diff_analysis import ModificationLevel
    from pyhanko.sign.fields import enumerate_sig_fields
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko.sign.validation.status import SignatureCoverageLevel
    from pyhanko_certvalidator import ValidationContext

    if not pdf.startswith(b"%PDF-"):
        raise NotAMemoError(path, "not a PDF file")
    try:
        r = PdfFileReader(io.BytesIO(pdf), strict=False)
        info = r.trailer_view.get("/Info")
        info = info.get_object() if info is not None else {}
        footer_fp = info.get(INFO_FINGERPRINT_KEY)
        sigs = list(r.embedded_signatures)
        empty = tuple(n for n, v, _ in enumerate_sig_fields(r) if v is None)
        revisions = r.xrefs.total_revisions
    except Exception as e:  # noqa: BLE001 - any parser failure: unreadable
        raise NotAMemoError(path, f"unreadable PDF ({type(e).__name__})") from None
    if footer_fp is None:
        raise NotAMemoError(path, "not a Tenure memo (no study fingerprint in its metadata)")
    footer_fp = str(footer_fp)
    problems: list[str] = []
    att = None
    try:
        att = read_attachment(pdf)
    except Exception:  # noqa: BLE001
        att = None
    att_fp = att_title = None
    if att is None:
        problems.append("the study attachment is missing")
    else:
        att_fp, att_title, prob = _attachment_fingerprint(att)
        if prob:
            problems.append(prob)
        elif att_fp != footer_fp:
            problems.append("the attached study does not match the footer fingerprint")
    if not sigs:
        problems.append("the memo carries no signature")

    roots = load_trust_certs(trust, use_user_dir=use_user_trust)
    reports = []
    last_index = len(sigs) - 1
    for n, es in enumerate(sigs):
        sp: list[str] = []
        fname = es.field_name
        try:
            vc = ValidationContext(trust_roots=list(roots), allow_fetching=False)
            with quiet_pyhanko():
                st = validate_pdf_signature(es, vc)
        except Exception as e:  # noqa: BLE001 - a broken container is a failed check
            cert = None
            try:
                cert = es.signer_cert
            except Exception:  # noqa: BLE001
                pass
            name, org = _cert_name(cert) if cert is not None else ("unknown", None)
            reports.append(SignatureReport(
                field=fname, role=_ROLE_OF_FIELD.get(fname), signer=name, organisation=org,
                signing_time=None, intact=False, valid=False, coverage="unknown",
                changes_after="unknown", trusted=False, trust_state="unknown",
                cert_sha256=cert.sha256.hex() if cert is not None else "",
                problems=(f"the signature cannot be checked ({type(e).__name__})",),
            ))
            continue
        cert = st.signing_cert
        name, org = _cert_name(cert)
        if not st.intact:
            sp.append("the signed bytes were changed (digest mismatch)")
        if not st.valid:
            sp.append("the cryptographic signature does not check out")
        cov = st.coverage
        coverage = {
            SignatureCoverageLevel.ENTIRE_FILE: "entire file",
            SignatureCoverageLevel.ENTIRE_REVISION: "entire revision",
        }.get(cov, "partial") if cov is not None else "partial"
        if coverage == "partial":
            sp.append("the signature does not cover its whole revision")
        lvl = st.modification_level
        if cov == SignatureCoverageLevel.ENTIRE_FILE:
            changes = "none"
        elif lvl in (ModificationLevel.NONE, ModificationLevel.LTA_UPDATES):
            changes = "none (validation data only)" if lvl == ModificationLevel.LTA_UPDATES else "none"
        elif lvl == ModificationLevel.FORM_FILLING:
            changes = "later signatures only"
        else:
            changes = "other changes"
        if lvl == ModificationLevel.LTA_UPDATES and cov != SignatureCoverageLevel.ENTIRE_FILE:
            changes = ("metadata or validation data only" if n == last_index
                       else "later signatures and metadata only")
        if changes == "other changes":
            sp.append("the document was changed after this signature")
        elif n == last_index and cov != SignatureCoverageLevel.ENTIRE_FILE:
            sp.append(f"unsigned changes were appended after the last signature ({changes})")
        # the fingerprint the signer saw must be the one the memo shows now
        try:
            signed_info = r.get_historical_resolver(es.signed_revision).trailer_view["/Info"]
            signed_fp = signed_info.get_object().get(INFO_FINGERPRINT_KEY)
        except Exception:  # noqa: BLE001
            signed_fp = None
        if signed_fp is not None and str(signed_fp) != footer_fp:
            sp.append("the study fingerprint in the metadata was changed after this signature")
        if st.docmdp_ok is False:
            sp.append("changes after signing break the document's signing policy")
        if st.trusted:
            anchor = st.validation_path[0] if st.validation_path is not None else None
            if anchor is not None and anchor.sha256 == cert.sha256:
                trust_state = "trusted (this certificate is in your trust list)"
            elif anchor is not None:
                trust_state = f"trusted (chains to {_cert_name(anchor)[0]}, in your trust list)"
            else:  # pragma: no cover
                trust_state = "trusted"
        elif roots and st.trust_problem_indic is not None and st.intact and st.valid:
            trust_state = "not vouched for (does not chain to a trusted certificate)"
        else:
            trust_state = "not vouched for (no trusted certificate given)"
        if cert.self_issued and not st.trusted:
            trust_state += "; self-signed"
        reports.append(SignatureReport(
            field=fname, role=_ROLE_OF_FIELD.get(fname), signer=name, organisation=org,
            signing_time=st.signer_reported_dt, intact=bool(st.intact), valid=bool(st.valid),
            coverage=coverage, changes_after=changes, trusted=bool(st.trusted),
            trust_state=trust_state, cert_sha256=cert.sha256.hex(), problems=tuple(sp),
        ))
    return VerifyReport(
        path=path, revisions=revisions, footer_fingerprint=footer_fp,
        attachment_fingerprint=att_fp, attachment_title=att_title,
        signatures=tuple(reports), empty_fields=empty, problems=tuple(problems),
    )


def verify_memo(path: str | os.PathLike, *, trust=(), use_user_trust: bool = True) -> VerifyReport:
    """Verify a memo file; see :func:`verify_memo_bytes`."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except OSError as e:
        raise NotAMemoError(str(p), f"cannot read: {e.strerror or e}") from None
    return verify_memo_bytes(data, path=str(p), trust=trust, use_user_trust=use_user_trust)
