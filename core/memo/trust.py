"""The user's trust list: certificates whose signatures ``tenure verify`` accepts (docs/method.md §8).

Trust is matched on the certificate itself (its SHA-256 fingerprint), never on
the name inside it: anyone can make an identity carrying any name. The list is
a folder of PEM files, one per certificate, named by fingerprint, under the
user data folder (``platformdirs.user_data_dir("tenure")/trusted``;
``TENURE_STATE_DIR`` overrides the base folder, as it does for the window's
recovery files). Certificates copied by hand into the older settings folder
(``user_config_dir("tenure")/trusted``) are read too.

    tenure trust add CERT.pem        # after comparing its fingerprint with the signer
    tenure trust list
    tenure trust remove FINGERPRINT  # the whole fingerprint or its first 8+ characters
"""

from __future__ import annotations

import argparse
import os
import re
import sys
from dataclasses import dataclass
from pathlib import Path

from core.memo.errors import MemoError

__all__ = ["TrustedCert", "trust_dir", "legacy_trust_dir", "read_certificates", "trusted",
           "inspect", "same_name_elsewhere", "add", "remove", "format_fingerprint", "register"]

_HEX = re.compile(r"[0-9a-f]+")


@dataclass(frozen=True)
class TrustedCert:
    """One certificate in the trust list."""

    sha256: str  # hex, lower case
    name: str
    organisation: str | None
    not_after: str
    is_ca: bool
    path: str


def trust_dir() -> Path:
    """The trust list folder (``$TENURE_STATE_DIR/trusted`` when that is set)."""
    base = os.environ.get("TENURE_STATE_DIR")
    if base:
        return Path(base) / "trusted"
    from platformdirs import user_data_dir

    return Path(user_data_dir("tenure", appauthor=False)) / "trusted"


def legacy_trust_dir() -> Path:
    """The folder earlier versions read (certificates copied there by hand)."""
    from platformdirs import user_config_dir

    return Path(user_config_dir("tenure")) / "trusted"


def format_fingerprint(sha256: str) -> str:
    """A fingerprint in groups of four, easy to read out over the phone.

    >>> format_fingerprint("ab" * 32)[:19]
    'ABAB ABAB ABAB ABAB'
    """
    h = sha256.upper()
    return " ".join(h[i:i + 4] for i in range(0, len(h), 4))


def read_certificates(path: str | os.PathLike) -> list:
    """The X.509 certificates (asn1crypto) in a PEM (one or several) or DER file."""
    from asn1crypto import pem, x509

    data = Path(path).read_bytes()
    certs = []
    if pem.detect(data):
        for kind, _, der in pem.unarmor(data, multiple=True):
            if kind == "CERTIFICATE":
                certs.append(x509.Certificate.load(der))
    else:
        certs.append(x509.Certificate.load(data))
    for c in certs:
        _ = c.subject.native, c.sha256  # parse now, so a bad file fails here
    if not certs:
        raise ValueError("no certificate")
    return certs


def _describe(cert, path: Path) -> TrustedCert:
    subj = cert.subject.native
    name = subj.get("common_name") or cert.subject.human_friendly
    return TrustedCert(sha256=cert.sha256.hex(), name=str(name),
                       organisation=subj.get("organization_name"),
                       not_after=cert["tbs_certificate"]["validity"]["not_after"].native
                       .strftime("%Y-%m-%d"),
                       is_ca=bool(cert.ca), path=str(path))


def trusted() -> list[TrustedCert]:
    """Every certificate in the trust list (and the older folder), by name; bad files skipped."""
    out: dict[str, TrustedCert] = {}
    for folder in (trust_dir(), legacy_trust_dir()):
        if not folder.is_dir():
            continue
        for p in sorted(folder.iterdir()):
            if p.suffix.lower() not in (".pem", ".crt", ".cer", ".der"):
                continue
            try:
                certs = read_certificates(p)
            except Exception:  # noqa: BLE001 - a bad file in the folder is skipped
                continue
            for c in certs:
                out.setdefault(c.sha256.hex(), _describe(c, p))
    return sorted(out.values(), key=lambda t: (t.name.lower(), t.sha256))


def _read(cert_file: str | os.PathLike) -> list:
    try:
        return read_certificates(cert_file)
    except OSError as e:
        raise MemoError(str(cert_file), f"cannot read: {e.strerror or e}") from None
    except Exception:  # noqa: BLE001
        raise MemoError(str(cert_file), "not a PEM or DER certificate") from None


def inspect(cert_file: str | os.PathLike) -> list[TrustedCert]:
    """What the certificates of ``cert_file`` say (name, fingerprint, ...), without trusting them."""
    return [_describe(c, Path(cert_file)) for c in _read(cert_file)]


def same_name_elsewhere(entry: TrustedCert) -> list[TrustedCert]:
    """Trusted certificates with the same name as ``entry`` but another fingerprint."""
    return [t for t in trusted() if t.name == entry.name and t.sha256 != entry.sha256]


