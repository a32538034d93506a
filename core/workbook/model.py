"""The plain-Python workbook model (no Qt): :class:`Workbook` and its records."""

from __future__ import annotations

import contextlib
import dataclasses
import datetime as _dt
import json
import os
import sqlite3
import weakref
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from core.errors import StudyError
from core.estimates import Alternative, Depreciation, Study
from core.studyfile import (
    alternative_to_dict,
    fingerprint,
    loads_json,
    parse_study,
    study_to_dict,
)
from core.text import SITE_SEPARATOR
from core.workbook.files import (
    WorkbookError,
    WorkbookInUse,
    WorkbookReadOnly,
    WriterLock,
    _uri,
    check_file,
    write_problem,
)
from core.workbook.schema import MIGRATIONS, SCHEMA_VERSION, create_v1, migrate

HISTORY_KINDS = ("operating", "maintenance", "resale")

#: Writable workbooks open in this process, by resolved path (for :func:`record_memo`).
_OPEN_WRITERS: weakref.WeakValueDictionary[str, Workbook] = weakref.WeakValueDictionary()


def _now() -> str:
    return _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")


def _dumps(obj: Any) -> str:
    return json.dumps(obj, ensure_ascii=False, allow_nan=False, sort_keys=True)


@dataclass(frozen=True)
class Site:
    """A plant or yard of the company."""

    name: str
    location: str = ""


@dataclass(frozen=True)
class Asset:
    """One machine in the register. ``original_cost`` is for tax only (sunk before tax).

    ``depreciation`` is the asset's tax depreciation (method and period; its
    basis defaults to ``original_cost``). A retired asset (``retired_on`` set)
    keeps its studies, history and memos, read only.
    """

    tag: str
    description: str
    site: str
    asset_class: str = ""
    in_service: _dt.date | None = None
    original_cost: float | None = None
    notes: str = ""
    depreciation: Depreciation | None = None
    retired_on: _dt.date | None = None
    retired_reason: str = ""

    @property
    def retired(self) -> bool:
        return self.retired_on is not None

    def age_in(self, year: int) -> int | None:
        """Whole years in service at the end of calendar ``year`` (None without a date).

        >>> Asset("P-1", "pump", "Millbrook", in_service=_dt.date(2019, 7, 1)).age_in(2024)
        5
        """
        return None if self.in_service is None else year - self.in_service.year


@dataclass(frozen=True)
class StudyRecord:
    """The stored study of one asset-year with its result snapshot."""

    tag: str
    year: int
    study: Study
    result_json: dict | None
    fingerprint: str
    action: str | None
    saved_at: str


@dataclass(frozen=True)
class Candidate:
    """A challenger model that may serve several assets of a class."""

    id: int
    name: str
    asset_class: str
    alternative: Alternative
    tags: tuple[str, ...] = ()


@dataclass(frozen=True)
class HistoryRow:
    """One imported cost-history amount: year of age ``age`` (1 = first year in service)."""

    tag: str
    age: int
    amount: float
    kind: str = "operating"
    date: str | None = None
    source: str = ""
    source_row: int | None = None


@dataclass(frozen=True)
class MemoRecord:
    """One issued decision memo in the register."""

    id: int
    tag: str | None
    year: int | None
    fingerprint: str
    signer: str
    signed_at: str
    file_name: str
    title: str = ""
    role: str = ""  # sign-off role of this row's signature (schema 3; '' before)
    certificate_sha256: str = ""  # the signer's certificate fingerprint, hex (schema 3)


def _name(text: str, what: str) -> str:
    name = str(text).strip()
    if not name:
        raise StudyError(what, "must not be empty")
    if len(name) > 120 or any(not ch.isprintable() for ch in name):
        raise StudyError(what, f"'{name[:40]}' must be printable text of at most 120 "
                               "characters")
    return name


def _check_asset(asset: Asset) -> None:
    """Refuse a register entry a study could not use (where = the field)."""
    _name(asset.tag, "tag")
    if asset.tag != asset.tag.strip() or any(ch.isspace() for ch in asset.tag):
        raise StudyError("tag", f"'{asset.tag}' must not contain spaces")
    _name(asset.site, "site")
    if asset.original_cost is not None:
        cost = asset.original_cost
        if isinstance(cost, bool) or not isinstance(cost, (int, float)) or cost != cost \
                or cost in (float("inf"), float("-inf")) or cost < 0:
            raise StudyError("original cost", f"must be a number >= 0, not {cost!r}")
    if asset.in_service is not None and asset.in_service > _dt.date.today() + _dt.timedelta(
            days=366 * 5):
        raise StudyError("in-service date", f"{asset.in_service} is too far in the future")


@dataclass
class _State:
    depth: int = 0


def _disk_full(path: Path, exc: BaseException) -> bool:
    """True when a failed write is a full disk (or this process's file-size limit).

    SQLite says SQLITE_FULL for ENOSPC, but a plain write error (SQLITE_IOERR_WRITE) for
    EFBIG and some filesystems, so the free space and the size limit are looked at too.
    """
    from core.fsutil import is_disk_full

    name = getattr(exc, "sqlite_errorname", "") or ""
    if name == "SQLITE_FULL" or is_disk_full(exc):
        return True
    if not name.startswith("SQLITE_IOERR"):
        return False
    import shutil

    try:
        if shutil.disk_usage(path.parent).free < 4 * 1024 * 1024:
            return True
    except OSError:
        pass
    try:
        import resource

        soft = resource.getrlimit(resource.RLIMIT_FSIZE)[0]
        return soft != resource.RLIM_INFINITY
    except (ImportError, OSError, ValueError):
        return False


