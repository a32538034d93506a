"""Checking a workbook file before use, and the writer's lock.

:func:`check_file` reads the 100-byte SQLite header itself (no SQLite call
that could write), then opens the file read-only for ``PRAGMA
integrity_check``. Anything doubtful raises :class:`WorkbookError` and leaves
the file byte-identical.

:class:`WriterLock` is a sibling ``<file>.lock`` created exclusively, holding
the pid, host and time of the writer. A lock whose process is gone (same host)
is stale and taken over; a live one raises :class:`WorkbookInUse`.
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import socket
import sqlite3
from pathlib import Path

from core.errors import StudyError
from core.workbook.schema import APPLICATION_ID, SCHEMA_VERSION

SQLITE_MAGIC = b"SQLite format 3\x00"
REQUIRED_TABLES = frozenset({"meta", "sites", "assets", "studies", "candidates",
                             "asset_candidates", "history", "memos"})


class WorkbookError(StudyError):
    """A workbook that cannot be used: ``<file>: <what is wrong>``."""

    def __init__(self, path: str | Path, message: str) -> None:
        super().__init__(str(path), message)


class WorkbookInUse(WorkbookError):
    """Another process has the workbook open for writing."""


def _refuse(path: Path, why: str) -> WorkbookError:
    return WorkbookError(path, f"not a Tenure workbook ({why})")


def journal_path(path: Path) -> Path:
    return path.with_name(path.name + "-journal")


def read_header(path: Path) -> dict:
    """Check the raw SQLite header of ``path``; returns page size, page count and size.

    Refuses (WorkbookError) a missing, empty, short, foreign or truncated file.
    """
    if not path.exists():
        raise WorkbookError(path, "no such file")
    if not path.is_file():
        raise WorkbookError(path, "is not a file")
    try:
        with path.open("rb") as fh:
            head = fh.read(100)
        size = path.stat().st_size
    except OSError as exc:
        raise WorkbookError(path, f"cannot read ({exc.strerror or exc})") from None
    if size == 0:
        raise _refuse(path, "the file is empty")
    if head[:16] != SQLITE_MAGIC[:len(head[:16])]:
        raise _refuse(path, "not an SQLite database")
    if len(head) < 100:
        raise _refuse(path, f"truncated: {size} bytes, shorter than a database header")
    page_size = int.from_bytes(head[16:18], "big")
    page_size = 65536 if page_size == 1 else page_size
    if page_size < 512 or page_size & (page_size - 1):
        raise _refuse(path, f"damaged header: page size {page_size}")
    app_id = int.from_bytes(head[68:72], "big")
    if app_id != APPLICATION_ID:
        raise _refuse(path, f"an SQLite database of another program, application id {app_id:#x}")
    pages = int.from_bytes(head[28:32], "big")
    header_count_valid = head[92:96] == head[24:28] and pages > 0
    hot = journal_path(path).exists() and journal_path(path).stat().st_size > 0
    if not hot:
        if size % page_size:
            raise _refuse(path, f"truncated or damaged: {size} bytes is not a whole number "
                                f"of {page_size}-byte pages")
        if header_count_valid and size < pages * page_size:
            raise _refuse(path, f"truncated: {size} bytes of {pages * page_size}")
    return {"page_size": page_size, "pages": pages, "size": size, "hot_journal": hot}


def _uri(path: Path, mode: str) -> str:
    return f"{path.resolve().as_uri()}?mode={mode}"


def check_file(path: str | Path) -> int:
    """Check that ``path`` is an intact Tenure workbook; returns its schema version.

    The header is read by hand; then the file is opened read-only
    (``mode=ro``) for ``PRAGMA integrity_check``. A hot journal left by a
    crashed writer is rolled back first (that restores the last committed
    state; SQLite does it on any write open). Nothing else writes to the file.
    """
    path = Path(path)
    info = read_header(path)
    if info["hot_journal"]:
        try:  # a read-write open lets SQLite roll the interrupted transaction back
            conn = sqlite3.connect(_uri(path, "rw"), uri=True, timeout=2.0)
            try:
                conn.execute("PRAGMA schema_version").fetchone()
            finally:
                conn.close()
        except sqlite3.Error as exc:
            raise WorkbookError(path, f"an interrupted save could not be rolled back ({exc})") \
                from None
        read_header(path)
    try:
        conn = sqlite3.connect(_uri(path, "ro"), uri=True, timeout=2.0)
    except sqlite3.Error as exc:
        raise _refuse(path, f"cannot open: {exc}") from None
    try:
        rows = conn.execute("PRAGMA integrity_check").fetchall()
        if [r[0] for r in rows] != ["ok"]:
            first = rows[0][0] if rows else "no answer"
            raise _refuse(path, f"damaged: integrity check says {first!r}")
        version = int(conn.execute("PRAGMA user_version").fetchone()[0])
        tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type='table'")}
    except sqlite3.DatabaseError as exc:
        raise _refuse(path, f"damaged: {exc}") from None
    finally:
        conn.close()
    if version < 1:
        raise _refuse(path, "no schema version")
    if version > SCHEMA_VERSION:
        raise WorkbookError(path, f"made by a newer Tenure (schema {version}; this build reads "
                                  f"up to {SCHEMA_VERSION})")
    missing = REQUIRED_TABLES - tables
    if missing:
        raise _refuse(path, f"missing tables: {', '.join(sorted(missing))}")
    return version


# --------------------------------------------------------------------------- lock
def _pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    if os.name == "nt":  # os.kill(pid, 0) would terminate the process on Windows
        import ctypes

        kernel32 = ctypes.windll.kernel32  # type: ignore[attr-defined]
        handle = kernel32.OpenProcess(0x1000, False, pid)  # PROCESS_QUERY_LIMITED_INFORMATION
        if not handle:
            return False
        code = ctypes.c_ulong()
        try:
            kernel32.GetExitCodeProcess(handle, ctypes.byref(code))
        finally:
            kernel32.CloseHandle(handle)
        return code.value == 259  # STILL_ACTIVE
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def lock_path(path: Path) -> Path:
    return path.with_name(path.name + ".lock")


class WriterLock:
    """An exclusive lock file ``<workbook>.lock`` with the writer's pid, host and time.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.tenure"
    >>> lock = WriterLock(p); lock.acquire(); lock_path(p).exists()
    True
    >>> lock.release(); lock_path(p).exists()
    False
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self.file = lock_path(self.path)
        self.held = False

    def _owner(self) -> dict | None:
        try:
            return json.loads(self.file.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None

    def _stale(self, owner: dict | None) -> bool:
        if owner is None:  # unreadable or half-written: stale once it is a few seconds old
            try:
                age = _dt.datetime.now().timestamp() - self.file.stat().st_mtime
            except OSError:
                return True
            return age > 10.0
        if owner.get("host") != socket.gethostname():
            return False  # cannot tell whether a process on another machine is alive
        return not _pid_alive(int(owner.get("pid", -1)))

    def owner(self) -> dict | None:
        """The pid, host and time in the lock file, or None when there is no readable lock."""
        return self._owner() if self.file.exists() else None

    def break_lock(self) -> None:
        """Remove the lock file whoever holds it (only after the user confirms it is stale)."""
        try:
            self.file.unlink()
        except FileNotFoundError:
            pass

    def acquire(self) -> None:
        me = {"pid": os.getpid(), "host": socket.gethostname(),
              "time": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")}
        for _attempt in range(3):
            try:
                fd = os.open(self.file, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                owner = self._owner()
                if self._stale(owner):
                    try:
                        self.file.unlink()
                    except FileNotFoundError:
                        pass
                    continue
                who = (f"process {owner.get('pid')} on {owner.get('host')} since "
                       f"{owner.get('time')}") if owner else "another process"
                raise WorkbookInUse(self.path, f"in use: open for writing by {who} "
                                               f"(close it there, or open read-only)") from None
            except OSError as exc:
                raise WorkbookError(self.path, f"cannot create the lock file {self.file.name} "
                                               f"({exc.strerror or exc})") from None
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                json.dump(me, fh)
            self.held = True
            return
        raise WorkbookInUse(self.path, "in use: the lock file keeps reappearing")

    def release(self) -> None:
        if self.held:
            owner = self._owner()
            if owner is None or owner.get("pid") == os.getpid():
                try:
                    self.file.unlink()
                except FileNotFoundError:
                    pass
            self.held = False
