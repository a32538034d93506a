"""Verify a signed memo: integrity, changes after signing, attachment, trust.

Two questions are kept apart (docs/method.md §8):

* integrity: each signature's digest matches the signed bytes, the CMS
  signature checks out with the signer's certificate, and nothing but later
  signatures was added after it (pyHanko's coverage + modification analysis);
  and the attached study JSON has the fingerprint printed in the footer
  (stored in the ``/TenureFingerprint`` Info key, so no OCR is needed);
* trust: whether the signer's certificate is one the user trusts, or chains to
  one (``--trust CERT.pem`` files or the trust list, :mod:`core.memo.trust`),
  matched on the certificate's SHA-256 fingerprint, never on a name. A fresh
  self-signed identity is intact but "not vouched for"; ``exit_code`` is 0
  only when every signature is intact AND every signer trusted (an untrusted
  signature proves nothing about who signed), unless ``integrity_only``.

Offline: no revocation fetch, no timestamp server.
"""

from __future__ import annotations

import contextlib
import io
import logging
import os
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

from core.memo.errors import MemoError, NotAMemoError
from core.memo.sign import (
    ATTACHMENT_NAME,
    FIELD_NAMES,
    INFO_FINGERPRINT_KEY,
    PLAN_ATTACHMENT_NAME,
)
from core.memo.signers import SignerFinding
from core.studyfile import fingerprint, loads_json, parse_study_document

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
_NAME_CLASH = "same name as a trusted signer, different certificate"
#: Byte strings only a signature dictionary holds (one changed byte leaves the others).
_SIGNATURE_MARKS = (b"/ByteRange", b"/Type /Sig", b"/SubFilter", b"/Adobe.PPKLite",
                    b"/ETSI.CAdES.detached")


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
    printed_name: str | None = None  # the name printed in the role's box, when recorded

    @property
    def integrity_ok(self) -> bool:
        return not self.problems

    @property
    def name_matches(self) -> bool | None:
        """Certificate name against the printed name; None when no name was printed."""
        from core.memo.signers import names_match

        return None if not self.printed_name else names_match(self.printed_name, self.signer)

    def name_words(self) -> str:
        """'yes' | 'NO' | 'nothing printed to compare' (verify's report and the window)."""
        m = self.name_matches
        return "nothing printed to compare" if m is None else ("yes" if m else "NO")


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

    @property
    def untrusted(self) -> tuple[SignatureReport, ...]:
        return tuple(s for s in self.signatures if not s.trusted)

    @property
    def signer_findings(self) -> tuple[SignerFinding, ...]:
        """:class:`core.memo.signers.SignerFinding` s: printed names that differ from the
        certificate's, and one certificate (SHA-256) signing two roles."""
        from core.memo.signers import NAME_DIFFERS, SAME_SIGNER

        out: list[SignerFinding] = []
        for s in self.signatures:
            if s.name_matches is False:
                out.append(SignerFinding(NAME_DIFFERS, s.role or s.field,
                                         f"the {s.field} box names {s.printed_name}, but it was "
                                         f"signed with {s.signer}'s certificate"))
        by_cert: dict[str, list[SignatureReport]] = {}
        for s in self.signatures:
            if s.cert_sha256:
                by_cert.setdefault(s.cert_sha256.lower(), []).append(s)
        for group in by_cert.values():
            if len(group) > 1:
                roles = " and ".join(s.role or s.field for s in group)
                out.append(SignerFinding(SAME_SIGNER, group[-1].role or group[-1].field,
                                         f"{group[0].signer} signed {len(group)} roles ({roles}) "
                                         "with one certificate"))
        return tuple(out)

    def exit_code(self, integrity_only: bool = False, strict: bool = False) -> int:
        """0 only when every signature is intact and (unless ``integrity_only``) trusted;
        with ``strict``, also only when no signer finding stands (docs/method.md §8)."""
        if not self.integrity_ok:
            return 1
        if not integrity_only and not self.all_trusted:
            return 1
        if strict and self.signer_findings:
            return 1
        return 0

    def lines(self, integrity_only: bool = False, strict: bool = False) -> list[str]:
        """The text report; every name from the file is escaped (docs/method.md §8)."""
        from core.errors import escape_text as esc
        from core.memo.trust import format_fingerprint

        out = [f"memo: {esc(self.path)}"]
        if self.attachment_title:
            out.append(f"study: {esc(self.attachment_title)}")
        out.append(f"study fingerprint (footer): {esc(self.footer_fingerprint or 'missing')}")
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
            out.append(f"signature {n}: field {esc(s.field)} ({s.role or 'other'})")
            out.append(f"  signer: {esc(s.signer + org)}")
            out.append(f"  printed name: {esc(s.printed_name or '(none)')}; certificate name: "
                       f"{esc(s.signer)}; match: {s.name_words()}")
            out.append(f"  signing time: {when} (signer's clock)")
            out.append(f"  integrity: {'intact' if s.intact and s.valid else 'BROKEN'}"
                       f" (digest {'ok' if s.intact else 'mismatch'}, signature {'ok' if s.valid else 'invalid'})")
            out.append(f"  coverage: {s.coverage}; changes after signing: {s.changes_after}")
            out.append(f"  trust: {esc(s.trust_state)}")
            out.append("  certificate SHA-256: "
                       + (format_fingerprint(s.cert_sha256) if s.cert_sha256 else "unknown"))
            for p in s.problems:
                out.append(f"  problem: {esc(p)}")
        if self.empty_fields:
            out.append("unsigned fields: " + esc(", ".join(self.empty_fields)))
        for p in self.problems:
            out.append(f"problem: {esc(p)}")
        seen: dict[str, SignatureReport] = {}
        for s in self.untrusted:  # one signer in two roles is named once
            seen.setdefault(s.cert_sha256, s)
        who = "; ".join(f"{s.signer}, fingerprint {format_fingerprint(s.cert_sha256)}"
                        for s in seen.values())
        damaged = any("damaged signature" in p for p in self.problems) or any(
            "damaged signature" in p for s in self.signatures for p in s.problems)
        if damaged:
            verdict = "FAILED: damaged signature; the memo is not what was signed"
        elif not self.signatures:
            verdict = "FAILED: the memo carries no signature"
        elif not self.integrity_ok:
            verdict = "FAILED: the memo is not intact"
        elif self.all_trusted:
            verdict = "OK: intact, and every signer is trusted"
        elif integrity_only:
            verdict = (f"OK (integrity only): intact; trust not required, and these signers are "
                       f"not trusted: {who}")
        else:
            clash = sorted({s.signer for s in self.untrusted if _NAME_CLASH in s.trust_state})
            advice = ("WARNING: you trust a different certificate named "
                      f"{', '.join(clash)}; this signature may be forged" if clash else
                      "compare the fingerprint with the signer in person or by phone; then "
                      "'tenure trust add CERT.pem', or --trust CERT.pem")
            verdict = (f"FAILED: intact, but signed by an identity you have not trusted: {who} "
                       f"({advice})")
        findings = self.signer_findings
        for f in findings:
            out.append(f"signer check: {esc(f.message)}")
        if strict and findings and verdict.startswith("OK"):
            verdict = (f"FAILED (strict): intact, but {len(findings)} signer check"
                       f"{'s' if len(findings) > 1 else ''} stand (see above)")
        out.append(f"result: {esc(verdict)}")
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
    """The user's trust list folder (see :mod:`core.memo.trust`)."""
    from core.memo.trust import trust_dir

    return trust_dir()


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
        from core.memo.trust import legacy_trust_dir

        for d in (user_trust_dir(), legacy_trust_dir()):
            if not d.is_dir():
                continue
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
        if {str(names[i]), str(spec.get("/UF", ""))} & {ATTACHMENT_NAME, PLAN_ATTACHMENT_NAME}:
            return spec["/EF"]["/F"].get_object().data
    return None