def _write_failed(path: Path, exc: sqlite3.Error) -> WorkbookError:
    """The refusal for a save that SQLite could not complete (the transaction is rolled back)."""
    if _disk_full(path, exc):
        return WorkbookError(path, "disk full: the save did not happen; the workbook is as it "
                                   "was before it and your changes are still open (free some "
                                   "space, or save them elsewhere)")
    refused = _write_refused(path, exc)
    if isinstance(refused, WorkbookInUse) and "locked" not in str(exc):
        return WorkbookError(path, f"the save did not happen ({exc}); the workbook is as it "
                                   "was before it")
    return refused


def _write_refused(path: Path, exc: sqlite3.Error) -> WorkbookError:
    text = str(exc)
    if "readonly" in text or "read-only" in text:
        return WorkbookError(path, "cannot be written (read-only file or folder); open it "
                                   "read-only or copy it somewhere writable")
    return WorkbookInUse(path, f"in use: the database is locked by another program ({text})")


def _parse_alternative(obj: dict, where: str) -> Alternative:
    """Parse a §5 challenger object through the public study parser."""
    holder = {"title": "candidate", "marr": 0.1,
              "defender": {"name": " defender", "market_value": 1, "max_life": 1,
                           "market_values": {"decline_rate": 0}, "operating_costs": {"first": 0}},
              "challengers": [obj]}
    tech = obj.get("technology") if isinstance(obj, dict) else None
    if isinstance(tech, dict):  # a candidate's own block may leave the horizon to its study
        holder["technology"] = {"horizon": tech.get("horizon", 1)}
    try:
        return parse_study(holder, where).challengers[0]
    except StudyError as exc:
        raise WorkbookError(where, exc.message) from None


_DEPRECIATION_HOLDER = {"name": " challenger", "first_cost": 1, "max_life": 1,
                        "market_values": {"decline_rate": 0}, "operating_costs": {"first": 0}}


def depreciation_to_dict(dep: Depreciation) -> dict[str, Any]:
    """The §5 depreciation object of ``dep`` (as a study file writes it)."""
    alt = Alternative(" challenger", "challenger", 1.0, 1, depreciation=dep)
    return alternative_to_dict(alt)["depreciation"]


def parse_depreciation(obj: Any, where: str = "depreciation") -> Depreciation:
    """A §5 depreciation object (no age: the asset's tax age follows the study year).

    >>> parse_depreciation({"method": "macrs", "class": 7}).macrs_class
    7
    """
    holder = {"title": "asset", "marr": 0.1,
              "defender": {"name": " defender", "market_value": 1, "max_life": 1,
                           "market_values": {"decline_rate": 0}, "operating_costs": {"first": 0}},
              "challengers": [{**_DEPRECIATION_HOLDER, "depreciation": obj}]}
    try:
        dep = parse_study(holder, "$").challengers[0].depreciation
    except StudyError as exc:
        raise StudyError(where + exc.path.removeprefix("$.challengers[0].depreciation"),
                         exc.message) from None
    assert dep is not None
    return dep


