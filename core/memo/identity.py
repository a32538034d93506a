"""Signing identities: passphrase-protected PKCS#12 files.

``new_identity`` makes a fresh RSA key and a self-signed X.509 certificate
carrying the signer's name (and organisation, e-mail) with key usage for
digital signatures and non-repudiation, and writes both into one PKCS#12
file encrypted with the passphrase. The private key is never written in the
clear. An organisation-issued PKCS#12 (key + certificate + CA chain) is used
exactly the same way by :func:`load_identity`.

>>> import tempfile, pathlib
>>> out = pathlib.Path(tempfile.mkdtemp()) / "ada.p12"
>>> info = new_identity("Ada Lovelace", out, b"correct horse", organisation="Harrowgate Fabrication Ltd.")
>>> info.common_name, info.organisation
('Ada Lovelace', 'Harrowgate Fabrication Ltd.')
>>> load_identity(out, b"correct horse").common_name
'Ada Lovelace'
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass
from pathlib import Path

from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import rsa
from cryptography.hazmat.primitives.serialization import pkcs12
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

from core.memo.errors import MemoError

__all__ = [
    "IdentityInfo",
    "new_identity",
    "load_identity",
    "read_passphrase_file",
    "passphrase_file_warning",
    "certificate_pem",
]


@dataclass(frozen=True)
class IdentityInfo:
    """What a PKCS#12 identity says about its holder."""

    path: str
    common_name: str
    organisation: str | None
    email: str | None
    serial: int
    sha256: str  # certificate fingerprint, hex
    not_before: _dt.datetime
    not_after: _dt.datetime
    self_signed: bool


def read_passphrase_file(path: str | os.PathLike, option: str = "--passphrase-file") -> bytes:
    """Read a passphrase from a file: the first line, without its line ending.

    An empty passphrase is refused (the key must never be stored unprotected).
    """
    try:
        raw = Path(path).read_bytes()
    except OSError as e:
        raise MemoError(option, f"cannot read {path}: {e.strerror or e}") from None
    line = raw.splitlines()[0] if raw.splitlines() else b""
    if not line.strip():
        raise MemoError(option, f"{path} holds no passphrase (first line is empty)")
    return line


def passphrase_file_warning(path: str | os.PathLike) -> str | None:
    """A warning when a passphrase file can be read by other users (POSIX), else None.

    >>> import tempfile, os
    >>> fd, p = tempfile.mkstemp(); os.close(fd); os.chmod(p, 0o644)
    >>> passphrase_file_warning(p).endswith("(chmod 600 " + p + ")")
    True
    >>> os.chmod(p, 0o600); passphrase_file_warning(p) is None
    True
    """
    if os.name == "nt":
        return None
    try:
        mode = Path(path).stat().st_mode
    except OSError:
        return None
    if mode & 0o077:
        who = "everyone on this computer" if mode & 0o004 else "other users"
        return (f"{path}: the passphrase file can be read by {who} (mode {mode & 0o777:o}); "
                f"keep it private (chmod 600 {path})")
    return None


def _name(common_name: str, organisation: str | None, email: str | None) -> x509.Name:
    attrs = [x509.NameAttribute(NameOID.COMMON_NAME, common_name)]
    if organisation:
        attrs.append(x509.NameAttribute(NameOID.ORGANIZATION_NAME, organisation))
    if email:
        attrs.append(x509.NameAttribute(NameOID.EMAIL_ADDRESS, email))
    return x509.Name(attrs)


