"""The read-only "Study years" dialog: how one asset's decision evolved across yearly restudies.

``StudyYearsDialog(workbook_path, asset_tag, parent=None)`` opens the workbook
read-only (:meth:`core.workbook.Workbook.open` with ``write=False``) and shows
one row per stored study year of the asset: the recommendation (from the
result snapshot stored with the study; when a year has none, it is computed by
:func:`core.study.run_study` and marked *recomputed*), the best challenger, the
defender's market value today, the MARR, the decision basis, the study's short
fingerprint and the memos issued for that study.

Below the table, *Differences* lists in plain words what changed in the
estimates of the selected year against the year before (from
:func:`core.studyfile.study_to_dict` of both). No economics here: every number
shown is either an estimate or core's result.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractItemView,
    QDialog,
    QDialogButtonBox,
    QGroupBox,
    QHeaderView,
    QLabel,
    QPlainTextEdit,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from core.errors import StudyError
from core.jsonout import study_json
from core.studyfile import study_to_dict

COLUMNS = ("Year", "Decision", "Best challenger", "Defender value today", "MARR",
           "Basis", "Study", "Memos", "Recommendation")

#: Plain names of the estimate fields compared year against year.
FIELD_LABELS = {
    "title": "title",
    "marr": "MARR",
    "study_period": "study period",
    "market_value": "market value today",
    "first_cost": "first cost",
    "max_life": "maximum life",
    "market_values": "market values",
    "operating_costs": "operating costs",
    "extra_costs": "one-off costs",
    "depreciation": "depreciation",
    "tax": "tax",
    "inflation": "inflation",
    "uncertainty": "risk inputs",
    "notes": "notes",
    "name": "name",
}
_PERCENT_KEYS = {"marr", "decline_rate", "growth", "rate", "after_tax_marr"}


@dataclass(frozen=True)
class YearRow:
    """What the table shows for one study year (all read from the workbook or core)."""

    year: int
    action: str
    reason: str
    best_challenger: str
    defender_value: float | None
    marr: float | None
    basis: str
    fingerprint: str
    memos: tuple[str, ...] = ()
    recomputed: bool = False
    study: dict = field(default_factory=dict)
    error: str = ""


# ---------------------------------------------------------------------- wording
def _number(value: float) -> str:
    if float(value).is_integer():
        return f"{value:,.0f}"
    return f"{value:,.2f}"


def describe(value: Any, key: str = "") -> str:
    """An estimate value in plain words: ``{"first": 100, "gradient": 5}`` → 'first 100, gradient 5'.

    >>> describe({"first": 34820, "gradient": 2600})
    'first 34,820, gradient 2,600'
    >>> describe(0.1, "marr")
    '10%'
    """
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        if key in _PERCENT_KEYS:
            return f"{value * 100:g}%"
        return _number(value)
    if isinstance(value, Mapping):
        if not value:
            return "none"
        return ", ".join(f"{k.replace('_', ' ')} {describe(v, k)}" for k, v in value.items())
    if isinstance(value, Sequence) and not isinstance(value, str):
        if not value:
            return "none"
        return "; ".join(describe(v, key) for v in value)
    return str(value).replace("_", " ")


def _change(label: str, old: Any, new: Any, key: str) -> str:
    if old is None:
        return f"{label}: set to {describe(new, key)}"
    if new is None:
        return f"{label}: removed (was {describe(old, key)})"
    return f"{label}: {describe(old, key)} → {describe(new, key)}"


def _alt_changes(who: str, old: Mapping, new: Mapping) -> list[str]:
    lines = []
    for key in dict.fromkeys((*old, *new)):
        if key != "name" and old.get(key) != new.get(key):
            label = f"{who} {FIELD_LABELS.get(key, key.replace('_', ' '))}"
            lines.append(_change(label, old.get(key), new.get(key), key))
    return lines


def differences(before: Mapping, after: Mapping) -> list[str]:
    """Plain-word list of estimate changes from ``before`` to ``after`` (study_to_dict forms).

    >>> differences({"marr": 0.1, "defender": {"name": "D", "max_life": 5}, "challengers": []},
    ...             {"marr": 0.12, "defender": {"name": "D", "max_life": 4}, "challengers": []})
    ['MARR: 10% → 12%', 'Defender maximum life: 5 → 4']
    """
    lines: list[str] = []
    skip = {"defender", "challengers"}
    for key in dict.fromkeys((*before, *after)):
        if key in skip or before.get(key) == after.get(key):
            continue
        label = FIELD_LABELS.get(key, key.replace("_", " "))
        lines.append(_change(label[:1].upper() + label[1:], before.get(key), after.get(key), key))
    old_def, new_def = before.get("defender") or {}, after.get("defender") or {}
    if old_def.get("name") != new_def.get("name"):
        lines.append(f"Defender renamed: {old_def.get('name')} → {new_def.get('name')}")
    lines += _alt_changes("Defender", old_def, new_def)
    old_ch = {c.get("name"): c for c in before.get("challengers") or ()}
    new_ch = {c.get("name"): c for c in after.get("challengers") or ()}
    for name in old_ch:
        if name not in new_ch:
            lines.append(f"Challenger removed: {name}")
    for name in new_ch:
        if name not in old_ch:
            lines.append(f"Challenger added: {name}")
        else:
            lines += _alt_changes(f"Challenger {name}:", old_ch[name], new_ch[name])
    return lines


# ---------------------------------------------------------------------- loading
def load_years(workbook_path: str | Path, tag: str) -> list[YearRow]:
    """Every study year of ``tag`` as :class:`YearRow`, oldest first (workbook opened read-only)."""
    from core.study import run_study
    from core.workbook import Workbook

    with Workbook.open(workbook_path, write=False) as wb:
        years = wb.years(tag)
        memos = wb.memos()
        rows = []
        for year in years:
            try:
                rec = wb.record(tag, year)
            except (StudyError, KeyError, ValueError) as exc:
                rows.append(YearRow(year, "?", "", "", None, None, "", "",
                                    error=f"this year's study could not be read ({exc})"))
                continue
            result = rec.result_json
            recomputed = False
            if not result:
                result = study_json(run_study(rec.study))
                recomputed = True
            rec_json = result.get("recommendation") or {}
            issued = tuple(
                f"{m.signer or 'unsigned'}{f' ({m.role})' if getattr(m, 'role', '') else ''} "
                f"{m.signed_at[:10]}".strip()
                for m in memos
                if m.fingerprint == rec.fingerprint or (m.tag == tag and m.year == year))
            rows.append(YearRow(
                year=year,
                action=str(rec_json.get("action") or "?"),
                reason=str(rec_json.get("reason") or ""),
                best_challenger=str(rec_json.get("best_challenger") or "—"),
                defender_value=rec.study.defender.price,
                marr=rec.study.marr,
                basis=str(rec_json.get("basis") or ""),
                fingerprint=rec.fingerprint,
                memos=issued,
                recomputed=recomputed,
                study=study_to_dict(rec.study),
            ))
    return rows


# ---------------------------------------------------------------------- dialog
class StudyYearsDialog(QDialog):
    """Read-only table of an asset's study years with the differences to the year before."""

    def __init__(self, workbook_path: str | Path, asset_tag: str,
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.workbook_path = Path(workbook_path)
        self.asset_tag = asset_tag
        self.rows: list[YearRow] = []
        self.error = ""
        self.setWindowTitle(f"Study years — {asset_tag}")
        self.resize(1100, 560)

        layout = QVBoxLayout(self)
        self.intro = QLabel()
        self.intro.setWordWrap(True)
        layout.addWidget(self.intro)

        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.table.verticalHeader().setVisible(False)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(len(COLUMNS) - 1, QHeaderView.ResizeMode.Stretch)
        self.table.setWordWrap(True)
        header.sectionResized.connect(lambda *_: self.table.resizeRowsToContents())
        layout.addWidget(self.table, 3)

        box = QGroupBox("Differences from the year before")
        box_layout = QVBoxLayout(box)
        self.differences_text = QPlainTextEdit()
        self.differences_text.setReadOnly(True)
        box_layout.addWidget(self.differences_text)
        layout.addWidget(box, 2)

        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)

        self.table.itemSelectionChanged.connect(self._show_differences)
        self.reload()

    def reload(self) -> None:
        """Read the workbook again; a problem becomes a message in the dialog, not a traceback."""
        try:
            self.rows = load_years(self.workbook_path, self.asset_tag)
            self.error = ""
        except (StudyError, KeyError, ValueError, OSError, sqlite3.Error) as exc:
            self.rows = []
            self.error = f"The study years of {self.asset_tag} could not be read: {exc}"
        self._fill()

    def _fill(self) -> None:
        self.table.setRowCount(len(self.rows))
        if self.error:
            self.intro.setText(self.error)
        elif not self.rows:
            self.intro.setText(f"{self.asset_tag} has no stored study yet.")
        else:
            self.intro.setText(
                f"{self.asset_tag}: {len(self.rows)} stored studies in {self.workbook_path.name} "
                "(read only). Decisions are the results saved with each study; "
                "\"recomputed\" marks a year without a saved result.")
        for r, row in enumerate(self.rows):
            decision = row.action.capitalize() + (" (recomputed)" if row.recomputed else "")
            cells = (
                str(row.year),
                decision,
                row.best_challenger,
                "—" if row.defender_value is None else _number(row.defender_value),
                "—" if row.marr is None else f"{row.marr * 100:g}%",
                row.basis or "before-tax",
                row.fingerprint[:12],
                "; ".join(row.memos) if row.memos else "none",
                row.error or row.reason,
            )
            for c, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if c == 6:
                    item.setToolTip(row.fingerprint)
                elif c == len(cells) - 1:
                    item.setToolTip(text)
                if c in (3, 4):
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.table.setItem(r, c, item)
        self.table.resizeRowsToContents()
        if self.rows:
            self.table.selectRow(len(self.rows) - 1)
            self.table.scrollToItem(self.table.item(len(self.rows) - 1, 0))
        else:
            self.differences_text.setPlainText("")

    def showEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().showEvent(event)
        self.table.resizeRowsToContents()

    def selected_index(self) -> int | None:
        rows = self.table.selectionModel().selectedRows()
        return rows[0].row() if rows else None

    def differences_for(self, index: int) -> str:
        """The differences text of row ``index`` against the row before it."""
        row = self.rows[index]
        if index == 0:
            return f"{row.year} is the first stored study of {self.asset_tag}: nothing to compare."
        before = self.rows[index - 1]
        if row.error or before.error:
            return "One of the two studies could not be read, so they cannot be compared."
        lines = differences(before.study, row.study)
        head = f"{row.year} against {before.year}:"
        if before.action != row.action:
            head += f" the decision changed from {before.action} to {row.action}."
        if not lines:
            return head + "\nNo estimate changed."
        return head + "\n" + "\n".join(f"• {line}" for line in lines)

    def _show_differences(self) -> None:
        index = self.selected_index()
        self.differences_text.setPlainText("" if index is None else self.differences_for(index))