class Workbook:
    """An open ``.tenure`` workbook. Use :meth:`open` or :meth:`create`, ideally in ``with``.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "w.tenure"
    >>> with Workbook.create(p, company="Harrowgate Fabrication Ltd.") as wb:
    ...     wb.add_site(Site("Millbrook"))
    ...     wb.add_asset(Asset("P-7", "Cooling water pump", "Millbrook", "pump"))
    >>> with Workbook.open(p) as wb:
    ...     [a.tag for a in wb.assets(site="Millbrook")], wb.schema_version
    (['P-7'], 4)
    """

    def __init__(self, path: Path, conn: sqlite3.Connection, write: bool,
                 lock: WriterLock | None, version: int) -> None:
        self.path = path
        self._conn = conn
        self.writable = write
        self._lock = lock
        self.schema_version = version
        self._state = _State()
        if write:
            _OPEN_WRITERS[str(path.resolve())] = self

    # ------------------------------------------------------------------ opening
    @staticmethod
    def _connect(path: Path, write: bool) -> sqlite3.Connection:
        conn = sqlite3.connect(_uri(path, "rw" if write else "ro"), uri=True, timeout=5.0,
                               isolation_level=None, check_same_thread=False)
        conn.execute("PRAGMA foreign_keys = ON")
        if write:
            # Durability (docs/method.md §7, §15): a rollback journal (DELETE mode) with
            # synchronous = FULL makes SQLite fsync the journal before it touches the
            # workbook and the workbook before it deletes the journal, so a committed save
            # survives a power cut and an interrupted one is rolled back on the next open.
            # NORMAL would save a few fsyncs per save at the risk of losing the last saves
            # after a power cut; saves are rare and small here, so FULL costs nothing felt.
            conn.execute("PRAGMA journal_mode = DELETE")
            conn.execute("PRAGMA synchronous = FULL")
        return conn

    @classmethod
    def open(cls, path: str | Path, write: bool = False, break_lock: bool = False) -> Workbook:
        """Open an existing workbook, checked first; ``write=True`` takes the writer's lock.

        An older schema is migrated forward (one transaction) when opened for
        writing; read-only opening never changes the file. ``break_lock=True``
        removes a lock the user has confirmed is left over (for example from
        another computer that crashed); SQLite's own locking still guards
        each transaction.
        """
        path = Path(path)
        version = check_file(path)
        if not write:
            return cls(path, cls._connect(path, False), False, None, version)
        why = write_problem(path)
        if why is not None:
            raise WorkbookReadOnly(path, f"read-only: {why}; open it read-only, or save your "
                                         "changes elsewhere")
        lock = WriterLock(path)
        lock.acquire(force=break_lock)
        from core.fsutil import remove_leftovers

        remove_leftovers(path.parent, stem=path.name + ".recovery.tmp")
        try:
            conn = cls._connect(path, True)
            try:
                conn.execute("BEGIN IMMEDIATE")
            except sqlite3.OperationalError as exc:
                conn.close()
                raise _write_refused(path, exc) from None
            try:
                version = int(conn.execute("PRAGMA user_version").fetchone()[0])
                if version < SCHEMA_VERSION:
                    version = migrate(conn, version)
                conn.execute("COMMIT")
            except BaseException:
                conn.execute("ROLLBACK")
                conn.close()
                raise
        except BaseException:
            lock.release()
            raise
        return cls(path, conn, True, lock, version)

    @classmethod
    def create(cls, path: str | Path, company: str = "", *, currency: str = "",
               first_year: int | None = None, schema: int | None = None) -> Workbook:
        """Create a new workbook at ``path`` (refused if the file exists), open for writing.

        ``currency`` is a code or symbol shown with money ("EUR", "£"); ``first_year``
        is the first study year (default: this calendar year). ``schema`` (tests
        only) stops the migrations at that version.
        """
        year = _dt.date.today().year if first_year is None else first_year
        if isinstance(year, bool) or not isinstance(year, int) or not 1900 <= year <= 2200:
            raise StudyError("first study year", f"must be a year from 1900 to 2200, not {year!r}")
        if len(currency) > 8 or any(ch.isspace() or not ch.isprintable() for ch in currency):
            raise StudyError("currency", f"must be a short code or symbol such as EUR or £, "
                                         f"not {currency!r}")
        path = Path(path)
        if path.exists():
            raise WorkbookError(path, "already exists; not overwritten")
        lock = WriterLock(path)
        lock.acquire()
        try:
            conn = sqlite3.connect(path, isolation_level=None)
            try:
                conn.execute("PRAGMA journal_mode = DELETE")
                conn.execute("BEGIN IMMEDIATE")
                create_v1(conn)
                conn.execute("INSERT INTO meta VALUES ('company', ?), ('created', ?), "
                             "('application', 'Tenure')", (company, _now()))
                target = SCHEMA_VERSION if schema is None else schema
                version = migrate(conn, 1) if target == SCHEMA_VERSION else _migrate_to(
                    conn, target)
                if version >= 3:
                    conn.execute("INSERT OR REPLACE INTO meta VALUES ('currency', ?), "
                                 "('first_year', ?), ('current_year', ?)",
                                 (currency, str(year), str(year)))
                conn.execute("COMMIT")
            finally:
                conn.close()
        except BaseException:
            lock.release()
            with contextlib.suppress(OSError):
                path.unlink()
            raise
        lock.release()
        return cls.open(path, write=True) if version == SCHEMA_VERSION else cls(
            path, cls._connect(path, True), True, None, version)

    def close(self) -> None:
        """Close the database and release the writer's lock (idempotent)."""
        if self._conn is not None:
            self._conn.close()
            self._conn = None  # type: ignore[assignment]
        if self._lock is not None:
            self._lock.release()
            self._lock = None
        _OPEN_WRITERS.pop(str(self.path.resolve()), None)

    def __enter__(self) -> Workbook:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __del__(self) -> None:  # pragma: no cover - best effort
        with contextlib.suppress(Exception):
            self.close()

    # ------------------------------------------------------------------ transactions
    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        """One all-or-nothing write (``BEGIN IMMEDIATE`` ... ``COMMIT``); nests.

        A crash or exception inside leaves the previous committed state.
        """
        if not self.writable:
            raise WorkbookError(self.path, "opened read-only")
        if self._conn is None:
            raise WorkbookError(self.path, "workbook is closed")
        if self._state.depth:
            self._state.depth += 1
            try:
                yield self._conn
            finally:
                self._state.depth -= 1
            return
        try:
            self._conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise _write_refused(self.path, exc) from None
        self._state.depth = 1
        try:
            yield self._conn
        except BaseException as exc:
            self._state.depth = 0
            self._rollback()
            if isinstance(exc, sqlite3.OperationalError):
                raise _write_failed(self.path, exc) from None
            raise
        self._state.depth = 0
        try:
            self._conn.execute("COMMIT")
        except sqlite3.OperationalError as exc:
            self._rollback()
            raise _write_failed(self.path, exc) from None

    def _rollback(self) -> None:
        """Undo the open transaction, if SQLite has not already (it does on a full disk)."""
        if self._conn is not None and self._conn.in_transaction:
            with contextlib.suppress(sqlite3.Error):
                self._conn.execute("ROLLBACK")

    def _q(self, sql: str, params: Sequence[Any] = ()) -> list[sqlite3.Row]:
        if self._conn is None:
            raise WorkbookError(self.path, "workbook is closed")
        try:
            cur = self._conn.execute(sql, params)
            return cur.fetchall()
        except sqlite3.OperationalError as exc:
            if "decode" not in str(exc).lower():
                raise
            raise self._damaged_text() from None

    def _damaged_text(self) -> WorkbookError:
        """The refusal for text that is not UTF-8 (a flipped bit): names the table and row.

        Only reads (with text read as bytes); the file is not changed.
        """
        conn = self._conn
        saved = conn.text_factory
        conn.text_factory = bytes
        try:
            tables = [r[0] for r in conn.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
            for table in tables:
                name = table.decode("utf-8", "replace") if isinstance(table, bytes) else table
                cols = [r[1].decode("utf-8", "replace") if isinstance(r[1], bytes) else r[1]
                        for r in conn.execute(f'PRAGMA table_info("{name}")')]
                for n, row in enumerate(conn.execute(f'SELECT * FROM "{name}"'), start=1):
                    for col, value in zip(cols, row, strict=False):
                        if isinstance(value, bytes):
                            try:
                                value.decode("utf-8")
                            except UnicodeDecodeError as err:
                                key = row[0].decode("utf-8", "replace") if isinstance(
                                    row[0], bytes) else row[0]
                                return WorkbookError(
                                    self.path, f"damaged: table {name}, row {n} ({cols[0]} "
                                    f"{key!s}), column {col} is not valid UTF-8 text (byte "
                                    f"{err.start + 1}); the file was not changed")
        finally:
            conn.text_factory = saved
        return WorkbookError(self.path, "damaged: some text is not valid UTF-8; the file was "
                                        "not changed")

    # ------------------------------------------------------------------ meta
    @property
    def company(self) -> str:
        rows = self._q("SELECT value FROM meta WHERE key = 'company'")
        return rows[0][0] if rows else ""

    @property
    def currency(self) -> str:
        return self.meta().get("currency", "")

    @property
    def study_year(self) -> int:
        """The current study year: meta ``current_year``, else the latest stored year,
        else ``first_year``, else this calendar year."""
        meta = self.meta()
        with contextlib.suppress(KeyError, ValueError):
            return int(meta["current_year"])
        latest = self._q("SELECT MAX(year) FROM studies")[0][0]
        if latest is not None:
            return int(latest)
        with contextlib.suppress(KeyError, ValueError):
            return int(meta["first_year"])
        return _dt.date.today().year

    def meta(self) -> dict[str, str]:
        return {str(k): str(v) for k, v in self._q("SELECT key, value FROM meta")}

    def set_meta(self, key: str, value: str) -> None:
        with self.transaction() as c:
            c.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, value))

    def integrity_check(self) -> str:
        """``PRAGMA integrity_check`` ("ok" when sound)."""
        return "; ".join(r[0] for r in self._q("PRAGMA integrity_check"))

    # ------------------------------------------------------------------ sites and assets
    def sites(self) -> list[Site]:
        return [Site(*r) for r in self._q("SELECT name, location FROM sites ORDER BY name")]

    def add_site(self, site: Site) -> None:
        """Add a site, or set the location of an existing one."""
        name = _name(site.name, "site")
        with self.transaction() as c:
            c.execute("INSERT INTO sites VALUES (?, ?) ON CONFLICT(name) DO UPDATE SET "
                      "location = excluded.location", (name, site.location))

    def rename_site(self, old: str, new: str) -> None:
        """Rename a site; its assets follow (one transaction). Stored study titles stay as saved."""
        new = _name(new, "site")
        if old not in {s.name for s in self.sites()}:
            raise WorkbookError(self.path, f"no site '{old}'")
        if new == old:
            return
        if new in {s.name for s in self.sites()}:
            raise WorkbookError(self.path, f"a site '{new}' already exists")
        with self.transaction() as c:
            c.execute("UPDATE sites SET name = ? WHERE name = ?", (new, old))

    def remove_site(self, name: str) -> None:
        """Remove an empty site; a site that still holds assets (retired ones too) is refused."""
        if name not in {s.name for s in self.sites()}:
            raise WorkbookError(self.path, f"no site '{name}'")
        held = self.assets(site=name)
        if held:
            tags = ", ".join(a.tag + (" (retired)" if a.retired else "") for a in held[:8])
            more = f" and {len(held) - 8} more" if len(held) > 8 else ""
            raise WorkbookError(self.path, f"site '{name}' still holds {len(held)} asset"
                                           f"{'s' if len(held) != 1 else ''}: {tags}{more}; "
                                           "move them to another site first")
        with self.transaction() as c:
            c.execute("DELETE FROM sites WHERE name = ?", (name,))

    def _asset(self, row: Sequence[Any]) -> Asset:
        date = _dt.date.fromisoformat(row[4]) if row[4] else None
        notes = row[6] if len(row) > 6 else ""
        dep = retired_on = None
        reason = ""
        if len(row) > 7:
            if row[7]:
                where = f"{self.path}: asset {row[0]} depreciation"
                dep = parse_depreciation(loads_json(row[7], where), where)
            retired_on = _dt.date.fromisoformat(row[8]) if row[8] else None
            reason = row[9]
        return Asset(row[0], row[1], row[2], row[3], date, row[5], notes, dep, retired_on, reason)

    def _asset_cols(self) -> str:
        base = "tag, description, site, asset_class, in_service, original_cost"
        if self.schema_version >= 2:
            base += ", notes"
        if self.schema_version >= 3:
            base += ", depreciation_json, retired_on, retired_reason"
        return base

    def assets(self, site: str | None = None, include_retired: bool = True) -> list[Asset]:
        """Every asset, by site then tag; only one site's with ``site``."""
        sql = f"SELECT {self._asset_cols()} FROM assets"
        rows = (self._q(sql + " WHERE site = ? ORDER BY tag", (site,)) if site is not None
                else self._q(sql + " ORDER BY site, tag"))
        out = [self._asset(r) for r in rows]
        return out if include_retired else [a for a in out if not a.retired]

    def asset(self, tag: str) -> Asset:
        rows = self._q(f"SELECT {self._asset_cols()} FROM assets WHERE tag = ?", (tag,))
        if not rows:
            raise KeyError(tag)
        return self._asset(rows[0])

    def _known(self, tag: str) -> Asset:
        try:
            return self.asset(tag)
        except KeyError:
            raise WorkbookError(self.path, f"no asset '{tag}'") from None

    def _active(self, tag: str) -> Asset:
        """The asset ``tag``, refused when it is retired (its records are read only)."""
        asset = self._known(tag)
        if asset.retired:
            raise WorkbookError(self.path, f"asset {tag} was retired on "
                                           f"{asset.retired_on}; its records are read only")
        return asset

    def _write_asset(self, c: sqlite3.Connection, asset: Asset, insert: bool) -> None:
        _check_asset(asset)
        c.execute("INSERT OR IGNORE INTO sites (name) VALUES (?)", (asset.site,))
        cols = ["tag", "description", "site", "asset_class", "in_service", "original_cost"]
        values: list[Any] = [asset.tag, asset.description, asset.site, asset.asset_class,
                             asset.in_service.isoformat() if asset.in_service else None,
                             asset.original_cost]
        if self.schema_version >= 2:
            cols.append("notes")
            values.append(asset.notes)
        if self.schema_version >= 3:
            cols += ["depreciation_json", "retired_on", "retired_reason"]
            values += [None if asset.depreciation is None
                       else _dumps(depreciation_to_dict(asset.depreciation)),
                       asset.retired_on.isoformat() if asset.retired_on else None,
                       asset.retired_reason]
        elif asset.depreciation is not None or asset.retired_on is not None:
            raise WorkbookError(self.path, "depreciation and retirement need schema 3; open "
                                           "the workbook for writing")
        if insert:
            c.execute(f"INSERT INTO assets ({', '.join(cols)}) VALUES "
                      f"({', '.join('?' * len(cols))})", values)
        else:
            sets = ", ".join(f"{col} = ?" for col in cols[1:])
            c.execute(f"UPDATE assets SET {sets} WHERE tag = ?", [*values[1:], asset.tag])

    def add_asset(self, asset: Asset) -> None:
        """Add or update an asset (its site is added when new)."""
        with self.transaction() as c:
            exists = c.execute("SELECT 1 FROM assets WHERE tag = ?", (asset.tag,)).fetchone()
            self._write_asset(c, asset, insert=exists is None)

    def new_asset(self, asset: Asset) -> None:
        """Add an asset whose tag is new (an existing tag is refused, never merged)."""
        with self.transaction() as c:
            if c.execute("SELECT 1 FROM assets WHERE tag = ?", (asset.tag,)).fetchone():
                raise WorkbookError(self.path, f"asset tag '{asset.tag}' already exists "
                                               f"(at {self.asset(asset.tag).site})")
            self._write_asset(c, asset, insert=True)

    def edit_asset(self, tag: str, asset: Asset) -> None:
        """Replace the register entry of ``tag`` by ``asset`` (one transaction).

        A new tag carries the asset's studies, history, fits, candidate links and
        memos with it. A retired asset is read only.
        """
        old = self._active(tag)
        if asset.retired_on != old.retired_on:
            raise WorkbookError(self.path, "retire an asset with retire_asset, not edit_asset")
        with self.transaction() as c:
            if asset.tag == tag:
                self._write_asset(c, asset, insert=False)
                return
            if c.execute("SELECT 1 FROM assets WHERE tag = ?", (asset.tag,)).fetchone():
                raise WorkbookError(self.path, f"asset tag '{asset.tag}' already exists")
            self._write_asset(c, asset, insert=True)
            tables = ["studies", "history", "asset_candidates", "memos"]
            if self.schema_version >= 2:
                tables.append("fits")
            for table in tables:
                c.execute(f"UPDATE {table} SET tag = ? WHERE tag = ?", (asset.tag, tag))
            c.execute("DELETE FROM assets WHERE tag = ?", (tag,))

    def move_asset(self, tag: str, site: str) -> None:
        """Move an asset to another site (added when new)."""
        asset = self._active(tag)
        self.edit_asset(tag, dataclasses.replace(asset, site=_name(site, "site")))

    def retire_asset(self, tag: str, on: _dt.date, reason: str) -> None:
        """Retire ``tag`` on ``on`` for ``reason``: it keeps everything, read only."""
        asset = self._active(tag)
        if self.schema_version < 3:
            raise WorkbookError(self.path, "retiring needs schema 3; open the workbook for "
                                           "writing")
        if not reason.strip():
            raise StudyError("reason", "say why the asset is retired")
        if asset.in_service is not None and on < asset.in_service:
            raise StudyError("retired on", f"{on} is before {tag} entered service "
                                           f"({asset.in_service})")
        with self.transaction() as c:
            c.execute("UPDATE assets SET retired_on = ?, retired_reason = ? WHERE tag = ?",
                      (on.isoformat(), reason.strip(), tag))

    def reinstate_asset(self, tag: str) -> None:
        """Undo a retirement (the window's Undo; nothing else changes)."""
        self._known(tag)
        with self.transaction() as c:
            c.execute("UPDATE assets SET retired_on = NULL, retired_reason = '' WHERE tag = ?",
                      (tag,))

    def remove_asset(self, tag: str) -> None:
        """Remove an asset that holds nothing yet (a mistaken entry).

        An asset with studies, history or memos is refused: retire it instead,
        so nothing is deleted silently.
        """
        self._known(tag)
        held = []
        for table, what in (("studies", "studies"), ("history", "cost-history rows"),
                            ("memos", "memos")):
            n = self._q(f"SELECT count(*) FROM {table} WHERE tag = ?", (tag,))[0][0]
            if n:
                held.append(f"{n} {what}")
        if held:
            raise WorkbookError(self.path, f"asset {tag} holds {', '.join(held)}; retire it "
                                           "instead (its records stay, read only)")
        with self.transaction() as c:
            c.execute("DELETE FROM asset_candidates WHERE tag = ?", (tag,))
            c.execute("DELETE FROM assets WHERE tag = ?", (tag,))

    # ------------------------------------------------------------------ studies
    def years(self, tag: str) -> list[int]:
        """Every year with a study of ``tag``, ascending."""
        return [r[0] for r in self._q("SELECT year FROM studies WHERE tag = ? ORDER BY year",
                                      (tag,))]

    def current_year(self, tag: str) -> int | None:
        years = self.years(tag)
        return years[-1] if years else None

    def record(self, tag: str, year: int | None = None) -> StudyRecord:
        """The stored study of ``tag`` in ``year`` (default: its latest year)."""
        if year is None:
            year = self.current_year(tag)
            if year is None:
                raise KeyError(tag)
        rows = self._q("SELECT study_json, result_json, fingerprint, action, saved_at "
                       "FROM studies WHERE tag = ? AND year = ?", (tag, year))
        if not rows:
            raise KeyError((tag, year))
        study_json, result_json, fp, action, saved_at = rows[0]
        where = f"{self.path}: {tag} {year}"
        try:
            study = parse_study(loads_json(study_json, where), where)
            result = loads_json(result_json, where) if result_json else None
        except (ValueError, StudyError) as exc:
            raise WorkbookError(self.path, f"the stored study of {tag} {year} is damaged "
                                           f"({exc})") from None
        if fingerprint(study) != fp:
            raise WorkbookError(self.path, f"the stored study of {tag} {year} is damaged "
                                           "(its fingerprint does not match its estimates)")
        return StudyRecord(tag, year, study, result, fp, action, saved_at)

    def study(self, tag: str, year: int | None = None) -> Study:
        """The study of ``tag`` in ``year`` (default: its latest year)."""
        return self.record(tag, year).study

    def result_json(self, tag: str, year: int | None = None) -> dict | None:
        return self.record(tag, year).result_json

    def save_study(self, tag: str, year: int, study: Study,
                   result_json: Mapping[str, Any] | None = None) -> str:
        """Store the study of ``tag`` for ``year`` (replacing that year's); returns its fingerprint.

        ``result_json`` is ``core.jsonout.study_json(result)`` of this very study, kept
        as a readable snapshot; a snapshot of another study is refused.
        """
        self._active(tag)
        fp = fingerprint(study)
        action = None
        if result_json is not None:
            if result_json.get("fingerprint", fp) != fp:
                raise WorkbookError(self.path, f"{tag} {year}: the result belongs to another "
                                               "study (fingerprints differ)")
            action = (result_json.get("recommendation") or {}).get("action")
        with self.transaction() as c:
            c.execute("INSERT OR REPLACE INTO studies VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                      (tag, int(year), study.title, _dumps(study_to_dict(study)),
                       None if result_json is None else _dumps(dict(result_json)), fp, action,
                       _now()))
        return fp

    def start_restudy(self, tag: str, new_year: int) -> Study:
        """Start ``new_year``'s study of ``tag`` from the latest earlier year's estimates.

        The earlier study, its result and its memos stay as they were. The new
        year is stored without a result; edit it and :meth:`save_study` again.
        """
        self._active(tag)
        earlier = [y for y in self.years(tag) if y < new_year]
        if new_year in self.years(tag):
            raise WorkbookError(self.path, f"{tag} already has a study for {new_year}")
        if not earlier:
            raise WorkbookError(self.path, f"{tag} has no study before {new_year} to start from")
        study = self.study(tag, earlier[-1])
        self.save_study(tag, new_year, study)
        return study

    def studies(self) -> list[StudyRecord]:
        """The current (latest) study of every asset in service that has one, by site then tag.

        Retired assets keep their studies (read them with :meth:`record`) but are
        no longer part of the fleet's run.
        """
        out = []
        for asset in self.assets(include_retired=False):
            year = self.current_year(asset.tag)
            if year is not None:
                out.append(self.record(asset.tag, year))
        return out

    # ------------------------------------------------------------------ candidates
    def add_candidate(self, alternative: Alternative, asset_class: str = "",
                      tags: Iterable[str] = ()) -> int:
        """Add (or update, by name) a challenger model and link it to ``tags``; returns its id."""
        if alternative.role != "challenger":
            raise WorkbookError(self.path, f"candidate '{alternative.name}' must be a challenger")
        body = _dumps(alternative_to_dict(alternative))
        with self.transaction() as c:
            c.execute("INSERT INTO candidates (name, asset_class, alternative_json) VALUES "
                      "(?, ?, ?) ON CONFLICT(name) DO UPDATE SET asset_class = "
                      "excluded.asset_class, alternative_json = excluded.alternative_json",
                      (alternative.name, asset_class, body))
            cid = c.execute("SELECT id FROM candidates WHERE name = ?",
                            (alternative.name,)).fetchone()[0]
            for tag in tags:
                c.execute("INSERT OR IGNORE INTO asset_candidates VALUES (?, ?)", (tag, cid))
        return int(cid)

    def link_candidate(self, candidate_id: int, tag: str) -> None:
        self._active(tag)
        with self.transaction() as c:
            c.execute("INSERT OR IGNORE INTO asset_candidates VALUES (?, ?)", (tag, candidate_id))

    def candidates(self, tag: str | None = None, asset_class: str | None = None) -> list[Candidate]:
        """Challenger models: all, those linked to ``tag``, or those of ``asset_class``."""
        sql = "SELECT id, name, asset_class, alternative_json FROM candidates"
        params: list[Any] = []
        if tag is not None:
            sql += " WHERE id IN (SELECT candidate_id FROM asset_candidates WHERE tag = ?)"
            params.append(tag)
        elif asset_class is not None:
            sql += " WHERE asset_class = ?"
            params.append(asset_class)
        out = []
        for cid, name, cls, body in self._q(sql + " ORDER BY name", params):
            tags = tuple(r[0] for r in self._q(
                "SELECT tag FROM asset_candidates WHERE candidate_id = ? ORDER BY tag", (cid,)))
            where = f"{self.path}: candidate '{name}'"
            try:
                alt = _parse_alternative(loads_json(body, where), where)
            except StudyError as exc:
                raise WorkbookError(self.path, f"candidate '{name}' is damaged ({exc.message})"
                                    ) from None
            out.append(Candidate(cid, name, cls, alt, tags))
        return out

    # ------------------------------------------------------------------ history and fits
    def add_history(self, rows: Iterable[HistoryRow], replace: bool = False) -> int:
        """Store imported cost-history rows in one transaction; returns how many.

        ``replace=True`` first removes the earlier rows of the same tags and kinds.
        """
        rows = list(rows)
        for tag in sorted({r.tag for r in rows}):
            self._active(tag)
        for r in rows:
            if r.kind not in HISTORY_KINDS:
                raise WorkbookError(self.path, f"history kind '{r.kind}' is not one of "
                                               f"{', '.join(HISTORY_KINDS)}")
        with self.transaction() as c:
            if replace:
                for tag, kind in {(r.tag, r.kind) for r in rows}:
                    c.execute("DELETE FROM history WHERE tag = ? AND kind = ?", (tag, kind))
            c.executemany("INSERT INTO history (tag, age, amount, kind, date, source, source_row)"
                          " VALUES (?, ?, ?, ?, ?, ?, ?)",
                          [(r.tag, int(r.age), float(r.amount), r.kind, r.date, r.source,
                            r.source_row) for r in rows])
        return len(rows)

    def history(self, tag: str, kind: str | None = None) -> list[HistoryRow]:
        """Cost history of ``tag`` (optionally one kind), by age then import order."""
        sql = ("SELECT tag, age, amount, kind, date, source, source_row FROM history "
               "WHERE tag = ?")
        params: list[Any] = [tag]
        if kind is not None:
            sql += " AND kind = ?"
            params.append(kind)
        return [HistoryRow(*r) for r in self._q(sql + " ORDER BY kind, age, id", params)]

    def save_fit(self, tag: str, year: int, fit: Any) -> None:
        """Keep a trend fit (``core.history`` fit object or its ``to_json()`` dict) with a study."""
        if self.schema_version < 2:
            raise WorkbookError(self.path, "fits need schema 2; open the workbook for writing")
        self._active(tag)
        data = fit.to_json() if hasattr(fit, "to_json") else dict(fit)
        with self.transaction() as c:
            c.execute("INSERT OR REPLACE INTO fits VALUES (?, ?, ?, ?, ?, ?)",
                      (tag, int(year), data["quantity"], data["model"], _dumps(data), _now()))

    def fits(self, tag: str, year: int | None = None) -> list[dict]:
        """The fits kept with ``tag``'s study of ``year`` (default latest), as dicts."""
        if self.schema_version < 2:
            return []
        year = self.current_year(tag) if year is None else year
        return [loads_json(r[0], f"{self.path}: fit of {tag} {year}") for r in self._q(
            "SELECT fit_json FROM fits WHERE tag = ? AND year = ? ORDER BY quantity", (tag, year))]

    # ------------------------------------------------------------------ memos
    def record_memo(self, tag: str | None, year: int | None, fingerprint: str, signer: str,
                    path: str | Path, time: str | _dt.datetime | None = None,
                    title: str = "", role: str = "", certificate_sha256: str = "") -> int:
        """Add an issued memo, or a later signature of one (its role), to the register.

        Returns the row's id. ``role`` and ``certificate_sha256`` need schema 3.
        """
        when = (time.isoformat(timespec="seconds") if isinstance(time, _dt.datetime)
                else (time or _now()))
        if not title and tag is not None:
            rows = self._q("SELECT title FROM studies WHERE fingerprint = ? LIMIT 1",
                           (fingerprint,))
            title = rows[0][0] if rows else ""
        with self.transaction() as c:
            if self.schema_version >= 4:
                cur = c.execute("INSERT INTO memos (tag, year, fingerprint, signer, signed_at, "
                                "file_name, title, role, certificate_sha256) "
                                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
                                (tag, year, fingerprint, signer or "", when,
                                 os.fspath(path), title, role or "", certificate_sha256 or ""))
            elif self.schema_version >= 2:
                cur = c.execute("INSERT INTO memos (tag, year, fingerprint, signer, signed_at, "
                                "file_name, title) VALUES (?, ?, ?, ?, ?, ?, ?)",
                                (tag, year, fingerprint, signer or "", when,
                                 os.fspath(path), title))
            else:
                cur = c.execute("INSERT INTO memos (tag, year, fingerprint, signer, signed_at, "
                                "file_name) VALUES (?, ?, ?, ?, ?, ?)",
                                (tag, year, fingerprint, signer or "", when, os.fspath(path)))
        return int(cur.lastrowid or 0)

    def memos(self, tag: str | None = None) -> list[MemoRecord]:
        cols = "id, tag, year, fingerprint, signer, signed_at, file_name"
        cols += ", title" if self.schema_version >= 2 else ""
        cols += ", role, certificate_sha256" if self.schema_version >= 4 else ""
        sql = f"SELECT {cols} FROM memos"
        rows = (self._q(sql + " WHERE tag = ? ORDER BY id", (tag,)) if tag is not None
                else self._q(sql + " ORDER BY id"))
        return [MemoRecord(*r) for r in rows]

    def find_study(self, fingerprint: str) -> tuple[str, int] | None:
        """(tag, year) of the stored study with this fingerprint, if any."""
        rows = self._q("SELECT tag, year FROM studies WHERE fingerprint = ? "
                       "ORDER BY result_json IS NOT NULL DESC, year DESC",
                       (fingerprint,))
        return (rows[0][0], rows[0][1]) if rows else None


