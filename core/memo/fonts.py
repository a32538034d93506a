"""Fonts for the memo: a TrueType sans with wide Latin coverage when the system has one.

The standard PDF Helvetica covers only Western European letters; names such as
"Łódź" would print as boxes. So the memo embeds (as a subset) DejaVu Sans or
Arial when found, and falls back to Helvetica otherwise.

>>> FR() in ("TenureSans", "Helvetica") and FB() in ("TenureSans-Bold", "Helvetica-Bold")
True
"""

from __future__ import annotations

import os
from functools import lru_cache
from pathlib import Path

__all__ = ["FR", "FB", "FI", "font_names"]

_CANDIDATES = (
    ("/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
     "/usr/share/fonts/truetype/dejavu/DejaVuSans-Bold.ttf",
     "/usr/share/fonts/truetype/dejavu/DejaVuSans-Oblique.ttf"),
    ("/usr/share/fonts/dejavu/DejaVuSans.ttf", "/usr/share/fonts/dejavu/DejaVuSans-Bold.ttf",
     "/usr/share/fonts/dejavu/DejaVuSans-Oblique.ttf"),
    (os.path.join(os.environ.get("WINDIR", r"C:\Windows"), "Fonts", "arial.ttf"),
     os.path.join(os.environ.get("WINDIR", r"C:\Windows"), "Fonts", "arialbd.ttf"),
     os.path.join(os.environ.get("WINDIR", r"C:\Windows"), "Fonts", "ariali.ttf")),
    ("/System/Library/Fonts/Supplemental/Arial.ttf",
     "/System/Library/Fonts/Supplemental/Arial Bold.ttf",
     "/System/Library/Fonts/Supplemental/Arial Italic.ttf"),
    ("/Library/Fonts/Arial.ttf", "/Library/Fonts/Arial Bold.ttf", "/Library/Fonts/Arial Italic.ttf"),
)


@lru_cache(maxsize=1)
def font_names() -> tuple[str, str, str]:
    """(regular, bold, italic) font names registered with reportlab."""
    if os.environ.get("TENURE_MEMO_BASE14"):  # force the standard fonts (tests, tiny PDFs)
        return "Helvetica", "Helvetica-Bold", "Helvetica-Oblique"
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    for regular, bold, italic in _CANDIDATES:
        if all(Path(p).is_file() for p in (regular, bold, italic)):
            try:
                pdfmetrics.registerFont(TTFont("TenureSans", regular))
                pdfmetrics.registerFont(TTFont("TenureSans-Bold", bold))
                pdfmetrics.registerFont(TTFont("TenureSans-Italic", italic))
                pdfmetrics.registerFontFamily("TenureSans", normal="TenureSans",
                                              bold="TenureSans-Bold", italic="TenureSans-Italic",
                                              boldItalic="TenureSans-Bold")
            except Exception:  # noqa: BLE001 - a damaged font file: try the next
                continue
            return "TenureSans", "TenureSans-Bold", "TenureSans-Italic"
    return "Helvetica", "Helvetica-Bold", "Helvetica-Oblique"


def FR() -> str:  # noqa: N802 - short names read well inside layout code
    return font_names()[0]


def FB() -> str:  # noqa: N802
    return font_names()[1]


def FI() -> str:  # noqa: N802
    return font_names()[2]