def _attachment_fingerprint(data: bytes) -> tuple[str | None, str | None, str | None]:
    """(fingerprint, title, problem) of the attached study document."""
    try:
        doc = loads_json(data.decode("utf-8"), "attachment")
    except Exception as e:  # noqa: BLE001
        return None, None, f"the attached study does not load: {e}"
    if isinstance(doc, dict) and doc.get("format") == "tenure-plan":
        from core.plan.document import check_plan_document

        return check_plan_document(doc)
    try:
        studies = parse_study_document(doc)
    except Exception as e:  # noqa: BLE001
        return None, None, f"the attached study does not load: {e}"
    if len(studies) != 1:
        return None, None, f"the attachment holds {len(studies)} studies, expected 1"
    return fingerprint(studies[0]), studies[0].title, None


def _cert_name(cert) -> tuple[str, str | None]:
    subj = cert.subject.native
    return subj.get("common_name") or cert.subject.human_friendly, subj.get("organization_name")


def _padding_problem(es) -> str | None:
    """The /Contents hex string holds the CMS object then zeros; anything else was changed.

    Those bytes sit outside the signed byte range by design (ISO 32000-1 §12.8.1), so a
    change there leaves the signature valid; it is still not the file the signer wrote.
    """
    try:
        raw = bytes(es.sig_object["/Contents"])
        if raw[1] < 0x80:
            used = 2 + raw[1]
        else:
            n = raw[1] & 0x7F
            used = 2 + n + int.from_bytes(raw[2:2 + n], "big")
    except Exception:  # noqa: BLE001
        return None
    if raw[used:].strip(b"\x00"):
        return "damaged signature: bytes after the signature in /Contents were changed"
    return None