def _migrate_to(conn: sqlite3.Connection, target: int) -> int:
    version = 1
    while version < target:
        MIGRATIONS[version](conn)
        version += 1
        conn.execute(f"PRAGMA user_version = {version}")
    return version


# --------------------------------------------------------------------------- module helpers
def studies_from_workbook(path: str | Path) -> list[Study]:
    """The current-year study of every asset of the workbook at ``path`` (read-only).

    Raises :class:`WorkbookError` (``<file>: not a Tenure workbook (...)``) for
    anything that is not an intact workbook, and when it holds no study.
    """
    with Workbook.open(path, write=False) as wb:
        studies = [r.study for r in wb.studies()]
    if not studies:
        raise WorkbookError(path, "the workbook holds no study yet")
    return studies



def _asset_for_title(wb: Workbook, title: str, by_title: dict[str, str]) -> str:
    """The tag of the asset a study title belongs to, adding the asset when it is new."""
    if title in by_title:
        return by_title[title]
    site, _, rest = title.partition(SITE_SEPARATOR)
    if not rest.strip():
        site, rest = "Unassigned", title
    site, rest = site.strip() or "Unassigned", rest.strip()
    first = rest.split(" ", 1)[0]
    try:
        if wb.asset(first).site == site:
            return first
    except KeyError:
        pass
    known = {a.tag for a in wb.assets()}
    if first and any(ch.isdigit() for ch in first) and first not in known:
        tag, description = first, (rest.split(" ", 1)[1] if " " in rest else rest)
    else:
        n = 1
        while f"A-{n:03d}" in known:
            n += 1
        tag, description = f"A-{n:03d}", rest
    wb.add_asset(Asset(tag, description, site))
    by_title[title] = tag
    return tag


