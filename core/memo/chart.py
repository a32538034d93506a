"""The AW-against-retention chart of the memo, as reportlab vector graphics.

One line per alternative: AW_k (signed, costs negative) for k = 1..n years of
retention, with the economic service life (the best AW) marked by a large
filled marker and an "ESL k" label. Lines differ in colour and dash pattern so
the chart also reads in black-and-white print.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from reportlab.graphics.shapes import Circle, Drawing, Line, Polygon, PolyLine, Rect, String
from reportlab.lib import colors
from reportlab.pdfbase.pdfmetrics import stringWidth

from core.memo.fonts import FB, FR

__all__ = ["nice_ticks", "aw_chart", "histogram_chart", "SERIES_STYLES", "short_money",
           "legend_labels"]

LEGEND_FONT_SIZE = 7.5
LEGEND_KEY_W = 28.0  # the line-and-marker sample before each legend label

SERIES_STYLES = (
    (colors.HexColor("#1f4e79"), None, "circle"),
    (colors.HexColor("#c55a11"), (4, 2), "square"),
    (colors.HexColor("#548235"), (1, 2), "triangle"),
    (colors.HexColor("#7030a0"), (6, 2, 1, 2), "diamond"),
    (colors.HexColor("#7f6000"), (2, 2), "circle"),
    (colors.HexColor("#2e75b6"), (8, 3), "square"),
)


def nice_ticks(lo: float, hi: float, target: int = 6) -> list[float]:
    """Round tick values covering [lo, hi] (1, 2, 2.5 or 5 times a power of ten).

    >>> nice_ticks(-43000, -8000)
    [-50000.0, -40000.0, -30000.0, -20000.0, -10000.0, 0.0]
    >>> nice_ticks(0, 0)
    [-1.0, -0.5, 0.0, 0.5, 1.0]
    """
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo < 1e-9:
        pad = max(abs(lo) * 0.1, 1.0)
        lo, hi = lo - pad, hi + pad
    raw = (hi - lo) / max(target - 1, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    start = math.floor(lo / step) * step
    ticks = []
    v = start
    while v < hi + step * 0.999:
        ticks.append(round(v, 10) + 0.0)
        v += step
    return [float(t) for t in ticks]


def short_money(v: float) -> str:
    """Axis labels: thousands separators, ASCII minus.

    >>> short_money(-40000.0), short_money(2500.5), short_money(0.0)
    ('-40,000', '2,500', '0')
    """
    r = round(v)
    return "0" if r == 0 else f"{r:,.0f}"


def _marker(kind: str, x: float, y: float, r: float, color, filled: bool):
    fill = color if filled else colors.white
    if kind == "square":
        return Rect(x - r, y - r, 2 * r, 2 * r, fillColor=fill, strokeColor=color, strokeWidth=0.8)
    if kind == "triangle":
        return Polygon([x - r, y - r, x + r, y - r, x, y + r * 1.1], fillColor=fill,
                       strokeColor=color, strokeWidth=0.8)
    if kind == "diamond":
        return Polygon([x, y - r * 1.2, x + r * 1.2, y, x, y + r * 1.2, x - r * 1.2, y],
                       fillColor=fill, strokeColor=color, strokeWidth=0.8)
    return Circle(x, y, r, fillColor=fill, strokeColor=color, strokeWidth=0.8)


def _fit(name: str, suffix: str, room: float) -> str:
    """``name + suffix`` shortened (the name only, never the ESL suffix) to fit ``room`` points."""
    text = f"{name}{suffix}"
    if stringWidth(text, FR(), LEGEND_FONT_SIZE) <= room:
        return text
    while name and stringWidth(f"{name}...{suffix}", FR(), LEGEND_FONT_SIZE) > room:
        name = name[:-1]
    return f"{name.rstrip()}...{suffix}"


def legend_labels(series: Sequence[tuple[str, Sequence[float], int]],
                  plot_width: float) -> tuple[int, list[str]]:
    """Legend columns (2, or 1 when a name is too long for half the width) and labels.

    Each label is the alternative's name and its ESL; a name too long even for
    the full width is shortened, but the ESL always shows.
    """
    suffixes = [f" (ESL {esl} yr{'s' if esl != 1 else ''})" for _, _, esl in series]
    texts = [f"{name}{sfx}" for (name, _, _), sfx in zip(series, suffixes, strict=True)]
    half = plot_width / 2 - LEGEND_KEY_W - 6
    cols = 2 if all(stringWidth(t, FR(), LEGEND_FONT_SIZE) <= half for t in texts) else 1
    room = (plot_width / cols) - LEGEND_KEY_W - 6
    return cols, [_fit(name, sfx, room) for (name, _, _), sfx in zip(series, suffixes, strict=True)]


def aw_chart(
    series: Sequence[tuple[str, Sequence[float], int]],
    width: float,
    height: float = 230.0,
    currency: str = "",
    title: str | None = None,
) -> Drawing:
    """Draw AW_k against retention k for each (name, AW_1..AW_n, ESL) series."""
    d = Drawing(width, height)
    left, right = 62.0, 12.0
    legend_cols, legend = legend_labels(series, width - left - right)
    legend_h = 14 * math.ceil(len(series) / legend_cols) + 6
    bottom, top = 30.0 + legend_h, 18.0 if title else 8.0
    pw, ph = width - left - right, height - bottom - top
    values = [v for _, aw, _ in series for v in aw if math.isfinite(v)]
    n_max = max((len(aw) for _, aw, _ in series), default=1)
    lo, hi = (min(values), max(values)) if values else (-1.0, 0.0)
    ticks = nice_ticks(lo, hi)
    y0, y1 = ticks[0], ticks[-1]

    def X(k: float) -> float:
        return left + (k - 0.5) / n_max * pw

    def Y(v: float) -> float:
        return bottom + (v - y0) / (y1 - y0) * ph

    if title:
        d.add(String(left, height - 11, title, fontName=FB(), fontSize=9))
    d.add(Rect(left, bottom, pw, ph, fillColor=None, strokeColor=colors.grey, strokeWidth=0.5))
    for t in ticks:
        y = Y(t)
        d.add(Line(left, y, left + pw, y, strokeColor=colors.HexColor("#dddddd"), strokeWidth=0.4))
        d.add(String(left - 4, y - 3, short_money(t), fontName=FR(), fontSize=7,
                     textAnchor="end"))
    if y0 < 0 < y1:
        d.add(Line(left, Y(0), left + pw, Y(0), strokeColor=colors.black, strokeWidth=0.6))
    step = 1 if n_max <= 15 else (2 if n_max <= 30 else 5)
    for k in range(1, n_max + 1):
        if k % step and k != 1:
            continue
        d.add(Line(X(k), bottom, X(k), bottom - 3, strokeColor=colors.grey, strokeWidth=0.5))
        d.add(String(X(k), bottom - 11, str(k), fontName=FR(), fontSize=7,
                     textAnchor="middle"))
    d.add(String(left + pw / 2, bottom - 22, "years of retention k", fontName=FR(),
                 fontSize=7.5, textAnchor="middle"))
    ylab = f"AW ({currency}/yr; costs negative)" if currency else "AW per year (costs negative)"
    lab = String(0, 0, ylab, fontName=FR(), fontSize=7.5, textAnchor="middle")
    from reportlab.graphics.shapes import Group

    g = Group(lab)
    g.transform = (0, 1, -1, 0, 9, bottom + ph / 2)
    d.add(g)
    label_spots: list[tuple[float, float]] = []
    for idx, (_name, aw, esl) in enumerate(series):
        color, dash, mk = SERIES_STYLES[idx % len(SERIES_STYLES)]
        pts = []
        for k, v in enumerate(aw, 1):
            if math.isfinite(v):
                pts += [X(k), Y(v)]
        if len(pts) >= 4:
            d.add(PolyLine(pts, strokeColor=color, strokeWidth=1.3, strokeDashArray=dash))
        for k, v in enumerate(aw, 1):
            if math.isfinite(v) and k != esl:
                d.add(_marker(mk, X(k), Y(v), 1.8, color, False))
        if 1 <= esl <= len(aw) and math.isfinite(aw[esl - 1]):
            ex, ey = X(esl), Y(aw[esl - 1])
            d.add(_marker(mk, ex, ey, 4.0, color, True))
            # put the label above the point, moving it up if another label is there
            ly = ey + 7
            while any(abs(ly - sy) < 9 and abs(ex - sx) < 60 for sx, sy in label_spots):
                ly += 9
            lx = ex
            anchor = "end" if ex > left + pw - 50 else ("start" if ex < left + 40 else "middle")
            if ly > bottom + ph - 8:  # no room above: put the label under the marker
                ly = ey - 13
                lx = ex + 4 if anchor == "end" else ex
            label_spots.append((lx, ly))
            d.add(String(lx, ly, f"ESL {esl}", fontName=FB(), fontSize=7,
                         fillColor=color, textAnchor=anchor))
    # legend under the axis title, in two columns when the names fit
    col_w = pw / legend_cols
    for idx, label in enumerate(legend):
        color, dash, mk = SERIES_STYLES[idx % len(SERIES_STYLES)]
        row, col = divmod(idx, legend_cols)
        lx = left + col * col_w
        ly = bottom - 34 - row * 14
        d.add(Line(lx, ly + 3, lx + 22, ly + 3, strokeColor=color, strokeWidth=1.3,
                   strokeDashArray=dash))
        d.add(_marker(mk, lx + 11, ly + 3, 3.0, color, True))
        d.add(String(lx + LEGEND_KEY_W, ly, label, fontName=FR(), fontSize=LEGEND_FONT_SIZE))
    return d


def histogram_chart(edges: Sequence[float], counts: Sequence[int], width: float,
                    height: float = 150.0, currency: str = "") -> Drawing:
    """Bars of the share of trials by AW difference (best challenger minus defender).

    Bars right of zero (the challenger better) are dark, left of zero light.
    """
    d = Drawing(width, height)
    left, right, bottom, top = 62.0, 12.0, 30.0, 16.0
    pw, ph = width - left - right, height - bottom - top
    total = max(sum(counts), 1)
    shares = [c / total for c in counts]
    lo, hi = float(edges[0]), float(edges[-1])
    if hi <= lo:
        hi = lo + 1.0
    xt = nice_ticks(lo, hi, 7)
    x0, x1 = min(xt[0], lo), max(xt[-1], hi)
    top_share = max(shares) if shares else 1.0
    yt = nice_ticks(0.0, top_share, 4)
    y1 = yt[-1] if yt[-1] > 0 else 1.0

    def X(v: float) -> float:
        return left + (v - x0) / (x1 - x0) * pw

    def Y(v: float) -> float:
        return bottom + v / y1 * ph

    d.add(String(left, height - 10, "Spread of the AW difference across trials",
                 fontName=FB(), fontSize=8.5))
    d.add(Rect(left, bottom, pw, ph, fillColor=None, strokeColor=colors.grey, strokeWidth=0.5))
    for t in yt:
        if t < 0:
            continue
        d.add(Line(left, Y(t), left + pw, Y(t), strokeColor=colors.HexColor("#dddddd"),
                   strokeWidth=0.4))
        d.add(String(left - 4, Y(t) - 3, f"{round(t * 100, 1):g}%", fontName=FR(), fontSize=7,
                     textAnchor="end"))
    for i, share in enumerate(shares):
        a, b = float(edges[i]), float(edges[i + 1])
        mid = (a + b) / 2
        fill = colors.HexColor("#1f4e79") if mid > 0 else colors.HexColor("#9dc3e6")
        d.add(Rect(X(a), bottom, max(X(b) - X(a) - 0.5, 0.3), Y(share) - bottom,
                   fillColor=fill, strokeColor=None))
    for t in xt:
        if x0 <= t <= x1:
            d.add(Line(X(t), bottom, X(t), bottom - 3, strokeColor=colors.grey, strokeWidth=0.5))
            d.add(String(X(t), bottom - 11, short_money(t), fontName=FR(), fontSize=7,
                         textAnchor="middle"))
    if x0 < 0 < x1:
        d.add(Line(X(0), bottom, X(0), bottom + ph, strokeColor=colors.black, strokeWidth=0.8))
        d.add(String(X(0) + 3, bottom + ph - 9, "replace to the right of 0", fontName=FR(),
                     fontSize=6.5))
    unit = f" ({currency}/yr)" if currency else ""
    d.add(String(left + pw / 2, bottom - 22, f"AW of the best challenger minus AW of the "
                 f"defender{unit}", fontName=FR(), fontSize=7.5, textAnchor="middle"))
    d.add(String(10, bottom + ph / 2, "share", fontName=FR(), fontSize=7.5))
    return d