def new_identity(
    name: str,
    out: str | os.PathLike,
    passphrase: bytes,
    *,
    organisation: str | None = None,
    email: str | None = None,
    years: int = 5,
    key_size: int = 2048,
    overwrite: bool = False,
) -> IdentityInfo:
    """Create a self-signed signing identity and write it as encrypted PKCS#12.

    Parameters
    ----------
    name : signer's full name (certificate common name).
    out : path of the ``.p12`` file to write (refused if it exists, unless ``overwrite``).
    passphrase : protects the file; must be non-empty.
    organisation, email : optional certificate subject fields.
    years : validity period from now.
    key_size : RSA modulus bits (2048 or more).
    """
    name = (name or "").strip()
    if not name:
        raise MemoError("--name", "the signer's name is empty")
    if not passphrase:
        raise MemoError("--passphrase-file", "the passphrase is empty")
    if key_size < 2048:
        raise MemoError("key_size", "RSA keys shorter than 2048 bits are not allowed")
    out = Path(out)
    if out.exists() and not overwrite:
        raise MemoError("--out", f"{out} already exists; refusing to overwrite an identity")
    key = rsa.generate_private_key(public_exponent=65537, key_size=key_size)
    subject = _name(name, organisation, email)
    now = _dt.datetime.now(_dt.UTC).replace(microsecond=0)
    builder = (
        x509.CertificateBuilder()
        .subject_name(subject)
        .issuer_name(subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - _dt.timedelta(minutes=5))
        .not_valid_after(now + _dt.timedelta(days=365 * years))
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(
            x509.KeyUsage(
                digital_signature=True,
                content_commitment=True,  # non-repudiation
                key_encipherment=False,
                data_encipherment=False,
                key_agreement=False,
                key_cert_sign=False,
                crl_sign=False,
                encipher_only=False,
                decipher_only=False,
            ),
            critical=True,
        )
        .add_extension(
            x509.ExtendedKeyUsage(
                [ExtendedKeyUsageOID.EMAIL_PROTECTION, ExtendedKeyUsageOID.CODE_SIGNING]
            ),
            critical=False,
        )
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
    )
    if email:
        builder = builder.add_extension(
            x509.SubjectAlternativeName([x509.RFC822Name(email)]), critical=False
        )
    cert = builder.sign(key, hashes.SHA256())
    blob = pkcs12.serialize_key_and_certificates(
        name=name.encode("utf-8"),
        key=key,
        cert=cert,
        cas=None,
        encryption_algorithm=serialization.BestAvailableEncryption(passphrase),
    )
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".part")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(blob)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, out)
        from core.fsutil import fsync_dir

        fsync_dir(out.parent)
    except OSError as e:
        tmp.unlink(missing_ok=True)
        raise MemoError("--out", f"cannot write {out}: {e.strerror or e}") from None
    return _info(str(out), cert)


def _attr(name: x509.Name, oid) -> str | None:
    vals = name.get_attributes_for_oid(oid)
    return str(vals[0].value) if vals else None


def _info(path: str, cert: x509.Certificate) -> IdentityInfo:
    return IdentityInfo(
        path=path,
        common_name=_attr(cert.subject, NameOID.COMMON_NAME) or cert.subject.rfc4514_string(),
        organisation=_attr(cert.subject, NameOID.ORGANIZATION_NAME),
        email=_attr(cert.subject, NameOID.EMAIL_ADDRESS),
        serial=cert.serial_number,
        sha256=cert.fingerprint(hashes.SHA256()).hex(),
        not_before=cert.not_valid_before_utc,
        not_after=cert.not_valid_after_utc,
        self_signed=cert.issuer == cert.subject,
    )


def load_pkcs12_bytes(path: str | os.PathLike, passphrase: bytes, option: str = "--sign"):
    """Open a PKCS#12 file: returns (bytes, key, cert, extra_certs); clear errors."""
    try:
        data = Path(path).read_bytes()
    except OSError as e:
        raise MemoError(option, f"cannot read {path}: {e.strerror or e}") from None
    try:
        key, cert, extra = pkcs12.load_key_and_certificates(data, passphrase)
    except ValueError:
        # cryptography says "Invalid password or PKCS12 data"; tell the two apart
        try:
            pkcs12.load_key_and_certificates(data, None)
        except ValueError:
            pass
        else:  # pragma: no cover - unencrypted file opened with a passphrase
            raise MemoError(option, f"{path} is not passphrase-protected; refusing it") from None
        if data[:1] != b"\x30":
            raise MemoError(option, f"{path} is not a PKCS#12 identity file") from None
        raise MemoError(
            "--passphrase-file", f"wrong passphrase for {path} (or the file is damaged)"
        ) from None
    except Exception as e:  # noqa: BLE001 - any parser failure means "not an identity"
        raise MemoError(option, f"{path} is not a PKCS#12 identity file ({e})") from None
    if key is None or cert is None:
        raise MemoError(option, f"{path} holds no private key and certificate")
    return data, key, cert, list(extra or [])


def load_identity(path: str | os.PathLike, passphrase: bytes, option: str = "--sign") -> IdentityInfo:
    """Check that an identity opens with the passphrase; return what it says."""
    _, _, cert, _ = load_pkcs12_bytes(path, passphrase, option)
    return _info(str(path), cert)


def certificate_pem(path: str | os.PathLike, passphrase: bytes) -> bytes:
    """The identity's certificate in PEM form (to hand to colleagues for their trust list)."""
    _, _, cert, _ = load_pkcs12_bytes(path, passphrase)
    return cert.public_bytes(serialization.Encoding.PEM)
