"""Shared pieces of the window tests (pytest-qt, offscreen).

``isolate`` puts settings, recovery files and logs in the test's temporary folder and makes
every modal dialog fail the test (``Unexpected``) unless the test patches that dialog again;
the ``isolated`` fixture in tests/conftest.py applies it (window test modules opt in with
``pytestmark = pytest.mark.usefixtures("isolated")``).  ``open_window`` is a MainWindow on a
file, with its background jobs finished.
"""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from pathlib import Path  # noqa: E402
from typing import Any, NoReturn  # noqa: E402

import pytest  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402
from PySide6.QtWidgets import QDialog, QFileDialog, QInputDialog, QMessageBox  # noqa: E402

from desktop_app.main_window import MainWindow  # noqa: E402
from desktop_app.prefs import Preferences  # noqa: E402

FALLBACK_DEMO = Path(__file__).resolve().parents[1] / "desktop_app" / "demo_fallback.json"


class Unexpected(AssertionError):
    """A dialog the test did not plan for."""


def refuse(*args: Any, **kwargs: Any) -> NoReturn:
    raise Unexpected(f"unexpected dialog: {args[1:3] if len(args) > 2 else args}")


def isolate(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Settings, recovery files and logs under ``tmp_path``; any unplanned dialog fails."""
    monkeypatch.setenv("TENURE_STATE_DIR", str(tmp_path / "state"))
    QSettings.setPath(QSettings.Format.IniFormat, QSettings.Scope.UserScope,
                      str(tmp_path / "settings"))
    for name in ("question", "warning", "critical", "information", "about"):
        monkeypatch.setattr(QMessageBox, name, staticmethod(refuse))
    monkeypatch.setattr(QMessageBox, "exec", lambda self: refuse(self, self.text()))
    for name in ("getOpenFileName", "getSaveFileName", "getExistingDirectory"):
        monkeypatch.setattr(QFileDialog, name, staticmethod(refuse))
    for name in ("getText", "getItem", "getInt", "getDouble"):
        monkeypatch.setattr(QInputDialog, name, staticmethod(refuse))
    monkeypatch.setattr(QDialog, "exec", lambda self: refuse(self, self.windowTitle()))


def new_window(qtbot: Any) -> MainWindow:
    """An empty MainWindow, closed without questions at the end of the test."""
    window = MainWindow(Preferences())
    qtbot.addWidget(window, before_close_func=lambda w: w.discard_changes())
    return window


def open_window(qtbot: Any, path: str | Path = FALLBACK_DEMO, *,
                offer_recovery: bool = True) -> MainWindow:
    """A MainWindow that opened ``path`` and finished its background jobs."""
    window = new_window(qtbot)
    assert window.open_path(str(path), offer_recovery=offer_recovery)
    assert window.wait_for_jobs()
    return window


def answer_questions(monkeypatch: pytest.MonkeyPatch, button: QMessageBox.StandardButton,
                     asked: list[str] | None = None) -> list[str]:
    """From now on QMessageBox.question answers ``button``; each question's text is appended
    to ``asked`` (a new list unless given), which is returned."""
    asked = [] if asked is None else asked

    def question(*args: Any, **kwargs: Any) -> QMessageBox.StandardButton:
        asked.append(args[2])
        return button

    monkeypatch.setattr(QMessageBox, "question", staticmethod(question))
    return asked
