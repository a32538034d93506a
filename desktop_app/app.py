"""Start the Tenure window: ``main(path)`` opens a file, else the last one, else the demo.

Software rendering only (no OpenGL); ``QT_QPA_PLATFORM=offscreen`` is respected
(the platform plugin is Qt's choice from the environment).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path


def _configure_rendering() -> None:
    os.environ.setdefault("QT_OPENGL", "software")
    os.environ.setdefault("QSG_RHI_BACKEND", "software")
    from PySide6.QtCore import QCoreApplication, Qt

    QCoreApplication.setAttribute(Qt.ApplicationAttribute.AA_UseSoftwareOpenGL, True)


_QUIET = ("propagateSizeHints",)


def _qt_messages(mode, context, message: str) -> None:
    """Qt's own messages go to stderr, minus the offscreen plugin's harmless notices."""
    if any(q in message for q in _QUIET):
        return
    sys.stderr.write(message + "\n")


def create_app(argv: list[str] | None = None):
    """The QApplication (created once), configured for Tenure."""
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        from PySide6.QtCore import qInstallMessageHandler

        qInstallMessageHandler(_qt_messages)
        _configure_rendering()
        app = QApplication(list(argv if argv is not None else sys.argv[:1]))
    app.setOrganizationName("Tenure")
    app.setApplicationName("Tenure")
    app.setApplicationDisplayName("Tenure")
    app.setWindowIcon(window_icon())
    return app


def window_icon():
    """Tenure's icon, read with importlib.resources (so a wheel or bundle finds it too)."""
    from importlib.resources import files

    from PySide6.QtGui import QIcon, QPixmap

    pixmap = QPixmap()
    try:
        pixmap.loadFromData(files("resources").joinpath("icons", "tenure.png").read_bytes(), "PNG")
    except OSError:  # an icon missing from a damaged installation is not worth stopping for
        return QIcon()
    return QIcon(pixmap)


def initial_path(path: str | None, prefs) -> str | None:
    """The file to open: the one asked for, else the last one (if it still exists), else the demo."""
    from desktop_app.sources import demo_path

    if path:
        return path
    last = prefs.last_file
    if last and Path(last).exists():
        return last
    return demo_path()


def demo_path_or_none() -> str | None:
    from desktop_app.sources import demo_path

    return demo_path()


def build_window(path: str | None, deferred: bool = False):
    """The main window on ``path`` (else the last file, else the demo).

    ``deferred``: return at once with an empty window; call
    ``window.finish_startup(window.startup_path)`` once it is on screen to load
    the panels and the file (the start-up path of ``main``).
    """
    from desktop_app.main_window import MainWindow
    from desktop_app.prefs import Preferences

    prefs = Preferences()
    window = MainWindow(prefs, deferred=deferred)
    target = initial_path(path, prefs)
    window.startup_path = target
    if path is None and target is not None and target != demo_path_or_none():
        window.startup_fallback = demo_path_or_none()  # the last file may have gone bad
    if deferred:
        pass
    elif target is not None:
        if not window.open_path(target) and getattr(window, "startup_fallback", None):
            window.open_path(window.startup_fallback)
    return window


def install_interrupt_handler(window) -> None:
    """Ctrl-C in the terminal that started the window closes it as its close button does.

    Python runs a signal handler only between bytecodes, and Qt's event loop waits in C++;
    so the handler just posts ``window.close()`` (which asks about unsaved work), and a
    short idle timer hands control back to Python often enough to notice the signal. A
    second Ctrl-C while the question is open does nothing more.
    """
    import signal

    from PySide6.QtCore import QTimer

    closing = {"now": False}

    def close() -> None:
        if closing["now"]:
            return
        closing["now"] = True
        try:
            window.close()
        finally:
            closing["now"] = False

    def on_sigint(_signum, _frame) -> None:
        QTimer.singleShot(0, close)

    signal.signal(signal.SIGINT, on_sigint)
    timer = QTimer(window)
    timer.timeout.connect(lambda: None)
    timer.start(200)
    window._interrupt_timer = timer


def main(path: str | None = None) -> int:
    from core.errors import StudyError
    from desktop_app import recovery

    if path is not None and not Path(path).exists():
        raise StudyError(path, "no such file")
    # Before Qt starts: a missing system library would make Qt abort in QApplication.
    from desktop_app.system_libs import check_qt_libraries

    problem = check_qt_libraries()
    if problem is not None:
        where, what = problem.split(": ", 1)
        raise StudyError(where, what)
    recovery.remove_leftovers()  # sidecars of a window killed mid-autosave
    app = create_app()
    window = build_window(path, deferred=True)
    recovery.install_excepthook(window.handle_unexpected)
    install_interrupt_handler(window)
    window.show()
    app.processEvents()  # paint the window first, then load the panels and the file
    from PySide6.QtCore import QTimer

    QTimer.singleShot(0, lambda: window.finish_startup(window.startup_path))
    return int(app.exec())


if __name__ == "__main__":
    sys.exit(main(sys.argv[1] if len(sys.argv) > 1 else None))
