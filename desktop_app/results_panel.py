"""The results panel of the window: the recommendation, the key figures, warnings and cautions.

``ResultsPanel.set_result`` shows a ``core.results.StudyResult``: a coloured
badge (KEEP / REPLACE NOW / REPLACE IN N YEARS) with the recommendation's
one-sentence reason, the basis (before or after tax), a table of each
alternative's economic service life (ESL), AW and EAC at the ESL and rank, the
replacement value against the defender's market value today, the
one-more-year check, and the study's warnings.  The cautions of docs/method.md §9
are always shown, also with no result.  Nothing here computes economics.
"""

from __future__ import annotations

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtWidgets import (
    QAbstractItemView,
    QFrame,
    QGroupBox,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QScrollArea,
    QSizePolicy,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.decision import reason
from core.memo.cautions import caution_texts as memo_cautions
from core.results import Recommendation, StudyOption, StudyResult
from core.text import money
from desktop_app import palette
from desktop_app.charts import years_text

__all__ = ["ResultsPanel", "badge_for", "caution_texts"]

# (background, text): keep and replace as everywhere in the window (desktop_app/palette.py).
BADGE_COLOURS = palette.BADGE_COLOURS

COLUMNS = ("Rank", "Alternative", "Role", "ESL", "AW at ESL", "EAC at ESL")


def caution_texts() -> list[str]:
    """The cautions of docs/method.md §9 (``core.memo.cautions``, the memo's texts)."""
    return list(memo_cautions())


def badge_for(recommendation: Recommendation | None) -> tuple[str, str]:
    """(badge text, colour key) of a ``core.results.Recommendation``.

    Replace now -> 'REPLACE NOW'; keep j years then a challenger (study period)
    -> 'REPLACE IN j YEARS'; keep -> 'KEEP'.
    """
    if recommendation is None:
        return "NO RESULT", "none"
    if recommendation.action == "replace":
        return "REPLACE NOW", "replace-now"
    j = recommendation.defender_years
    if recommendation.challenger is not None and j:
        return f"REPLACE IN {years_text(int(j)).upper()}", "replace-later"
    return "KEEP", "keep"


def _percent(x: float) -> str:
    return f"{100.0 * float(x):.2f} %".replace(".00 %", " %")


class ResultsPanel(QWidget):
    """Recommendation, key figures, warnings and the always-visible cautions of one result.

    Signal ``alternativeActivated(str)``: a row of the key-figures table was
    clicked (the main window may show that alternative's breakdown chart).
    """

    alternativeActivated = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self._result: StudyResult | None = None
        self._currency = ""

        self.badge = QLabel(self)
        self.badge.setAlignment(Qt.AlignmentFlag.AlignCenter)
        self.badge.setSizePolicy(QSizePolicy.Policy.Maximum, QSizePolicy.Policy.Fixed)
        self.basis_label = QLabel(self)
        self.basis_label.setStyleSheet("color: #333333;")
        self.basis_label.setWordWrap(True)
        self.title_label = QLabel(self)
        self.title_label.setStyleSheet("color: #333333;")
        self.title_label.setWordWrap(True)
        self.reason_label = QLabel(self)
        self.reason_label.setWordWrap(True)
        self.reason_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.reason_label.setStyleSheet("font-size: 12pt; font-weight: bold;")
        self.before_tax_label = QLabel(self)
        self.before_tax_label.setWordWrap(True)
        self.before_tax_label.setStyleSheet("color: #333333;")

        self.table = QTableWidget(0, len(COLUMNS), self)
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(1, QHeaderView.ResizeMode.Stretch)
        self.table.cellClicked.connect(self._row_clicked)
        self.table.installEventFilter(self)  # refit the height when the width changes
        self.table.setToolTip("AW: annual worth, signed (costs negative; higher is better).\n"
                              "EAC: equivalent annual cost = -AW (lower is better).\n"
                              "ESL: economic service life, the retention with the best AW.")

        self.replacement_label = QLabel(self)
        self.one_more_year_label = QLabel(self)
        self.extra_label = QLabel(self)
        for label in (self.replacement_label, self.one_more_year_label, self.extra_label):
            label.setWordWrap(True)
            label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        self.warnings_label = QLabel(self)
        self.warnings_label.setWordWrap(True)
        self.warnings_label.setStyleSheet(
            "background: #fff4d6; border: 1px solid #E69F00; padding: 6px; color: #000000;")

        self.table_caption = QLabel(self)
        self.table_caption.setWordWrap(True)
        self.table_caption.setStyleSheet("color: #333333;")
        self.options_label = QLabel(self)
        self.options_label.setWordWrap(True)
        self.options_label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        figures = QGroupBox("Key figures", self)
        fig_layout = QVBoxLayout(figures)
        fig_layout.addWidget(self.table_caption)
        fig_layout.addWidget(self.table)
        fig_layout.addWidget(self.options_label)
        fig_layout.addWidget(self.replacement_label)
        fig_layout.addWidget(self.one_more_year_label)
        fig_layout.addWidget(self.extra_label)

        head = QHBoxLayout()
        head.addWidget(self.badge)
        head.addSpacing(12)
        head_text = QVBoxLayout()
        head_text.addWidget(self.title_label)
        head_text.addWidget(self.basis_label)
        head.addLayout(head_text, 1)

        body = QWidget(self)
        body_layout = QVBoxLayout(body)
        body_layout.setContentsMargins(0, 0, 0, 0)
        body_layout.addLayout(head)
        body_layout.addWidget(self.reason_label)
        body_layout.addWidget(self.before_tax_label)
        body_layout.addWidget(self.warnings_label)
        body_layout.addWidget(figures)
        body_layout.addStretch(1)
        scroll = QScrollArea(self)
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.Shape.NoFrame)
        scroll.setWidget(body)

        # Cautions sit outside the scroll area: always visible.
        self.cautions_box = QGroupBox("Cautions", self)
        cautions_layout = QVBoxLayout(self.cautions_box)
        cautions_layout.setContentsMargins(8, 4, 8, 4)
        self.cautions_label = QLabel(self.cautions_box)
        self.cautions_label.setWordWrap(True)
        self.cautions_label.setTextFormat(Qt.TextFormat.RichText)
        self.cautions_label.setStyleSheet("font-size: 8.5pt; color: #222222;")
        self._cautions = caution_texts()
        self.cautions_label.setText("".join(f"<p style='margin:2px 0'>&bull; {_html(t)}</p>"
                                            for t in self._cautions))

        # On a short screen the cautions would take the results' room: at most about six
        # lines show, the rest scrolls inside the box (the first lines stay in view).
        cautions_scroll = QScrollArea(self.cautions_box)
        cautions_scroll.setWidgetResizable(True)
        cautions_scroll.setFrameShape(QFrame.Shape.NoFrame)
        cautions_scroll.setWidget(self.cautions_label)
        cautions_scroll.setMaximumHeight(6 * self.cautions_label.fontMetrics().lineSpacing() + 12)
        cautions_layout.addWidget(cautions_scroll)

        layout = QVBoxLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.addWidget(scroll, 1)
        layout.addWidget(self.cautions_box, 0)
        self._render()

    # ------------------------------------------------------------- public API
    def set_result(self, result: StudyResult | None) -> None:
        """Show ``result`` (a ``core.results.StudyResult``), or the empty state for None."""
        self._result = result
        self._render()

    def result(self) -> StudyResult | None:
        return self._result

    def set_currency(self, symbol: str) -> None:
        """The currency symbol put before amounts ('' for none)."""
        self._currency = symbol or ""
        self._render()

    def badge_text(self) -> str:
        return self.badge.text()

    def recommendation_text(self) -> str:
        return self.reason_label.text()

    def basis_text(self) -> str:
        return self.basis_label.text()

    def caution_texts(self) -> list[str]:
        """The cautions shown (always, with or without a result)."""
        return list(self._cautions)

    def warnings_text(self) -> str:
        return self.warnings_label.text() if not self.warnings_label.isHidden() else ""

    def figures_rows(self) -> list[tuple[str, ...]]:
        """The key-figures table as text rows (columns as in ``COLUMNS``)."""
        rows = []
        for r in range(self.table.rowCount()):
            rows.append(tuple(self.table.item(r, c).text() if self.table.item(r, c) else ""
                              for c in range(self.table.columnCount())))
        return rows

    def figures_text(self) -> str:
        """The sentences under the table (replacement value, one more year, extras)."""
        return "\n".join(label.text() for label in
                         (self.replacement_label, self.one_more_year_label, self.extra_label)
                         if label.text())

    # -------------------------------------------------------------- internals
    def _money(self, value: float) -> str:
        return money(value, self._currency)

    def _row_clicked(self, row: int, _column: int) -> None:
        item = self.table.item(row, 1)
        if item is not None:
            self.alternativeActivated.emit(item.text())

    def _set_badge(self, text: str, key: str) -> None:
        bg, fg = BADGE_COLOURS[key]
        self.badge.setText(text)
        style = (f"background: {bg}; color: {fg}; font-size: 15pt; font-weight: bold; "
                 f"padding: 6px 14px; border-radius: 6px;")
        if self.badge.styleSheet() != style:  # a new style sheet re-polishes the widget
            self.badge.setStyleSheet(style)

    def _render(self) -> None:
        r = self._result
        if r is None:
            self._set_badge("NO RESULT", "none")
            self.title_label.setText("")
            self.basis_label.setText("")
            self.reason_label.setText("Open or run a study to see its recommendation.")
            self.before_tax_label.hide()
            self.table.setRowCount(0)
            self.table_caption.setText("")
            self.options_label.setText("")
            for label in (self.replacement_label, self.one_more_year_label, self.extra_label):
                label.setText("")
            self.warnings_label.hide()
            return
        rec = r.recommendation
        after = rec.basis == "after-tax"
        study = r.study
        self._set_badge(*badge_for(rec))
        self.title_label.setText(f"<b>{_html(study.title)}</b>")
        self.reason_label.setText(reason(r.decision, self._currency))
        self.basis_label.setText(self._basis_words(r, after))

        before = r.before_tax_recommendation
        if after and before is not None and before is not rec:
            same = (before.action, before.challenger, before.defender_years) == (
                rec.action, rec.challenger, rec.defender_years)
            verdict = badge_for(before)[0].lower()
            self.before_tax_label.setText(
                f"Before tax the study says the same ({verdict})." if same else
                f"Before tax the study would say {verdict}: "
                f"{reason(r.before_tax, self._currency)}")
            self.before_tax_label.show()
        else:
            self.before_tax_label.hide()

        self._fill_table(r, after)
        self._fill_options(r)
        self._fill_sentences(r, rec)
        if r.warnings:
            self.warnings_label.setText("Warnings:\n" + "\n".join(f"\u26a0 {w}" for w in r.warnings))
            self.warnings_label.show()
        else:
            self.warnings_label.hide()

    def _basis_words(self, r: StudyResult, after: bool) -> str:
        study = r.study
        if after and study.tax is not None:
            text = (f"Basis: after tax (tax rate {_percent(study.tax.rate)}, after-tax MARR "
                    f"{_percent(study.tax.after_tax_marr)})")
        else:
            text = f"Basis: before tax (MARR {_percent(study.marr)}"
            if abs(float(r.rate) - float(study.marr)) > 1e-12:
                text += f"; rate used {_percent(r.rate)}"
            text += ")"
        if study.inflation is not None:
            text += (f" · inflation {_percent(study.inflation.rate)}, estimates in "
                     f"{'constant' if study.inflation.estimates == 'constant' else 'then-current'}"
                     f" money")
        if study.study_period:
            text += f" · study period {years_text(int(study.study_period))}"
        return text

    def _fill_table(self, r: StudyResult, after: bool) -> None:
        basis = r.decision if after else r.before_tax
        order = basis.ranking
        if self.table.rowCount() != len(order):
            self.table.setRowCount(len(order))
        right = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter
        for row, alt in enumerate(order):
            aw = alt.annual_worth_at_economic_life
            cells = (str(alt.rank), alt.name, alt.role, years_text(alt.economic_life),
                     self._money(aw), self._money(-aw))
            bold = alt.rank == 1
            for col, text in enumerate(cells):
                # Cells are updated in place (and only when they change): a new item per
                # cell on every edit made the table re-lay itself out and repaint whole.
                item = self.table.item(row, col)
                if item is None:
                    item = QTableWidgetItem(text)
                    if col in (0, 3, 4, 5):
                        item.setTextAlignment(right)
                    self.table.setItem(row, col, item)
                elif item.text() != text:
                    item.setText(text)
                if item.font().bold() != bold:
                    font = item.font()
                    font.setBold(bold)
                    item.setFont(font)
        self._fit_table_height()

    def _fit_table_height(self) -> None:
        """Every row visible (the defender's too), with room for a horizontal scroll bar
        when the columns are wider than the pane."""
        table = self.table
        header = table.horizontalHeader()
        height = max(header.height(), header.sizeHint().height()) + 2 * table.frameWidth()
        height += sum(table.rowHeight(i) for i in range(table.rowCount()))
        if header.length() > table.viewport().width():
            height += table.horizontalScrollBar().sizeHint().height()
        if table.height() != height + 2:
            table.setFixedHeight(height + 2)

    def eventFilter(self, watched, event) -> bool:  # noqa: N802 - Qt's name
        if watched is self.table and event.type() == QEvent.Type.Resize:
            self._fit_table_height()
        return super().eventFilter(watched, event)

    def _fill_options(self, r: StudyResult) -> None:
        """Caption of the ESL table and, with a study period, the best options in words."""
        period = r.study.study_period
        basis = "after tax" if r.recommendation.basis == "after-tax" else "before tax"
        if not period:
            self.table_caption.setText(f"Each alternative at its economic service life, {basis}; "
                                       f"rank 1 has the least equivalent annual cost.")
            self.options_label.setText("")
            return
        self.table_caption.setText(
            f"Each alternative at its economic service life, {basis} (this ranking ignores the "
            f"{int(period)}-year study period; the decision rests on the options below).")
        feasible = [o for o in r.study_period_options
                    if o.feasible and o.annual_worth is not None]
        feasible.sort(key=lambda o: -round(float(o.annual_worth), 2))
        infeasible = sum(1 for o in r.study_period_options if not o.feasible)
        d = r.defender.name
        lines = []
        for i, o in enumerate(feasible[:3], start=1):
            lines.append(f"{i}. {_option_words(d, o)}: EAC {self._money(-o.annual_worth)}")
        more = len(feasible) - len(lines)
        tail = []
        if more > 0:
            tail.append(f"{more} more feasible")
        if infeasible:
            tail.append(f"{infeasible} infeasible")
        text = (f"Best study-period options over {years_text(int(period))}, {basis}:\n"
                + "\n".join(lines))
        if tail:
            text += "\n(" + ", ".join(tail) + "; see the study-period chart.)"
        self.options_label.setText(text)

    def _fill_sentences(self, r: StudyResult, rec: Recommendation) -> None:
        d = r.defender
        best = rec.best_challenger
        rv = rec.replacement_value
        if rv is None:
            self.replacement_label.setText(
                f"Replacement value: not found. Market value of {d.name} today: "
                f"{self._money(d.price)}.")
        else:
            favours = r.decision.replacement_value_favours
            text = (f"Replacement value {self._money(rv)}: the market value of {d.name} today "
                    f"at which keeping it and replacing it with {best} cost the same. Its market "
                    f"value today is {self._money(d.price)}, "
                    f"{'above' if favours == 'replacing' else 'below' if favours == 'keeping' else 'equal to'}"
                    f" the replacement value, which favours {favours}.")
            if r.study.study_period:
                text += " (Economic-life comparison, without the study period.)"
            self.replacement_label.setText(text)
        check = rec.one_more_year
        keep = check.keep_next_year
        self.one_more_year_label.setText(
            f"One more year: the marginal cost of keeping {d.name} in year {check.year}, "
            f"{self._money(check.defender_marginal_cost)}, is {'below' if keep else 'not below'} "
            f"{best}'s equivalent annual cost at its economic life, "
            f"{self._money(check.challenger_annual_cost)}: "
            + ("keeping it one more year costs less." if keep else
               "keeping it another year costs more than replacing it."))
        extras = []
        if rec.action == "keep" and not r.study.study_period and rec.planned_defender_years:
            extras.append(f"Under today's estimates {d.name} would be replaced after "
                          f"{years_text(int(rec.planned_defender_years))}; restudy each year.")
        if r.risk is not None:
            extras.append(f"Risk analysis: {100.0 * r.risk.probability_replace:.0f} % of trials "
                          "say replace.")
        self.extra_label.setText(" ".join(extras))


def _option_words(defender: str, option: StudyOption) -> str:
    """'Keep Old press 2 years, then New press 6 years' and the like."""
    if option.challenger is None:
        return f"Keep {defender} all {years_text(option.defender_years)}"
    if option.defender_years == 0:
        return f"Replace now with {option.challenger} for {years_text(option.challenger_years)}"
    return (f"Keep {defender} {years_text(option.defender_years)}, then {option.challenger} "
            f"{years_text(option.challenger_years)}")


def _html(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
