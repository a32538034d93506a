"""Names as the signature appearance can print them (its built-in font is ASCII-only)."""

from __future__ import annotations

import unicodedata

_FOLD = str.maketrans({"Ł": "L", "ł": "l", "Ø": "O", "ø": "o", "Đ": "D", "đ": "d", "ß": "ss",
                       "Æ": "AE", "æ": "ae", "Œ": "OE", "œ": "oe", "Þ": "Th", "þ": "th",
                       "ı": "i", "Ħ": "H", "ħ": "h"})


def stamp_text(text: str) -> str:
    """ASCII form of a name for the signature appearance (its built-in font is ASCII-only).

    The full name stays in the certificate, the sign-off block and ``verify``'s report.

    >>> stamp_text("Łukasz Żak"), stamp_text("Zoë Brontë")
    ('Lukasz Zak', 'Zoe Bronte')
    """
    folded = unicodedata.normalize("NFKD", text.translate(_FOLD))
    out = "".join(ch for ch in folded if not unicodedata.combining(ch))
    out = out.encode("ascii", "replace").decode("ascii")
    return out.replace("%", "%%")
