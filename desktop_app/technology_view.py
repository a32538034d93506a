"""The "Technology plan" tab: the best chain of machines over the plan horizon as a timeline.

``TechnologyView(parent=None)``; ``set_result(StudyResult | None)`` shows the
result's ``technology`` plan (``core.technology.TechnologyPlan``) when the
study has a technology block, else says how to ask for one;
``set_currency(symbol)``.  One lane per machine (the defender first, then
each challenger, chosen or not); a bar for each stretch of plan years a
machine is in service, labelled with its vintage (the plan year it was
bought).  Everything drawn comes from the plan; the view computes nothing.
"""

from __future__ import annotations

import html
from dataclasses import dataclass

from PySide6.QtCore import QPointF, QRectF, QSize, Qt
from PySide6.QtGui import (
    QBrush,
    QColor,
    QFont,
    QFontMetrics,
    QPainter,
    QPaintEvent,
    QPen,
    QPolygonF,
)
from PySide6.QtWidgets import QFrame, QLabel, QScrollArea, QSizePolicy, QVBoxLayout, QWidget

from core.results import StudyResult
from core.text import money as _money
from desktop_app import palette

# Okabe & Ito colours, as the charts and the badge use them; the defender in grey.
DEFENDER_COLOUR = "#9a9a9a"
#: Challenger k (from 0) in the colour the Results charts give it (the defender takes
#: SERIES[0] there), so one machine has one colour in every view.
LANE_COLOURS = palette.SERIES[1:7]
KEEP_BADGE = (palette.KEEP, palette.ON_DECISION)
REPLACE_BADGE = (palette.REPLACE, palette.ON_DECISION)


@dataclass(frozen=True)
class Bar:
    """One drawn bar: lane index, first plan year, end year (exclusive), its label."""

    lane: int
    start: int
    end: int
    label: str


