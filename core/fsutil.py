"""Careful file writing: atomic replace, directory fsync, leftover clean-up, disk-full words.

Every file Tenure writes whole (memos, exports, identities, recovery copies) is
written to a temporary sibling ``NAME.<pid>.part``, flushed to disk
(``fsync``), renamed over ``NAME`` (``os.replace``, atomic on one filesystem)
and then the folder itself is flushed, so the rename survives a power cut
(POSIX; on Windows the folder flush is not available and is skipped). A
failure leaves the previous file and removes the temporary one; a temporary
file left by a killed process is removed by :func:`remove_leftovers` at the
next start.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
from pathlib import Path

from core.errors import StudyError

DISK_FULL_ERRNOS = frozenset({errno.ENOSPC, errno.EFBIG, getattr(errno, "EDQUOT", errno.ENOSPC)})


def is_disk_full(exc: BaseException) -> bool:
    """True when ``exc`` says the disk (or the file-size or quota limit) is full."""
    if isinstance(exc, OSError) and exc.errno in DISK_FULL_ERRNOS:
        return True
    text = str(exc).lower()
    return any(words in text for words in ("disk is full", "disk full", "file too large",
                                           "no space left", "efbig", "enospc", "edquot"))


def fsync_dir(folder: str | os.PathLike) -> None:
    """Flush a folder's entries (after a rename) to disk; a no-op where it is unsupported."""
    if os.name == "nt":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def part_path(target: Path) -> Path:
    """The temporary sibling a write of ``target`` goes through (this process's)."""
    return target.with_name(f"{target.name}.{os.getpid()}.part")


def atomic_write_bytes(target: str | os.PathLike, data: bytes, mode: int = 0o644) -> Path:
    """Write ``data`` to ``target`` whole or not at all; StudyError ``<target>: ...`` on failure.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> atomic_write_bytes(p, b"one").read_bytes(), sorted(x.name for x in p.parent.iterdir())
    (b'one', ['a.txt'])
    """
    target = Path(target)
    tmp = part_path(target)
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, mode)
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, target)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            tmp.unlink()
        if isinstance(exc, OSError):
            raise write_error(target, exc) from None
        raise
    fsync_dir(target.parent)
    return target


def write_error(target: str | os.PathLike, exc: BaseException) -> StudyError:
    """The refusal for a failed write: "disk full" in those words when it is that."""
    if is_disk_full(exc):
        return StudyError(str(target), "disk full: nothing was written and the previous file "
                                       "is unchanged; free some space or choose another folder")
    reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
    return StudyError(str(target), f"cannot write ({reason})")


_LEFTOVER = re.compile(r"\.(?:(\d+)\.part|part|tmp(\d+))$")


def pid_alive(pid: int) -> bool:
    """Whether process ``pid`` is running on this computer (never signals it)."""
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




def remove_leftovers(folder: str | os.PathLike, stem: str | None = None) -> list[Path]:
    """Remove temporary files left by killed processes in ``folder``; returns what was removed.

    Matches ``NAME.<pid>.part``, ``NAME.part`` and ``NAME.tmp<pid>`` (only names
    starting with ``stem`` when it is given) whose process is no longer alive;
    a live process's temporary file is left alone. Errors are ignored.
    """
    out: list[Path] = []
    try:
        entries = list(Path(folder).iterdir())
    except OSError:
        return out
    for p in entries:
        if stem is not None and not p.name.startswith(stem):
            continue
        m = _LEFTOVER.search(p.name)
        if m is None:
            continue
        pid = m.group(1) or m.group(2)
        if pid is not None and int(pid) != os.getpid() and pid_alive(int(pid)):
            continue
        if pid is not None and int(pid) == os.getpid():
            continue
        with contextlib.suppress(OSError):
            p.unlink()
            out.append(p)
    return out