def save_studies(path: str | Path, studies: Sequence[Study], year: int | None = None,
                 results: Mapping[str, Mapping[str, Any]] | None = None,
                 company: str = "") -> list[tuple[str, int]]:
    """Save the window's studies into the workbook at ``path`` (created when missing).

    Each study goes to the asset whose current study has the same title; else
    to the asset named by the title "Site — TAG description"; else to a new
    asset. It is stored as ``year``'s study (default: this calendar year),
    replacing that year's and leaving earlier years as they were. ``results``
    maps a title to its ``core.jsonout.study_json(result)``. One transaction for all.
    Returns the (tag, year) of each study, in order.
    """
    year = _dt.date.today().year if year is None else int(year)
    path = Path(path)
    with (Workbook.create(path, company=company) if not path.exists() else _writer(path)) as wb:
        by_title = {r.study.title: r.tag for r in wb.studies()}
        out = []
        with wb.transaction():
            for study in studies:
                tag = _asset_for_title(wb, study.title, by_title)
                result = (results or {}).get(study.title)
                if result is not None and result.get("fingerprint") != fingerprint(study):
                    result = None  # a stale result is not stored as this study's snapshot
                wb.save_study(tag, year, study, result)
                out.append((tag, year))
        return out


def export_study_json(workbook_path: str | Path, out: str | Path) -> Path:
    """Write the current study of every asset as one docs/method.md §5 study file."""
    from core.studyfile import dump_study_document

    out = Path(out)
    text = dump_study_document(studies_from_workbook(workbook_path))
    tmp = out.with_name(out.name + ".part")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, out)
    return out