class PlanTimeline(QWidget):
    """Lanes of machines against plan years 0..H, drawn with QPainter."""

    LANE_H = 34
    TOP = 26
    BOTTOM = 34
    LEFT_MIN = 120

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._lanes: list[tuple[str, str]] = []        # (name, colour)
        self._bars: list[Bar] = []
        self._horizon = 0
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.setMouseTracking(True)

    def set_plan(self, lanes: list[tuple[str, str]], bars: list[Bar], horizon: int) -> None:
        self._lanes, self._bars, self._horizon = lanes, bars, horizon
        self.setMinimumHeight(self.sizeHint().height())
        self.updateGeometry()
        self.update()

    def bars(self) -> list[Bar]:
        """The bars drawn (for tests)."""
        return list(self._bars)

    def sizeHint(self) -> QSize:  # noqa: N802 - Qt's name
        return QSize(600, self.TOP + self.BOTTOM + self.LANE_H * max(len(self._lanes), 1))

    def _left(self) -> int:
        fm = QFontMetrics(self.font())
        widest = max((fm.horizontalAdvance(name) for name, _ in self._lanes), default=0)
        return max(self.LEFT_MIN, min(widest + 18, self.width() // 3))

    def _x(self, year: float, left: int) -> float:
        span = max(self.width() - left - 16, 10)
        return left + span * year / max(self._horizon, 1)

    def bar_at(self, x: float, y: float) -> Bar | None:
        left = self._left()
        for bar in self._bars:
            top = self.TOP + bar.lane * self.LANE_H + 5
            if self._x(bar.start, left) <= x <= self._x(bar.end, left) and \
                    top <= y <= top + self.LANE_H - 10:
                return bar
        return None

    def mouseMoveEvent(self, event) -> None:  # noqa: N802 - Qt's name
        bar = self.bar_at(event.position().x(), event.position().y())
        if bar is None:
            self.setToolTip("")
            return
        name = self._lanes[bar.lane][0]
        years = bar.end - bar.start
        self.setToolTip(f"{name}, {bar.label}: plan years {bar.start} to {bar.end - 1} "
                        f"({years} year{'s' if years != 1 else ''} in service)")

    def paintEvent(self, event: QPaintEvent) -> None:  # noqa: N802 - Qt's name
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.fillRect(self.rect(), QColor("#ffffff"))
        if not self._lanes or self._horizon < 1:
            p.end()
            return
        left = self._left()
        fm = QFontMetrics(self.font())
        bottom = self.TOP + self.LANE_H * len(self._lanes)
        # lanes and their names
        for k, (name, _colour) in enumerate(self._lanes):
            top = self.TOP + k * self.LANE_H
            if k % 2:
                p.fillRect(QRectF(0, top, self.width(), self.LANE_H), QColor("#f5f7fa"))
            p.setPen(QColor("#222222"))
            p.drawText(QRectF(6, top, left - 12, self.LANE_H),
                       Qt.AlignmentFlag.AlignVCenter | Qt.AlignmentFlag.AlignLeft,
                       fm.elidedText(name, Qt.TextElideMode.ElideRight, left - 12))
        # year grid and axis
        step = 1 if self._horizon <= 15 else (2 if self._horizon <= 30 else 5)
        for year in range(0, self._horizon + 1):
            x = self._x(year, left)
            p.setPen(QPen(QColor("#e3e3e3"), 1))
            p.drawLine(QPointF(x, self.TOP), QPointF(x, bottom))
            if year % step == 0 or year == self._horizon:
                p.setPen(QColor("#444444"))
                p.drawLine(QPointF(x, bottom), QPointF(x, bottom + 4))
                p.drawText(QRectF(x - 20, bottom + 4, 40, 16), Qt.AlignmentFlag.AlignHCenter,
                           str(year))
        p.setPen(QColor("#444444"))
        p.drawLine(QPointF(left, bottom), QPointF(self._x(self._horizon, left), bottom))
        p.drawText(QRectF(left, bottom + 18, self.width() - left - 16, 16),
                   Qt.AlignmentFlag.AlignHCenter, "plan year (0 = now; the plan ends at the "
                   f"end of year {self._horizon - 1})")
        # "now" marker
        x0 = self._x(0, left)
        p.setPen(QPen(QColor("#1f4e79"), 2))
        p.drawLine(QPointF(x0, self.TOP - 8), QPointF(x0, bottom))
        p.drawText(QRectF(x0 + 3, 4, 60, 16), Qt.AlignmentFlag.AlignLeft, "now")
        if any(bar.start > 0 for bar in self._bars):
            p.setPen(QColor(palette.REPLACE))
            p.drawText(QRectF(left, 4, self._x(self._horizon, left) - left, 16),
                       Qt.AlignmentFlag.AlignRight, "\u25bc replace")
        # replacements: a dashed line across the lanes and a marker above them
        for year in sorted({bar.start for bar in self._bars if bar.start > 0}):
            x = self._x(year, left)
            p.setPen(QPen(QColor("#555555"), 1, Qt.PenStyle.DashLine))
            p.drawLine(QPointF(x, self.TOP), QPointF(x, bottom))
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(QBrush(QColor(palette.REPLACE)))
            p.drawPolygon(QPolygonF([QPointF(x, self.TOP - 1), QPointF(x - 5, self.TOP - 9),
                                     QPointF(x + 5, self.TOP - 9)]))
        # bars
        bold = QFont(self.font())
        bold.setBold(True)
        for bar in self._bars:
            colour = QColor(self._lanes[bar.lane][1])
            top = self.TOP + bar.lane * self.LANE_H + 5
            rect = QRectF(self._x(bar.start, left) + 1, top,
                          self._x(bar.end, left) - self._x(bar.start, left) - 2,
                          self.LANE_H - 10)
            p.setPen(QPen(colour.darker(130), 1))
            p.setBrush(QBrush(colour))
            p.drawRoundedRect(rect, 4, 4)
            text_colour = "#000000" if colour.lightness() > 150 else "#ffffff"
            p.setPen(QColor(text_colour))
            p.setFont(bold)
            if QFontMetrics(bold).horizontalAdvance(bar.label) <= rect.width() - 6:
                p.drawText(rect.adjusted(3, 0, -3, 0), Qt.AlignmentFlag.AlignCenter, bar.label)
            p.setFont(self.font())    # a bar too short for its label: the tooltip has it
        p.end()


class TechnologyView(QWidget):
    """The technology-plan tab (see the module docstring)."""

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._currency = ""
        self._result: StudyResult | None = None
        outer = QVBoxLayout(self)
        outer.setContentsMargins(0, 0, 0, 0)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.Shape.NoFrame)
        body = QWidget()
        layout = QVBoxLayout(body)
        layout.setContentsMargins(10, 10, 10, 10)
        self.badge = QLabel("")
        self.badge.setAlignment(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        self.headline = QLabel("")
        self.headline.setWordWrap(True)
        self.headline.setTextFormat(Qt.TextFormat.RichText)
        self.timeline = PlanTimeline()
        self.figures = QLabel("")
        self.figures.setTextFormat(Qt.TextFormat.RichText)
        self.figures.setWordWrap(True)
        self.figures.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.note = QLabel("")
        self.note.setWordWrap(True)
        self.note.setStyleSheet("color: #444444; font-size: 8.5pt;")
        for w in (self.badge, self.headline, self.timeline, self.figures, self.note):
            layout.addWidget(w)
        layout.addStretch(1)
        scroll.setWidget(body)
        outer.addWidget(scroll)
        self.set_result(None)

    def set_currency(self, symbol: str) -> None:
        self._currency = symbol or ""
        self.set_result(self._result)

    def set_result(self, result: StudyResult | None) -> None:
        self._result = result
        plan = None if result is None else getattr(result, "technology", None)
        if plan is None:
            self.badge.hide()
            self.timeline.set_plan([], [], 0)
            self.timeline.hide()
            self.figures.setText("")
            self.headline.setText(
                "No technology plan for this study. Add a <b>technology</b> block (a horizon "
                "and the yearly change in a challenger's first cost and operating cost) to see "
                "the best chain of replacements when each year's model is cheaper to buy or "
                "to run, and whether to replace now or wait.")
            self.note.setText("")
            return
        study = result.study
        cur = self._currency
        replace = plan.first_action == "replace"
        bg, fg = REPLACE_BADGE if replace else KEEP_BADGE
        first_bar = plan.policy[0]
        self.badge.setText("REPLACE NOW" if replace else "WAIT: KEEP THIS YEAR")
        self.badge.setStyleSheet(f"background: {bg}; color: {fg}; font-weight: bold; "
                                 "font-size: 12pt; padding: 4px 10px; border-radius: 4px;")
        self.badge.setSizePolicy(QSizePolicy.Policy.Maximum, QSizePolicy.Policy.Fixed)
        self.badge.show()
        what = (f"replace {html.escape(study.defender.name)} now with "
                f"{html.escape(first_bar.challenger or '')}" if replace else
                f"keep {html.escape(study.defender.name)} this year and wait for a better model")
        tag = " after tax" if plan.basis == "after-tax" else " before tax"
        margin = _money(abs(plan.waiting_gain), cur)
        compare = (f"replacing now beats the best plan that waits by <b>{margin}</b>"
                   if plan.waiting_gain < 0 else
                   f"waiting beats the best plan that replaces now by <b>{margin}</b>")
        self.headline.setText(
            f"Best plan over <b>{plan.horizon} years</b>{tag}: {what}; {compare} in present "
            "worth.")
        names = [study.defender.name] + [c.name for c in study.challengers]
        lanes = [(study.defender.name, DEFENDER_COLOUR)] + [
            (c.name, LANE_COLOURS[k % len(LANE_COLOURS)]) for k, c in enumerate(study.challengers)]
        bars = [Bar(names.index(seg.name) if seg.role == "challenger" else 0, seg.start, seg.end,
                    "in place" if seg.vintage is None else f"vintage {seg.vintage}")
                for seg in plan.segments()]
        self.timeline.set_plan(lanes, bars, plan.horizon)
        self.timeline.show()
        rows = [("Present worth of the best plan", plan.present_worth),
                ("Annual worth over the horizon", plan.annual_worth),
                ("Best plan that replaces now (PW)", plan.best_replace_now_present_worth),
                ("Best plan that waits (PW)", plan.best_wait_present_worth),
                ("Best plan if every future model were today's (PW)",
                 plan.no_change_present_worth),
                ("Value of waiting for better models (PW)", plan.value_of_change)]
        cells = "".join(f"<tr><td style='padding:2px 14px 2px 0'>{html.escape(label)}</td>"
                        f"<td align='right'>{_money(value, cur)}</td></tr>"
                        for label, value in rows)
        self.figures.setText(f"<table>{cells}</table>")
        rates = "; ".join(f"{html.escape(n)}: first cost {gp:+.1%}, operating cost {gc:+.1%} "
                          "a year" for n, gp, gc in plan.change_rates)
        self.note.setText(
            f"Change rates: {rates}. A model bought in plan year t costs P(1+gP)^t, resells for "
            "S_k(1+gP)^t and runs for C_j(1+gC)^t; extra costs as estimated. Present worths in "
            "today's money (costs negative); the defender's market value today counts as an "
            "outlay. Solved by backward induction (Bellman, 1955).")
