"""Autosave and crash recovery: a sibling copy ``<name>.recovery`` written atomically.

The window calls :func:`autosave` every few minutes with its unsaved edits;
after a crash it asks :func:`find_recovery` and offers the copy, which it can
open read-only with ``Workbook.open``, adopt with :func:`restore_recovery` or
throw away with :func:`discard_recovery`.

The copy is made with SQLite's online backup (a consistent snapshot of the
last committed state), the unsaved studies are written into the copy, and
the copy replaces the previous one with ``os.replace``: a crash during
autosave leaves the older recovery copy (or none), never half of one.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import sqlite3
from collections.abc import Mapping
from pathlib import Path

from core.estimates import Study
from core.fsutil import fsync_dir, remove_leftovers
from core.studyfile import fingerprint, study_to_dict
from core.workbook.files import WorkbookError, WriterLock, check_file
from core.workbook.model import Workbook


def recovery_path(path: str | Path) -> Path:
    """``plant.tenure`` -> ``plant.tenure.recovery`` (same folder)."""
    path = Path(path)
    return path.with_name(path.name + ".recovery")


def autosave(workbook: Workbook, path: str | Path | None = None,
             pending: Mapping[tuple[str, int], Study] | None = None) -> Path:
    """Write the recovery copy of ``workbook`` (plus ``pending`` unsaved studies) atomically.

    ``path`` is the workbook's file name the copy belongs to (default
    ``workbook.path``); ``pending`` maps (tag, year) to an edited study not yet
    saved. Returns the recovery file.
    """
    target = recovery_path(workbook.path if path is None else path)
    tmp = target.with_name(target.name + f".tmp{os.getpid()}")
    with contextlib.suppress(FileNotFoundError):
        tmp.unlink()
    try:
        dest = sqlite3.connect(tmp, isolation_level=None)
        try:
            workbook._conn.backup(dest)
            dest.execute("BEGIN IMMEDIATE")
            now = _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")
            for (tag, year), study in (pending or {}).items():
                dest.execute("INSERT OR REPLACE INTO studies VALUES (?, ?, ?, ?, NULL, ?, NULL, ?)",
                             (tag, int(year), study.title,
                              json.dumps(study_to_dict(study), ensure_ascii=False,
                                         sort_keys=True), fingerprint(study), now))
            dest.execute("INSERT OR REPLACE INTO meta VALUES ('recovery_of', ?), "
                         "('recovery_time', ?)", (str(Path(workbook.path).resolve()), now))
            dest.execute("COMMIT")
        finally:
            dest.close()
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        if isinstance(exc, OSError | sqlite3.OperationalError):
            from core.workbook.model import _disk_full

            if _disk_full(target, exc):
                raise WorkbookError(target, "disk full: the recovery copy was not written (the "
                                            "previous one, if any, is kept)") from None
        raise
    fsync_dir(target.parent)
    return target


def find_recovery(path: str | Path) -> Path | None:
    """The recovery copy of the workbook at ``path`` if one exists and is intact, else None."""
    rec = recovery_path(path)
    remove_leftovers(rec.parent, stem=rec.name + ".tmp")  # autosaves cut short by a kill
    if not rec.exists():
        return None
    try:
        check_file(rec)
    except WorkbookError:
        return None
    return rec


def discard_recovery(path: str | Path) -> None:
    """Delete the recovery copy of the workbook at ``path`` (no error when there is none)."""
    with contextlib.suppress(FileNotFoundError):
        recovery_path(path).unlink()


def restore_recovery(path: str | Path) -> Path:
    """Replace the workbook at ``path`` with its recovery copy (atomically); returns ``path``.

    The workbook must not be open for writing anywhere (its lock is taken).
    """
    path = Path(path)
    rec = find_recovery(path)
    if rec is None:
        raise WorkbookError(path, "no intact recovery copy to restore")
    lock = WriterLock(path)
    lock.acquire()
    try:
        conn = sqlite3.connect(rec, isolation_level=None)
        try:
            conn.execute("DELETE FROM meta WHERE key IN ('recovery_of', 'recovery_time')")
        finally:
            conn.close()
        os.replace(rec, path)
        fsync_dir(path.parent)
    finally:
        lock.release()
    return path