def import_study_json(workbook_path: str | Path, json_path: str | Path,
                      year: int | None = None) -> list[tuple[str, int]]:
    """Read a §5 study file into the workbook as ``year``'s studies (see :func:`save_studies`)."""
    from core.studyfile import load_study_file

    return save_studies(workbook_path, load_study_file(json_path), year)


@contextlib.contextmanager
def _writer(path: str | Path) -> Iterator[Workbook]:
    """The workbook at ``path`` for writing: this process's open one if any, else a new one."""
    open_one = _OPEN_WRITERS.get(str(Path(path).resolve()))
    if open_one is not None and open_one._conn is not None:
        yield open_one
        return
    with Workbook.open(path, write=True) as wb:
        yield wb


def record_memo(workbook_path: str | Path, memo_path: str | Path, fingerprint: str,
                signer: str | None = None, title: str | None = None, tag: str | None = None,
                year: int | None = None, time: str | _dt.datetime | None = None,
                role: str | None = None, certificate_sha256: str | None = None) -> int:
    """Record an issued memo in the workbook at ``workbook_path`` (hook for the memo dialog).

    The asset and year are found from the study fingerprint when not given.
    Uses the workbook this process already has open for writing, if any.
    """
    with _writer(workbook_path) as wb:
        if tag is None:
            found = wb.find_study(fingerprint)
            if found is not None:
                tag, year = found
        return wb.record_memo(tag, year, fingerprint, signer or "", os.fspath(memo_path), time,
                              title or "", role or "", certificate_sha256 or "")


__all__ = ["Asset", "Candidate", "HistoryRow", "MemoRecord", "Site", "StudyRecord", "Workbook",
           "export_study_json", "import_study_json", "record_memo", "save_studies", "studies_from_workbook"]
