"""Checking a workbook file before use, and the writer's lock.

:func:`check_file` reads the 100-byte SQLite header itself (no SQLite call
that could write), then opens the file read-only for ``PRAGMA
integrity_check``. Anything doubtful raises :class:`WorkbookError` and leaves
the file byte-identical.

:class:`WriterLock` is an OS-level lock (``fcntl.flock`` / ``msvcrt.locking``)
on a sibling ``<file>.lock`` that also names the writer (pid, host, time). It
is held while the workbook is open for writing and vanishes with its process;
a held one raises :class:`WorkbookInUse`.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import errno
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


class WorkbookReadOnly(WorkbookError):
    """The workbook cannot be written here (file or folder read-only); open it read-only."""


def write_problem(path: str | Path) -> str | None:
    """Why the workbook at ``path`` cannot be written, or None when it can.

    Tries what a save needs without changing anything: opening the file for
    writing (refused for a read-only or immutable file, even to root where the
    filesystem says so) and creating files in its folder (SQLite's journal).
    """
    path = Path(path)
    try:
        fd = os.open(path, os.O_RDWR)
    except PermissionError:
        return "the file is read-only"
    except OSError as exc:
        if exc.errno == errno.EROFS:
            return "the file is on a read-only disk"
        return f"the file cannot be opened for writing ({exc.strerror or exc})"
    os.close(fd)
    folder = path.parent
    if not os.access(folder, os.W_OK | os.X_OK):
        return "its folder is read-only (a save needs to write a journal file beside it)"
    return None


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
def lock_path(path: Path) -> Path:
    return path.with_name(path.name + ".lock")


#: Windows locks a byte range; it lies far past the owner text so that text stays readable.
_WINDOWS_LOCK_OFFSET = 1 << 20


def _os_lock(fd: int) -> bool:
    """Take the OS lock on ``fd`` without waiting; False when another process holds it.

    POSIX: ``flock(LOCK_EX | LOCK_NB)`` (whole file, per open file description).
    Windows: ``msvcrt.locking(LK_NBLCK)`` on one byte far past the text. Either way the
    OS drops the lock when the process dies, however it dies: no stale locks.
    """
    if os.name == "nt":
        import msvcrt

        os.lseek(fd, _WINDOWS_LOCK_OFFSET, os.SEEK_SET)
        try:
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)  # type: ignore[attr-defined]
        except OSError:
            return False
        return True
    import fcntl

    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except (BlockingIOError, PermissionError):
        return False
    return True


def _os_unlock(fd: int) -> None:
    with contextlib.suppress(OSError):
        if os.name == "nt":
            import msvcrt

            os.lseek(fd, _WINDOWS_LOCK_OFFSET, os.SEEK_SET)
            msvcrt.locking(fd, msvcrt.LK_UNLCK, 1)  # type: ignore[attr-defined]
        else:
            import fcntl

            fcntl.flock(fd, fcntl.LOCK_UN)


def _read_owner(fd: int) -> dict | None:
    try:
        os.lseek(fd, 0, os.SEEK_SET)
        raw = os.read(fd, 4096)
        owner = json.loads(raw.decode("utf-8"))
    except (OSError, ValueError):
        return None
    return owner if isinstance(owner, dict) else None


class WriterLock:
    """The writer's lock: an OS lock held on ``<workbook>.lock`` while the workbook is open.

    The file names the writer (pid, host, time) for the "in use by ..." message;
    the OS lock (``fcntl.flock`` / ``msvcrt.locking``) decides. It vanishes with
    its process, so a lock left by a crash, an empty or half-written lock file,
    or one naming a process that happens to be alive after a reboot never
    blocks, and two processes can never both win (there is no read-delete-create
    takeover to race through). The file is removed on release while the lock is
    still held; a process that locked a file just removed notices (the path no
    longer names the file it locked) and tries again.

    A lock file written by another computer is respected even without an OS lock
    (a network share may not pass locks between machines) until the user
    confirms it is left over (``acquire(force=True)``).

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
        self._fd: int | None = None

    def _owner(self) -> dict | None:
        try:
            owner = json.loads(self.file.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        return owner if isinstance(owner, dict) else None

    def owner(self) -> dict | None:
        """The pid, host and time in the lock file, or None when there is no readable lock."""
        return self._owner() if self.file.exists() else None

    def break_lock(self) -> None:
        """Remove a left-over lock file (only when no live process holds its OS lock)."""
        try:
            fd = os.open(self.file, os.O_RDWR)
        except OSError:
            return
        try:
            if _os_lock(fd):
                with contextlib.suppress(OSError):
                    self.file.unlink()
                _os_unlock(fd)
        finally:
            os.close(fd)

    @staticmethod
    def _who(owner: dict | None) -> str:
        if not owner:
            return "another process"
        return (f"process {owner.get('pid')} on {owner.get('host')} since "
                f"{owner.get('time')}")

    def acquire(self, force: bool = False) -> None:
        """Take the lock or raise :class:`WorkbookInUse` naming the writer; never waits."""
        me = json.dumps({"pid": os.getpid(), "host": socket.gethostname(),
                         "time": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds")})
        for _attempt in range(50):
            try:
                fd = os.open(self.file, os.O_RDWR | os.O_CREAT, 0o644)
            except OSError as exc:
                raise WorkbookError(self.path, f"cannot create the lock file {self.file.name} "
                                               f"({exc.strerror or exc})") from None
            keep = False
            try:
                try:
                    locked = _os_lock(fd)
                except OSError as exc:  # e.g. a network share without locks (ENOLCK)
                    why = exc.strerror or str(exc)
                    raise WorkbookError(self.path, f"cannot lock it for writing ({why}); copy "
                                                   "it to a local folder, or open it "
                                                   "read-only") from None
                if not locked:
                    raise WorkbookInUse(self.path, f"in use: open for writing by "
                                                   f"{self._who(_read_owner(fd))} "
                                                   "(close it there, or open read-only)")
                try:
                    same = os.path.samestat(os.fstat(fd), os.stat(self.file))
                except FileNotFoundError:
                    same = False
                if not same:  # released and removed between our open and our lock
                    _os_unlock(fd)
                    continue
                owner = _read_owner(fd)
                if (not force and owner is not None and owner.get("host")
                        and owner.get("host") != socket.gethostname()):
                    _os_unlock(fd)
                    raise WorkbookInUse(self.path, f"in use: open for writing by "
                                                   f"{self._who(owner)} (close it there, or "
                                                   "open read-only; if that computer is no "
                                                   "longer using it, confirm to take it over)")
                os.lseek(fd, 0, os.SEEK_SET)
                os.ftruncate(fd, 0)
                os.write(fd, me.encode("utf-8"))
                self._fd = fd
                self.held = keep = True
                return
            finally:
                if not keep:
                    os.close(fd)
        raise WorkbookInUse(self.path, "in use: the lock file keeps changing")

    def release(self) -> None:
        if not self.held or self._fd is None:
            return
        fd, self._fd, self.held = self._fd, None, False
        if os.name == "nt":  # an open file cannot be removed there: unlock, close, then remove
            _os_unlock(fd)
            os.close(fd)
            with contextlib.suppress(OSError):
                self.file.unlink()
            return
        try:
            if os.path.samestat(os.fstat(fd), os.stat(self.file)):
                self.file.unlink()
        except OSError:
            pass
        finally:
            _os_unlock(fd)
            os.close(fd)

    def __del__(self) -> None:  # pragma: no cover - the OS releases it anyway
        with contextlib.suppress(Exception):
            self.release()
