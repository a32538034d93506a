"""Who signs: the signer against the name printed in a role's box, and one signer in two roles.

A signature proves which certificate signed; it does not prove that the person
meant by the box signed it. Two checks (docs/method.md §8):

* the certificate's name against the name printed in the role's box of the
  sign-off block (kept in the memo's ``/TenureSignOff`` Info key when the memo is
  rendered). Names are compared ignoring case, spacing and accents; a box with
  no printed name (to be filled by hand) is not compared;
* the same identity (certificate SHA-256 fingerprint, never the name) in two
  roles: a preparer who also reviews is one person, not two.

Both are findings, not errors: ``tenure sign`` and the window warn and ask to
confirm; ``tenure verify`` reports them and fails on them only with ``--strict``.

>>> names_match("Tom  Ashworth", "tom ashworth"), names_match("Zoë Brontë", "Zoe Bronte")
(True, True)
>>> names_match("Tom Ashworth", "Priya Natarajan")
False
>>> [f.kind for f in signer_findings("reviewed", "Priya Natarajan", "ab12",
...     {"reviewed": "Tom Ashworth"}, {"prepared": "ab12"})]
['name differs', 'one signer in two roles']
"""

from __future__ import annotations

import io
import json
import unicodedata
from collections.abc import Mapping
from dataclasses import dataclass

from core.memo.names import stamp_text

__all__ = [
    "INFO_SIGNOFF_KEY",
    "SignerFinding",
    "names_match",
    "printed_names",
    "signer_findings",
    "signoff_info_value",
]

#: Info key holding the printed names of the sign-off block, as JSON {role: name}.
INFO_SIGNOFF_KEY = "/TenureSignOff"

NAME_DIFFERS = "name differs"
SAME_SIGNER = "one signer in two roles"


@dataclass(frozen=True)
class SignerFinding:
    """One thing to confirm about who signs (or signed) a role."""

    kind: str  # "name differs" | "one signer in two roles"
    role: str
    message: str


def _fold(name: str) -> str:
    return " ".join(stamp_text(unicodedata.normalize("NFKC", name)).casefold().split())


def names_match(printed: str, certificate_name: str) -> bool:
    """True when two names are the same ignoring case, spacing and accents."""
    return _fold(printed) == _fold(certificate_name)


def signoff_info_value(names: Mapping[str, str | None]) -> str:
    """The ``/TenureSignOff`` value: the printed names as compact JSON (empty roles left out)."""
    return json.dumps({r: n for r, n in names.items() if n}, ensure_ascii=False,
                      sort_keys=True, separators=(",", ":"))


def printed_names(pdf: bytes) -> dict[str, str] | None:
    """Role -> the name printed in its box; None for a memo made before names were kept."""
    from pyhanko.pdf_utils.reader import PdfFileReader

    try:
        r = PdfFileReader(io.BytesIO(pdf), strict=False)
        info = r.trailer_view.get("/Info")
        raw = info.get_object().get(INFO_SIGNOFF_KEY) if info is not None else None
    except Exception:  # noqa: BLE001 - unreadable: nothing known
        return None
    if raw is None:
        return None
    try:
        data = json.loads(str(raw))
    except ValueError:
        return None
    if not isinstance(data, dict):
        return None
    return {str(k): str(v) for k, v in data.items() if isinstance(v, str) and v.strip()}


def signer_findings(role: str, certificate_name: str, certificate_sha256: str,
                    printed: Mapping[str, str] | None,
                    signed_roles: Mapping[str, str]) -> tuple[SignerFinding, ...]:
    """What to confirm before ``certificate_name`` signs ``role``.

    ``printed``: role -> printed name (None when the memo does not record them);
    ``signed_roles``: role -> certificate SHA-256 (hex) of the signatures already there.
    """
    out: list[SignerFinding] = []
    name = (printed or {}).get(role)
    if name and not names_match(name, certificate_name):
        out.append(SignerFinding(
            NAME_DIFFERS, role,
            f"the {role.capitalize()} box names {name}, but the certificate is "
            f"{certificate_name}'s"))
    fp = certificate_sha256.lower()
    others = sorted(r for r, sha in signed_roles.items() if r != role and sha.lower() == fp)
    if others:
        out.append(SignerFinding(
            SAME_SIGNER, role,
            f"{certificate_name} already signed as {' and '.join(others)} with this "
            f"certificate; one person in two roles is not an independent {role} signature"))
    return tuple(out)