def _trust(st, cert, name: str, roots: list, trusted_fps: set[bytes],
           trusted_names: dict[str, set[bytes]]) -> tuple[bool, str]:
    """(trusted, words) for one signature: matched on certificates, never on names.

    pyHanko must have built a valid path to a trust root, AND that root (or the
    signer's own certificate) must be one of the certificates the user trusts,
    compared by SHA-256 fingerprint.
    """
    anchor = None
    if st.trusted and st.validation_path is not None:
        try:
            anchor = st.validation_path[0]
        except Exception:  # noqa: BLE001
            anchor = None
    if st.trusted and cert.sha256 in trusted_fps:
        return True, "trusted (this certificate is in your trust list)"
    if st.trusted and anchor is not None and anchor.sha256 in trusted_fps:
        return True, f"trusted (chains to {_cert_name(anchor)[0]}, in your trust list)"
    if roots and st.trust_problem_indic is not None and st.intact and st.valid:
        words = "not vouched for (does not chain to a trusted certificate)"
    else:
        words = "not vouched for (no trusted certificate given)"
    if cert.self_issued:
        words += "; self-signed"
    if trusted_names.get(name, set()) - {cert.sha256}:
        words += "; " + _NAME_CLASH
    return False, words


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
        with quiet_pyhanko():
            r = PdfFileReader(io.BytesIO(pdf), strict=False)
            info = r.trailer_view.get("/Info")
            info = info.get_object() if info is not None else {}
            footer_fp = info.get(INFO_FINGERPRINT_KEY)
            sigs = list(r.embedded_signatures)
            fields = list(enumerate_sig_fields(r))
            empty = tuple(n for n, v, _ in fields if v is None)
            filled = [str(n) for n, v, _ in fields if v is not None]
            revisions = r.xrefs.total_revisions
    except Exception as e:  # noqa: BLE001 - any parser failure: unreadable
        if any(m in pdf for m in _SIGNATURE_MARKS):  # a signed PDF whose signature was changed
            return VerifyReport(
                path=path, revisions=0, footer_fingerprint=None, attachment_fingerprint=None,
                attachment_title=None, signatures=(), empty_fields=(),
                problems=(f"damaged signature: the memo cannot be read past a changed byte "
                          f"({type(e).__name__}); it is not what was signed",))
        raise NotAMemoError(path, f"unreadable PDF ({type(e).__name__})") from None
    if footer_fp is None:
        raise NotAMemoError(path, "not a Tenure memo (no study fingerprint in its metadata)")
    from core.memo.signers import printed_names

    printed = printed_names(pdf) or {}
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
    unread = sorted(set(filled) - {str(es.field_name) for es in sigs})
    for fname in unread:
        problems.append(f"damaged signature: the {fname} field holds a signature that cannot "
                        "be read")
    if not sigs and not unread:
        problems.append("the memo carries no signature")

    roots = load_trust_certs(trust, use_user_dir=use_user_trust)
    trusted_fps = {c.sha256 for c in roots}
    trusted_names: dict[str, set[bytes]] = {}
    for c in roots:
        trusted_names.setdefault(_cert_name(c)[0], set()).add(c.sha256)
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
                problems=(f"damaged signature: it cannot be checked ({type(e).__name__})",),
            ))
            continue
        cert = st.signing_cert
        name, org = _cert_name(cert)
        if not st.intact:
            sp.append("the signed bytes were changed (digest mismatch)")
        if not st.valid:
            sp.append("damaged signature: the cryptographic signature does not check out")
        padding = _padding_problem(es)
        if padding:
            sp.append(padding)
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
        trusted, trust_state = _trust(st, cert, name, roots, trusted_fps, trusted_names)
        reports.append(SignatureReport(
            field=fname, role=_ROLE_OF_FIELD.get(fname), signer=name, organisation=org,
            signing_time=st.signer_reported_dt, intact=bool(st.intact), valid=bool(st.valid),
            coverage=coverage, changes_after=changes, trusted=trusted,
            trust_state=trust_state, cert_sha256=cert.sha256.hex(), problems=tuple(sp),
            printed_name=printed.get(_ROLE_OF_FIELD.get(fname, "")),
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
