"""Shared workbook pieces of the tests: a one-pump workbook, and checks on a workbook file (its
hash, its SQL dump and SQLite's own integrity check) that read without changing it."""

from __future__ import annotations

import hashlib
import re
import sqlite3
from pathlib import Path

from core.estimates import Study
from core.workbook import Asset, Workbook

SAVE_TIME = re.compile(r"'\d{4}-\d\d-\d\dT[0-9:.]+\+00:00'")


def digest(path: Path) -> str:
    """SHA-256 of the file's bytes (equal digests: the file is untouched)."""
    return hashlib.sha256(path.read_bytes()).hexdigest()


def sql_dump(path: Path, *, mask_times: bool = False) -> list[str]:
    """The workbook as SQL statements (sqlite3 iterdump); ``mask_times`` replaces each ISO save
    time with 'T', so two dumps compare equal whenever only the save times differ."""
    conn = sqlite3.connect(path)
    try:
        lines = list(conn.iterdump())
    finally:
        conn.close()
    return [SAVE_TIME.sub("'T'", line) for line in lines] if mask_times else lines


def integrity(path: Path) -> str:
    """SQLite's PRAGMA integrity_check on a read-only connection ("ok" when sound)."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return conn.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        conn.close()


def pump_workbook(path: Path, study: Study) -> Path:
    """A new workbook at ``path`` holding pump P-7 (Millbrook) with ``study`` as its 2025 study."""
    with Workbook.create(path, company="Harrowgate Fabrication Ltd.") as wb:
        wb.add_asset(Asset("P-7", "Cooling water pump", "Millbrook", "pump"))
        wb.save_study("P-7", 2025, study)
    return path