def add(cert_file: str | os.PathLike) -> list[tuple[TrustedCert, bool]]:
    """Add every certificate of ``cert_file``; returns (entry, newly added) for each."""
    certs = _read(cert_file)
    folder = trust_dir()
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as e:
        raise MemoError(str(folder), f"cannot create the trust folder: {e.strerror or e}") from None
    known = {t.sha256 for t in trusted()}
    out = []
    for c in certs:
        fp = c.sha256.hex()
        target = folder / f"{fp}.pem"
        new = fp not in known
        if new:
            from asn1crypto import pem

            from core.fsutil import atomic_write_bytes

            atomic_write_bytes(target, pem.armor("CERTIFICATE", c.dump()))
        out.append((_describe(c, target), new))
    return out


def _normalise(fingerprint: str) -> str:
    return re.sub(r"[\s:]", "", fingerprint).lower()


def remove(fingerprint: str) -> TrustedCert:
    """Remove the certificate with this fingerprint (whole, or a unique prefix of 8+ digits)."""
    fp = _normalise(fingerprint)
    if not _HEX.fullmatch(fp or "-") or len(fp) < 8 or len(fp) > 64:
        raise MemoError("FINGERPRINT", "give the certificate's SHA-256 fingerprint (hex; at "
                                       "least its first 8 characters)")
    matches = [t for t in trusted() if t.sha256.startswith(fp)]
    if not matches:
        raise MemoError("FINGERPRINT", f"no trusted certificate has the fingerprint {fp}")
    if len(matches) > 1:
        raise MemoError("FINGERPRINT", f"{fp} matches {len(matches)} certificates; give more "
                                       "of the fingerprint")
    entry = matches[0]
    for folder in (trust_dir(), legacy_trust_dir()):
        if not folder.is_dir():
            continue
        for p in sorted(folder.iterdir()):
            try:
                certs = read_certificates(p)
            except Exception:  # noqa: BLE001
                continue
            if any(c.sha256.hex() == entry.sha256 for c in certs):
                try:
                    p.unlink()
                except OSError as e:
                    raise MemoError(str(p), f"cannot remove: {e.strerror or e}") from None
    return entry


# --------------------------------------------------------------------------- command line
def _line(t: TrustedCert) -> str:
    from core.errors import escape_text

    org = f", {escape_text(t.organisation)}" if t.organisation else ""
    kind = "CA" if t.is_ca else "signer"
    return (f"{escape_text(t.name)}{org} ({kind}, valid until {t.not_after})\n"
            f"  SHA-256 {format_fingerprint(t.sha256)}")


def run_trust(args: argparse.Namespace) -> int:
    """tenure trust add|list|remove."""
    from core.errors import StudyError, escape_text

    try:
        if args.trust_command == "add":
            already = {t.name: t for t in trusted()}
            for entry, new in add(args.cert):
                print(("trusted: " if new else "already trusted: ") + _line(entry))
                other = already.get(entry.name)
                if new and other is not None and other.sha256 != entry.sha256:
                    print(escape_text(f"note: you also trust a different certificate named "
                                      f"{entry.name} (SHA-256 {format_fingerprint(other.sha256)})"))
            return 0
        if args.trust_command == "list":
            entries = trusted()
            if not entries:
                print(f"no trusted certificates (add one with: tenure trust add CERT.pem); "
                      f"trust folder: {trust_dir()}")
                return 0
            for t in entries:
                print(_line(t))
            return 0
        if args.trust_command == "remove":
            entry = remove(args.fingerprint)
            print("no longer trusted: " + _line(entry))
            return 0
        raise MemoError("trust", "choose a command: add, list or remove")
    except StudyError as e:
        print(f"error: {escape_text(str(e))}", file=sys.stderr)
        return 2


def register(subparsers) -> None:
    """Add ``tenure trust add|list|remove`` to the sub-command parsers."""
    t = subparsers.add_parser(
        "trust", help="manage the certificates whose memo signatures you trust",
        description="Your trust list: certificates whose signatures 'tenure verify' accepts. "
                    "Trust is matched on the certificate's SHA-256 fingerprint, never on the "
                    "name in it. Before adding a colleague's certificate, compare its "
                    "fingerprint with them in person or by phone.")
    tsub = t.add_subparsers(dest="trust_command", metavar="COMMAND",
                            parser_class=subparsers._parser_class)
    a = tsub.add_parser("add", help="trust a certificate (PEM or DER file)")
    a.add_argument("cert", metavar="CERT.pem")
    tsub.add_parser("list", help="list the trusted certificates with their fingerprints")
    r = tsub.add_parser("remove", help="stop trusting a certificate")
    r.add_argument("fingerprint", metavar="FINGERPRINT",
                   help="its SHA-256 fingerprint (or the first 8 or more characters)")
    t.set_defaults(func=run_trust, trust_command=None)
