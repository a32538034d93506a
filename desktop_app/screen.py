"""Window sizes that fit the screen: the first size, the pane split, the remembered layout.

The window must work on a 1366x768 laptop as on a 1920x1080 desktop: its
minimum size stays at most ``MINIMUM`` (1280x720), its first size is the
preferred size cut to the screen's available area, and the split between the
register, the editor and the results is a share of the width (the register and
the editor capped, the results getting the rest).  Splitter states and the
window geometry are kept in the preferences (QSettings) when the window closes.
"""

from __future__ import annotations

from PySide6.QtCore import QRect, QSize
from PySide6.QtWidgets import QMainWindow, QSplitter, QWidget

from desktop_app.prefs import Preferences

PREFERRED = QSize(1720, 980)
MINIMUM = QSize(1280, 720)
#: Room left for the window frame and title bar the platform adds around the window.
FRAME = QSize(16, 40)


def first_size(available: QRect | None) -> QSize:
    """The window's first size: the preferred size, cut to the available screen area.

    >>> from PySide6.QtCore import QRect
    >>> first_size(QRect(0, 0, 1366, 728)).toTuple()
    (1350, 688)
    >>> first_size(QRect(0, 0, 2560, 1400)).toTuple()
    (1720, 980)
    """
    if available is None or available.isEmpty():
        return QSize(PREFERRED)
    return QSize(min(PREFERRED.width(), available.width() - FRAME.width()),
                 min(PREFERRED.height(), available.height() - FRAME.height()))


def pane_sizes(width: int) -> list[int]:
    """Register, editor and results widths for a splitter ``width`` pixels wide.

    >>> pane_sizes(1366)
    [355, 450, 561]
    >>> pane_sizes(1920)
    [499, 690, 731]
    """
    left = max(240, min(500, round(width * 0.26)))
    # the editor takes two columns from about 640 pixels: give it that on a wide screen
    middle = max(380, min(690, round(width * 0.45 - 165)))
    return [left, middle, max(width - left - middle, 0)]


def chart_heights(height: int) -> list[int]:
    """Chart and results heights for the results pane ``height`` pixels tall: half each,
    the chart at most 520 pixels (the results scroll; the cautions stay in view).

    >>> chart_heights(630)
    [315, 315]
    >>> chart_heights(1200)
    [520, 680]
    """
    chart = max(220, min(520, round(height * 0.5)))
    return [chart, max(height - chart, 0)]


def place_on_screen(window: QWidget) -> None:
    """Give ``window`` its first size on the screen it opens on, centred there."""
    screen = window.screen()
    available = screen.availableGeometry() if screen is not None else None
    size = first_size(available)
    window.resize(size)
    if available is not None and not available.isEmpty():
        window.move(available.x() + max((available.width() - size.width()) // 2, 0),
                    available.y() + max((available.height() - size.height()) // 2, 0))


def restore_layout(prefs: Preferences, window: QMainWindow,
                   splitters: dict[str, QSplitter]) -> bool:
    """Put back the saved geometry and splitter states; True if the main split was restored."""
    geometry = prefs.layout("geometry")
    if geometry is not None:
        window.restoreGeometry(geometry)
    restored = False
    for name, splitter in splitters.items():
        state = prefs.layout(name)
        if state is not None and splitter.restoreState(state):
            restored = restored or name == "main_split"
    return restored


def save_layout(prefs: Preferences, window: QMainWindow,
                splitters: dict[str, QSplitter]) -> None:
    """Keep the geometry and the splitter states for the next start."""
    prefs.set_layout("geometry", window.saveGeometry())
    for name, splitter in splitters.items():
        prefs.set_layout(name, splitter.saveState())
