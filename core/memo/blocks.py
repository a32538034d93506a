"""Building blocks shared by the decision memo and the capital-plan memo (docs/method.md §8).

Both memos (:mod:`core.memo.render`, :mod:`core.plan.memo`) lay out their pages from
the same parts: the page sizes and margin, the paragraph styles, the grid tables, the
cautions (docs/method.md §9), the sign-off section with its signature boxes, the
document template and the footer with the fingerprint and "page x of y". Each part
lives here once; what differs between the memos (the noun, the commands named, the
footer lines, the page marker) is a parameter.

>>> sorted(PAGE_SIZES), round(MARGIN, 2)
(['A4', 'Letter'], 51.02)
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any, BinaryIO
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.styles import ParagraphStyle, getSampleStyleSheet
from reportlab.lib.units import mm
from reportlab.platypus import (
    CondPageBreak,
    Flowable,
    KeepTogether,
    Paragraph,
    SimpleDocTemplate,
    Spacer,
    Table,
    TableStyle,
)

from core.memo.cautions import caution_texts
from core.memo.fonts import FB, FI, FR
from core.memo.roles import ROLES

PAGE_SIZES = {"A4": A4, "Letter": LETTER}
MARGIN = 18 * mm


@dataclass(frozen=True)
class CommonMemoOptions:
    """The options every memo has: page size, currency, who signs it off, the
    organisation, the issue date and whether the empty signature fields are made."""

    page_size: str = "A4"
    currency: str = "GBP"
    prepared_by: str | None = None
    reviewed_by: str | None = None
    approved_by: str | None = None
    organisation: str | None = None
    issued: _dt.date | None = None
    signature_fields: bool = True

    def names(self) -> dict[str, str | None]:
        return {"prepared": self.prepared_by, "reviewed": self.reviewed_by,
                "approved": self.approved_by}


# --------------------------------------------------------------------------- styles
def _styles() -> dict[str, ParagraphStyle]:
    base = getSampleStyleSheet()
    body = ParagraphStyle("body", parent=base["BodyText"], fontName=FR(), fontSize=9,
                          leading=11.5, spaceAfter=3, alignment=TA_LEFT)
    return {
        "title": ParagraphStyle("title", parent=body, fontName=FB(), fontSize=16,
                                leading=19, spaceAfter=2),
        "sub": ParagraphStyle("sub", parent=body, fontSize=8.5, textColor=colors.HexColor("#444444")),
        "h": ParagraphStyle("h", parent=body, fontName=FB(), fontSize=11, leading=14,
                            spaceBefore=8, spaceAfter=3, textColor=colors.HexColor("#1f4e79"),
                            keepWithNext=1),
        "h3": ParagraphStyle("h3", parent=body, fontName=FB(), fontSize=9.5,
                             leading=12, spaceBefore=5, spaceAfter=2, keepWithNext=1),
        "lead": ParagraphStyle("lead", parent=body, fontSize=7.5, leading=9.5,
                               keepWithNext=1),
        "body": body,
        "rec": ParagraphStyle("rec", parent=body, fontName=FB(), fontSize=11,
                              leading=14.5),
        "small": ParagraphStyle("small", parent=body, fontSize=7.5, leading=9.5),
        "cell": ParagraphStyle("cell", parent=body, fontSize=7.5, leading=9, spaceAfter=0),
        "head": ParagraphStyle("head", parent=body, fontName=FB(), fontSize=7.5,
                               leading=9, spaceAfter=0),
        "bullet": ParagraphStyle("bullet", parent=body, leftIndent=10, bulletIndent=0),
    }


def _p(text: str, style: ParagraphStyle) -> Paragraph:
    return Paragraph(escape(str(text)), style)


def _grid(header: bool = True) -> TableStyle:
    cmds = [
        ("FONT", (0, 0), (-1, -1), FR(), 7.5),
        ("LINEBELOW", (0, 0), (-1, -1), 0.25, colors.HexColor("#cccccc")),
        ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ("LEFTPADDING", (0, 0), (-1, -1), 3),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
    ]
    if header:
        cmds += [("FONT", (0, 0), (-1, 0), FB(), 7.5),
                 ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#e8eef5")),
                 ("LINEBELOW", (0, 0), (-1, 0), 0.6, colors.HexColor("#1f4e79"))]
    return TableStyle(cmds)


def _table(rows: list[list[Any]], widths: Sequence[float] | None = None,
           numeric_from: int | None = 1, extra: Iterable[tuple] = (),
           header: bool = True) -> Table:
    if rows and widths is not None and header:
        hs = _styles()["head"]
        hr = ParagraphStyle("headr", parent=hs, alignment=2)
        rows = [[Paragraph(escape(c), hr if numeric_from is not None and i >= numeric_from
                           else hs) if isinstance(c, str) else c
                 for i, c in enumerate(rows[0])]] + rows[1:]
    t = Table(rows, colWidths=widths, repeatRows=1 if header else 0, hAlign="LEFT")
    style = TableStyle(list(_grid(header).getCommands()) + list(extra))
    if numeric_from is not None:
        style.add("ALIGN", (numeric_from, 0), (-1, -1), "RIGHT")
    t.setStyle(style)
    return t


# --------------------------------------------------------------------------- sign-off block
class SignOffBlock(Flowable):
    """Three rows (prepared, reviewed, approved): name, date and the signature box.

    While drawing, records where each signature box lands on the page, so the
    empty signature fields can be placed exactly there afterwards.
    """

    ROW_H = 50.0

    def __init__(self, width: float, names: dict[str, str | None], dates: dict[str, str],
                 sink: dict[str, tuple[int, tuple[float, float, float, float]]]):
        super().__init__()
        self.width = width
        self.names = names
        self.dates = dates
        self.sink = sink
        self.height = self.ROW_H * len(ROLES) + 14

    def wrap(self, availWidth, availHeight):  # noqa: N803 - reportlab API
        return self.width, self.height

    def draw(self):
        c = self.canv
        sig_w = min(215.0, self.width * 0.45)
        col_role, col_name = 0.0, 70.0
        col_date = 70.0 + (self.width - sig_w - 70.0) * 0.62
        sig_x = self.width - sig_w
        c.setFont(FB(), 7.5)
        top = self.height
        c.setFillColor(colors.HexColor("#444444"))
        c.drawString(col_role, top - 9, "Role")
        c.drawString(col_name, top - 9, "Name")
        c.drawString(col_date, top - 9, "Date")
        c.drawString(sig_x, top - 9, "Digital signature")
        c.setFillColor(colors.black)
        page = c.getPageNumber() - 1
        for n, role in enumerate(ROLES):
            y_top = top - 14 - n * self.ROW_H
            y_bot = y_top - self.ROW_H
            c.setStrokeColor(colors.HexColor("#999999"))
            c.setLineWidth(0.4)
            c.line(0, y_bot, self.width, y_bot)
            mid = y_bot + self.ROW_H / 2
            c.setFont(FB(), 9)
            c.drawString(col_role, mid - 3, role.capitalize())
            c.setFont(FR(), 9)
            name = self.names.get(role)
            if name:
                c.drawString(col_name, mid - 3, _fit(name, col_date - col_name - 6, c, 9))
            else:
                c.setStrokeColor(colors.HexColor("#777777"))
                c.line(col_name, mid - 5, col_date - 8, mid - 5)
            date = self.dates.get(role)
            if date:
                c.drawString(col_date, mid - 3, date)
            else:
                c.line(col_date, mid - 5, sig_x - 10, mid - 5)
            # the signature box: a thin frame; the signature's appearance goes inside it
            bx1, by1 = sig_x, y_bot + 5
            bx2, by2 = self.width, y_top - 5
            c.setStrokeColor(colors.HexColor("#1f4e79"))
            c.setDash(2, 2)
            c.rect(bx1, by1, bx2 - bx1, by2 - by1, stroke=1, fill=0)
            c.setDash()
            c.setFillColor(colors.HexColor("#8a8a8a"))
            c.setFont(FI(), 6.5)
            c.drawString(bx1 + 4, by1 + 3, f"{role.capitalize()}: digital signature field")
            c.setFillColor(colors.black)
            c.setStrokeColor(colors.HexColor("#cccccc"))
            c.line(bx1, by1 + 11, bx2, by1 + 11)
            # the field sits above the hint line, so a signature never covers the hint
            ax1, ay1 = c.absolutePosition(bx1 + 1, by1 + 12)
            ax2, ay2 = c.absolutePosition(bx2 - 1, by2 - 1)
            self.sink[role] = (page, (ax1, ay1, ax2, ay2))


def _fit(text: str, width: float, c, size: float) -> str:
    if c.stringWidth(text, FR(), size) <= width:
        return text
    while text and c.stringWidth(text + "...", FR(), size) > width:
        text = text[:-1]
    return text + "..."


# --------------------------------------------------------------------------- sections
def caution_bullets(styles: dict[str, ParagraphStyle], marker: Flowable | None = None
                    ) -> list[Flowable]:
    """The cautions (docs/method.md §9) as bullets, after ``marker`` (the flowable that
    records the page they start on) when given; the caller sets the heading."""
    out: list[Flowable] = [] if marker is None else [marker]
    out += [Paragraph(escape(c), styles["bullet"], bulletText="\u2022") for c in caution_texts()]
    return out


def signoff_sentence(noun: str, commands: str) -> str:
    """The sentence under the Sign-off heading: ``commands`` sign, ``noun`` is what a
    signature seals.

    >>> signoff_sentence("memo", "tenure memo / tenure sign")  # doctest: +NORMALIZE_WHITESPACE
    'Each signatory signs digitally in their own box (tenure memo / tenure sign). A digital
    signature seals the memo: any later change shows on verification (tenure verify).
    Printed copies may be signed by hand in the same boxes.'
    """
    return (f"Each signatory signs digitally in their own box ({commands}). A digital "
            f"signature seals the {noun}: any later change shows on verification (tenure "
            "verify). Printed copies may be signed by hand in the same boxes.")


def signoff_section(width: float, styles: dict[str, ParagraphStyle],
                    names: dict[str, str | None], issued: _dt.date | None,
                    sink: dict[str, tuple[int, tuple[float, float, float, float]]],
                    noun: str, commands: str) -> list[Flowable]:
    """The Sign-off heading, :func:`signoff_sentence` and the :class:`SignOffBlock`, kept
    on one page; the preparer's box is dated ``issued`` (today when None) when named."""
    day = (issued or _dt.date.today()).isoformat()
    dates = {"prepared": day} if names.get("prepared") else {}
    block = SignOffBlock(width, names, dates, sink)
    return [CondPageBreak(block.height + 60), KeepTogether([
        _p("Sign-off", styles["h"]),
        _p(signoff_sentence(noun, commands), styles["small"]),
        Spacer(1, 3), block])]


