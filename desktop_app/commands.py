"""Undo commands: every edit of the document is one QUndoCommand.

Studies are frozen dataclasses, so one command kind covers every estimate
edit: it holds the study before and after.  Consecutive edits of the same
field or table cell (same ``merge_key``) merge into one undo step.
"""

from __future__ import annotations

from PySide6.QtGui import QUndoCommand

from core.estimates import Study
from desktop_app.document import AssetEntry, Document

MERGE_ID = 4711


class SetStudyCommand(QUndoCommand):
    def __init__(self, doc: Document, key: str, old: Study | None, new: Study | None,
                 text: str, merge_key: object | None = None) -> None:
        super().__init__(text)
        self.doc, self.key, self.old, self.new = doc, key, old, new
        self.merge_key = merge_key

    def redo(self) -> None:
        self.doc.set_study(self.key, self.new)

    def undo(self) -> None:
        self.doc.set_study(self.key, self.old)

    def id(self) -> int:  # noqa: A003 - Qt's name
        return MERGE_ID if self.merge_key is not None else -1

    def mergeWith(self, other: QUndoCommand) -> bool:  # noqa: N802 - Qt's name
        if not isinstance(other, SetStudyCommand):
            return False
        if other.key != self.key or other.merge_key != self.merge_key:
            return False
        self.new = other.new
        return True


class SetYearCommand(QUndoCommand):
    def __init__(self, doc: Document, key: str, old: int | None, new: int | None) -> None:
        super().__init__("Change study year")
        self.doc, self.key, self.old, self.new = doc, key, old, new

    def redo(self) -> None:
        self.doc.set_year(self.key, self.new)

    def undo(self) -> None:
        self.doc.set_year(self.key, self.old)


class AddAssetCommand(QUndoCommand):
    def __init__(self, doc: Document, entry: AssetEntry) -> None:
        super().__init__(f"Add asset {entry.name}")
        self.doc, self.entry = doc, entry

    def redo(self) -> None:
        self.doc.add_entry(self.entry)

    def undo(self) -> None:
        self.doc.remove_entry(self.entry.key)


class RemoveAssetCommand(QUndoCommand):
    def __init__(self, doc: Document, key: str) -> None:
        entry = doc.entry(key)
        super().__init__(f"Remove asset {entry.name}")
        self.doc, self.key, self.entry = doc, key, entry
        self.index = doc.entries.index(entry)

    def redo(self) -> None:
        self.index, self.entry = self.doc.remove_entry(self.key)

    def undo(self) -> None:
        self.doc.add_entry(self.entry, self.index)
