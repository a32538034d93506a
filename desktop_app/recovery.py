"""Autosave, crash recovery and the error log of the window.

Recovery files are the window's own sidecar (``desktop_app.document`` recovery
JSON), one per open file, under the user data folder
(``platformdirs.user_data_dir("tenure")/recovery``).  They are written by the
autosave timer and before an unexpected error is reported, and removed after a
successful save or a clean close.  ``TENURE_STATE_DIR`` overrides the folder
(tests, portable installs).
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import traceback
from collections.abc import Callable
from pathlib import Path
from typing import Any

from platformdirs import user_data_dir, user_log_dir


def state_dir(kind: str) -> Path:
    base = os.environ.get("TENURE_STATE_DIR")
    if base:
        folder = Path(base) / kind
    elif kind == "logs":
        folder = Path(user_log_dir("tenure", appauthor=False))
    else:
        folder = Path(user_data_dir("tenure", appauthor=False)) / kind
    folder.mkdir(parents=True, exist_ok=True)
    return folder


def recovery_file(path: str | None) -> Path:
    tag = hashlib.sha256((os.path.abspath(path) if path else "untitled").encode()).hexdigest()[:16]
    stem = Path(path).stem if path else "untitled"
    return state_dir("recovery") / f"{stem}-{tag}.recovery.json"


def write_recovery(data: dict[str, Any], path: str | None) -> Path:
    """Write the sidecar whole or not at all (a ``StudyError``, a ValueError, on failure)."""
    from core.fsutil import atomic_write_bytes

    target = recovery_file(path)
    return atomic_write_bytes(target, json.dumps(data, ensure_ascii=False).encode("utf-8"))


def remove_leftovers() -> list[Path]:
    """Remove temporary sidecars left by a window that was killed mid-autosave."""
    from core.fsutil import remove_leftovers as remove

    try:
        return remove(state_dir("recovery"))
    except OSError:
        return []


def read_recovery(path: str | None) -> dict[str, Any] | None:
    target = recovery_file(path)
    if not target.exists():
        return None
    from core.studyfile import loads_json

    try:
        return loads_json(target.read_text(encoding="utf-8"), str(target))
    except (OSError, ValueError):  # a StudyError is a ValueError
        return None


def discard_recovery(path: str | None) -> None:
    try:
        recovery_file(path).unlink(missing_ok=True)
    except OSError:
        pass


def log_file() -> Path:
    return state_dir("logs") / "tenure-window.log"


def log_exception(exc_type, exc, tb) -> Path:
    target = log_file()
    try:
        import datetime as _dt

        with target.open("a", encoding="utf-8") as fh:
            fh.write(f"--- {_dt.datetime.now().isoformat(timespec='seconds')}\n")
            fh.write("".join(traceback.format_exception(exc_type, exc, tb)))
    except OSError:
        pass
    return target


def install_excepthook(on_error: Callable[[str, Path], None]) -> None:
    """Route unexpected errors to the log and to ``on_error(summary, log_path)``.

    ``on_error`` autosaves first and then shows a dialog; it must not raise.
    """
    previous = sys.excepthook

    def hook(exc_type, exc, tb) -> None:
        if issubclass(exc_type, KeyboardInterrupt):
            previous(exc_type, exc, tb)
            return
        path = log_exception(exc_type, exc, tb)
        try:
            on_error(f"{exc_type.__name__}: {exc}", path)
        except Exception:  # the hook itself must never fail loudly
            log_exception(*sys.exc_info())

    sys.excepthook = hook