def memo_template(buf: BinaryIO, page_size: str, *, title: str, author: str, subject: str,
                  keywords: str) -> SimpleDocTemplate:
    """The page template of a memo: ``page_size`` (a key of PAGE_SIZES), MARGIN all round
    with room for the footer, and the PDF's document information."""
    return SimpleDocTemplate(
        buf, pagesize=PAGE_SIZES[page_size], leftMargin=MARGIN, rightMargin=MARGIN,
        topMargin=MARGIN, bottomMargin=MARGIN + 10, title=title, author=author,
        subject=subject, creator="Tenure", keywords=keywords, producer="Tenure (reportlab)")


def page_footer(fingerprint_line: str, title_line: str, total: list[int],
                size: tuple[float, float]) -> Callable[[Any, Any], None]:
    """The footer drawn on every page: a rule, ``fingerprint_line`` with "page x of y"
    (y is ``total[0]``, known after the first pass) on the right, and ``title_line``
    shortened to fit."""
    def draw(canvas: Any, doc: Any) -> None:
        canvas.saveState()
        w, _h = size
        canvas.setStrokeColor(colors.HexColor("#999999"))
        canvas.setLineWidth(0.4)
        canvas.line(MARGIN, MARGIN - 6, w - MARGIN, MARGIN - 6)
        canvas.setFont(FR(), 6.5)
        canvas.setFillColor(colors.HexColor("#444444"))
        canvas.drawString(MARGIN, MARGIN - 15, fingerprint_line)
        page = f"page {doc.page} of {total[0] if total[0] else doc.page}"
        canvas.drawRightString(w - MARGIN, MARGIN - 15, page)
        canvas.drawString(MARGIN, MARGIN - 23, _fit(title_line, w - 2 * MARGIN - 40, canvas,
                                                    6.5))
        canvas.restoreState()
    return draw
