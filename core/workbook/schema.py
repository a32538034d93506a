"""The workbook schema and its forward migrations.

``PRAGMA user_version`` holds the schema version. A new workbook is written at
schema 1 and then carried forward by the same migrations an old file goes
through, so every migration runs on every new workbook, not only in tests.

Schema history:

1. sites, assets, studies (canonical study JSON + result snapshot), candidates
   (Alternative JSON) with the many-to-many ``asset_candidates``, cost history,
   the memo register, and ``meta`` (company name, created).
2. ``fits`` (a trend fit and the data it was fitted to, kept with the study of
   one asset-year), ``assets.notes``, and ``memos.title`` (the study title the
   memo was issued for, filled from the study register for existing rows).
3. ``assets.depreciation_json`` (the asset's tax depreciation, a §5 depreciation
   object whose basis defaults to the original cost), ``assets.retired_on`` and
   ``assets.retired_reason`` (a retired asset keeps everything, read only), and the
   meta keys ``currency`` and ``first_year`` (filled for existing workbooks).
4. ``memos.role`` (the sign-off role of the signature the row records: prepared,
   reviewed, approved; '' for rows written before) and ``memos.certificate_sha256``
   (the signer's certificate fingerprint, hex; '' when unknown), so a later
   signature gets its own row (docs/method.md §8).
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

#: ``PRAGMA application_id`` of a Tenure workbook: the bytes "TENU".
APPLICATION_ID = 0x54454E55

#: The schema version this build writes.
SCHEMA_VERSION = 4

SCHEMA_V1 = """
CREATE TABLE meta (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE sites (
    name     TEXT PRIMARY KEY,
    location TEXT NOT NULL DEFAULT ''
);
CREATE TABLE assets (
    tag           TEXT PRIMARY KEY,
    description   TEXT NOT NULL DEFAULT '',
    site          TEXT NOT NULL REFERENCES sites(name) ON UPDATE CASCADE,
    asset_class   TEXT NOT NULL DEFAULT '',
    in_service    TEXT,             -- ISO date
    original_cost REAL              -- original cost for tax (sunk in a before-tax study)
);
CREATE TABLE studies (
    tag         TEXT    NOT NULL REFERENCES assets(tag) ON DELETE CASCADE,
    year        INTEGER NOT NULL,
    title       TEXT    NOT NULL,
    study_json  TEXT    NOT NULL,   -- docs/method.md §5 study object
    result_json TEXT,               -- core.jsonout.study_json snapshot, or NULL
    fingerprint TEXT    NOT NULL,   -- core.studyfile.fingerprint
    action      TEXT,               -- 'keep' | 'replace' from the snapshot
    saved_at    TEXT    NOT NULL,
    PRIMARY KEY (tag, year)
);
CREATE TABLE candidates (
    id               INTEGER PRIMARY KEY,
    name             TEXT NOT NULL UNIQUE,
    asset_class      TEXT NOT NULL DEFAULT '',
    alternative_json TEXT NOT NULL  -- section 5 challenger object
);
CREATE TABLE asset_candidates (
    tag          TEXT    NOT NULL REFERENCES assets(tag) ON DELETE CASCADE,
    candidate_id INTEGER NOT NULL REFERENCES candidates(id) ON DELETE CASCADE,
    PRIMARY KEY (tag, candidate_id)
);
CREATE TABLE history (
    id         INTEGER PRIMARY KEY,
    tag        TEXT    NOT NULL REFERENCES assets(tag) ON DELETE CASCADE,
    age        INTEGER NOT NULL,    -- year of age j = 1, 2, ... (year j ends j years in service)
    amount     REAL    NOT NULL,
    kind       TEXT    NOT NULL,    -- 'operating' | 'maintenance' | 'resale'
    date       TEXT,                -- ISO date of the work order, if given
    source     TEXT    NOT NULL DEFAULT '',
    source_row INTEGER
);
CREATE INDEX history_tag ON history(tag, kind, age);
CREATE TABLE memos (
    id          INTEGER PRIMARY KEY,
    tag         TEXT,
    year        INTEGER,
    fingerprint TEXT NOT NULL,
    signer      TEXT NOT NULL DEFAULT '',
    signed_at   TEXT NOT NULL,
    file_name   TEXT NOT NULL
);
"""


def create_v1(conn: sqlite3.Connection) -> None:
    """Write schema 1 into an empty database (inside the caller's transaction)."""
    for statement in SCHEMA_V1.split(";"):
        if statement.strip():
            conn.execute(statement)
    conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    conn.execute("PRAGMA user_version = 1")


def _v1_to_v2(conn: sqlite3.Connection) -> None:
    conn.execute("""
        CREATE TABLE fits (
            tag      TEXT    NOT NULL REFERENCES assets(tag) ON DELETE CASCADE,
            year     INTEGER NOT NULL,
            quantity TEXT    NOT NULL,   -- 'operating_costs' | 'market_values'
            model    TEXT    NOT NULL,   -- 'arithmetic' | 'geometric' | 'decline'
            fit_json TEXT    NOT NULL,   -- parameters, R^2, residuals and the data fitted
            saved_at TEXT    NOT NULL,
            PRIMARY KEY (tag, year, quantity)
        )""")
    conn.execute("ALTER TABLE assets ADD COLUMN notes TEXT NOT NULL DEFAULT ''")
    conn.execute("ALTER TABLE memos ADD COLUMN title TEXT NOT NULL DEFAULT ''")
    conn.execute("""
        UPDATE memos SET title = COALESCE(
            (SELECT s.title FROM studies s WHERE s.fingerprint = memos.fingerprint LIMIT 1), '')""")


def _v2_to_v3(conn: sqlite3.Connection) -> None:
    conn.execute("ALTER TABLE assets ADD COLUMN depreciation_json TEXT")
    conn.execute("ALTER TABLE assets ADD COLUMN retired_on TEXT")
    conn.execute("ALTER TABLE assets ADD COLUMN retired_reason TEXT NOT NULL DEFAULT ''")
    conn.execute("INSERT OR IGNORE INTO meta VALUES ('currency', '')")
    conn.execute("INSERT OR IGNORE INTO meta SELECT 'first_year', CAST(COALESCE("
                 "(SELECT MIN(year) FROM studies), "
                 "(SELECT CAST(value AS INTEGER) FROM meta WHERE key = 'current_year'), "
                 "CAST(strftime('%Y', 'now') AS INTEGER)) AS TEXT)")


def _v3_to_v4(conn: sqlite3.Connection) -> None:
    conn.execute("ALTER TABLE memos ADD COLUMN role TEXT NOT NULL DEFAULT ''")
    conn.execute("ALTER TABLE memos ADD COLUMN certificate_sha256 TEXT NOT NULL DEFAULT ''")


#: MIGRATIONS[v] carries a workbook from schema v to v + 1.
MIGRATIONS: dict[int, Callable[[sqlite3.Connection], None]] = {1: _v1_to_v2, 2: _v2_to_v3,
                                                               3: _v3_to_v4}


def migrate(conn: sqlite3.Connection, start: int) -> int:
    """Apply every migration from ``start`` up to :data:`SCHEMA_VERSION` (caller's transaction).

    Returns the new version. Each step sets ``user_version`` so a reader can
    tell where it stopped, but the caller commits once for all of them.
    """
    version = start
    while version < SCHEMA_VERSION:
        MIGRATIONS[version](conn)
        version += 1
        conn.execute(f"PRAGMA user_version = {version}")
    return version
