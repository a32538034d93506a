"""The plan memo's chart: capital by plan year as bars stacked by site, with the budget line
(reportlab vector shapes, in the manner of core/memo/chart.py)."""

from __future__ import annotations

from collections.abc import Sequence

from reportlab.graphics.shapes import Drawing, Line, PolyLine, Rect, String
from reportlab.lib import colors

from core.memo.chart import nice_ticks, short_money
from core.memo.fonts import FB, FR

SITE_COLOURS = ("#1f4e79", "#c55a11", "#548235", "#7030a0", "#7f6000", "#2e75b6", "#a5a5a5",
                "#843c0c")


def capital_chart(years: Sequence[int], sites: Sequence[tuple[str, Sequence[float]]],
                  budgets: Sequence[float | None], width: float, height: float = 220.0,
                  currency: str = "", title: str | None = None) -> Drawing:
    """Bars of capital per year stacked by site; the budget as a stepped dashed line."""
    d = Drawing(width, height)
    rows = (len(sites) + 3) // 3   # the budget key takes one more place
    left, right, bottom, top = 58.0, 10.0, 30.0 + 14 * rows + 6, 18.0 if title else 8.0
    pw, ph = width - left - right, height - bottom - top
    n = max(len(years), 1)
    totals = [sum(s[1][y] for s in sites) for y in range(len(years))]
    peak = max([*totals, *[b for b in budgets if b is not None], 1.0])
    ticks = nice_ticks(0.0, peak * 1.08)   # headroom: a budget line never sits on the frame
    y1 = ticks[-1]

    def X(k: float) -> float:
        return left + k / n * pw

    def Y(v: float) -> float:
        return bottom + v / y1 * ph

    if title:
        d.add(String(left, height - 11, title, fontName=FB(), fontSize=9))
    for t in ticks:
        d.add(Line(left, Y(t), left + pw, Y(t), strokeColor=colors.HexColor("#dddddd"),
                   strokeWidth=0.4))
        d.add(String(left - 4, Y(t) - 3, short_money(t), fontName=FR(), fontSize=7,
                     textAnchor="end"))
    d.add(Rect(left, bottom, pw, ph, fillColor=None, strokeColor=colors.grey, strokeWidth=0.5))
    bar = pw / n * 0.62
    for y, year in enumerate(years):
        base = 0.0
        cx = X(y + 0.5)
        for idx, (_name, amounts) in enumerate(sites):
            v = float(amounts[y])
            if v <= 0:
                continue
            colour = colors.HexColor(SITE_COLOURS[idx % len(SITE_COLOURS)])
            d.add(Rect(cx - bar / 2, Y(base), bar, Y(base + v) - Y(base), fillColor=colour,
                       strokeColor=colors.white, strokeWidth=0.4))
            base += v
        d.add(String(cx, bottom - 11, str(year), fontName=FR(), fontSize=7,
                     textAnchor="middle"))
    pts: list[float] = []
    for y, b in enumerate(budgets):
        if b is None:
            if len(pts) >= 4:
                d.add(PolyLine(pts, strokeColor=colors.black, strokeWidth=1.2,
                               strokeDashArray=(4, 2)))
            pts = []
            continue
        pts += [X(y), Y(b), X(y + 1), Y(b)]
    if len(pts) >= 4:
        d.add(PolyLine(pts, strokeColor=colors.black, strokeWidth=1.2, strokeDashArray=(4, 2)))
    d.add(String(left + pw / 2, bottom - 22, "plan year", fontName=FR(), fontSize=7.5,
                 textAnchor="middle"))
    label = f"capital ({currency})" if currency else "capital"
    from reportlab.graphics.shapes import Group

    g = Group(String(0, 0, label, fontName=FR(), fontSize=7.5, textAnchor="middle"))
    g.transform = (0, 1, -1, 0, 9, bottom + ph / 2)
    d.add(g)
    col_w = pw / 3
    for idx, (name, _a) in enumerate(sites):
        r, c = divmod(idx, 3)
        lx, ly = left + c * col_w, bottom - 36 - r * 14
        d.add(Rect(lx, ly, 10, 8, fillColor=colors.HexColor(SITE_COLOURS[idx % len(SITE_COLOURS)]),
                   strokeColor=None))
        d.add(String(lx + 14, ly + 1, name[:40], fontName=FR(), fontSize=7.5))
    if any(b is not None for b in budgets):
        r, c = divmod(len(sites), 3)
        lx, ly = left + c * col_w, bottom - 36 - r * 14
        d.add(Line(lx, ly + 4, lx + 16, ly + 4, strokeColor=colors.black, strokeWidth=1.2,
                   strokeDashArray=(4, 2)))
        d.add(String(lx + 20, ly + 1, "budget", fontName=FR(), fontSize=7.5))
    return d
