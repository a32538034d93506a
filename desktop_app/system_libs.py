"""The system libraries Qt needs on Linux, checked before Qt starts (no Qt import here).

PySide6's wheels bring Qt itself, but Qt's GUI library and its xcb platform plugin (the
X11 one) load a set of system libraries that a minimal Linux install may lack. Without
one, Qt aborts inside ``QApplication`` with a message about the platform plugin. The
window's entry point calls :func:`check_qt_libraries` first: when a library is missing it
names the library and the Debian/Ubuntu package that provides it, in one line.

The lists follow the DT_NEEDED entries of ``libQt6Gui``, ``libQt6DBus``,
``libQt6XcbQpa`` and ``plugins/platforms/libqxcb.so`` of PySide6 6.11 (held by
``tests/test_system_libs.py`` against the installed PySide6), less the C runtime.

``python -m desktop_app.system_libs [--platform xcb]`` prints the report and exits 1
when something is missing (the offline kit's ``install.sh`` runs it).

>>> missing_libraries("offscreen", loader=lambda name: None)
[]
>>> [lib.package for lib in missing_libraries("xcb", loader=_refuse("libxcb-icccm.so.4"))]
['libxcb-icccm4']
"""

from __future__ import annotations

import argparse
import ctypes
import os
import sys
from collections.abc import Callable, Mapping
from dataclasses import dataclass

__all__ = ["SystemLibrary", "GUI_LIBRARIES", "XCB_LIBRARIES", "qt_platform",
           "missing_libraries", "check_qt_libraries", "apt_command"]

Loader = Callable[[str], object]


@dataclass(frozen=True)
class SystemLibrary:
    """A shared library by its soname, and the Debian/Ubuntu package that provides it."""

    soname: str
    package: str


# Qt's GUI library, on every Linux platform (xcb, wayland, offscreen alike).
GUI_LIBRARIES: tuple[SystemLibrary, ...] = (
    SystemLibrary("libGL.so.1", "libgl1"),
    SystemLibrary("libEGL.so.1", "libegl1"),
    SystemLibrary("libfontconfig.so.1", "libfontconfig1"),
    SystemLibrary("libfreetype.so.6", "libfreetype6"),
    SystemLibrary("libxkbcommon.so.0", "libxkbcommon0"),
    SystemLibrary("libglib-2.0.so.0", "libglib2.0-0"),
    SystemLibrary("libgthread-2.0.so.0", "libglib2.0-0"),
    SystemLibrary("libdbus-1.so.3", "libdbus-1-3"),
    SystemLibrary("libX11.so.6", "libx11-6"),
    SystemLibrary("libz.so.1", "zlib1g"),
)

# The xcb platform plugin (an X11 desktop).
XCB_LIBRARIES: tuple[SystemLibrary, ...] = (
    SystemLibrary("libxcb.so.1", "libxcb1"),
    SystemLibrary("libX11-xcb.so.1", "libx11-xcb1"),
    SystemLibrary("libxkbcommon-x11.so.0", "libxkbcommon-x11-0"),
    SystemLibrary("libxcb-cursor.so.0", "libxcb-cursor0"),
    SystemLibrary("libxcb-icccm.so.4", "libxcb-icccm4"),
    SystemLibrary("libxcb-keysyms.so.1", "libxcb-keysyms1"),
    SystemLibrary("libxcb-image.so.0", "libxcb-image0"),
    SystemLibrary("libxcb-util.so.1", "libxcb-util1"),
    SystemLibrary("libxcb-randr.so.0", "libxcb-randr0"),
    SystemLibrary("libxcb-render.so.0", "libxcb-render0"),
    SystemLibrary("libxcb-render-util.so.0", "libxcb-render-util0"),
    SystemLibrary("libxcb-shape.so.0", "libxcb-shape0"),
    SystemLibrary("libxcb-shm.so.0", "libxcb-shm0"),
    SystemLibrary("libxcb-sync.so.1", "libxcb-sync1"),
    SystemLibrary("libxcb-xfixes.so.0", "libxcb-xfixes0"),
    SystemLibrary("libxcb-xkb.so.1", "libxcb-xkb1"),
)


def qt_platform(env: Mapping[str, str] | None = None, system: str | None = None) -> str | None:
    """The platform plugin Qt will load on Linux, or None on another system.

    ``QT_QPA_PLATFORM`` when set (its first choice, without ``:options``); else
    ``wayland`` in a Wayland session and ``xcb`` otherwise, as Qt 6 chooses.

    >>> qt_platform({"QT_QPA_PLATFORM": "offscreen"}, "linux")
    'offscreen'
    >>> qt_platform({"QT_QPA_PLATFORM": "xcb:nograb;wayland"}, "linux")
    'xcb'
    >>> qt_platform({"DISPLAY": ":0"}, "linux"), qt_platform({}, "win32")
    ('xcb', None)
    >>> qt_platform({"XDG_SESSION_TYPE": "wayland", "WAYLAND_DISPLAY": "wayland-0"}, "linux")
    'wayland'
    """
    env = os.environ if env is None else env
    system = sys.platform if system is None else system
    if not system.startswith("linux"):
        return None
    chosen = env.get("QT_QPA_PLATFORM", "").strip()
    if chosen:
        return chosen.split(";")[0].split(":")[0].strip().lower()
    if env.get("XDG_SESSION_TYPE", "").lower() == "wayland" and env.get("WAYLAND_DISPLAY"):
        return "wayland"
    return "xcb"


def _dlopen(soname: str) -> object:
    return ctypes.CDLL(soname)


def _refuse(*missing: str) -> Loader:
    """A loader that fails for ``missing`` (for examples and tests)."""
    def load(soname: str) -> object:
        if soname in missing:
            raise OSError(f"{soname}: cannot open shared object file")
        return object()
    return load


def missing_libraries(platform: str | None, loader: Loader | None = None) -> list[SystemLibrary]:
    """The libraries Qt needs for ``platform`` that ``loader`` (dlopen) cannot load, in order."""
    if platform is None:
        return []
    load = loader or _dlopen
    wanted = GUI_LIBRARIES + (XCB_LIBRARIES if platform == "xcb" else ())
    missing = []
    for lib in wanted:
        try:
            load(lib.soname)
        except OSError:
            missing.append(lib)
    return missing


def apt_command(missing: list[SystemLibrary]) -> str:
    """``sudo apt-get install`` with each package once.

    >>> apt_command([SystemLibrary("a.so", "p1"), SystemLibrary("b.so", "p1")])
    'sudo apt-get install p1'
    """
    return "sudo apt-get install " + " ".join(dict.fromkeys(lib.package for lib in missing))


def check_qt_libraries(env: Mapping[str, str] | None = None, loader: Loader | None = None,
                       system: str | None = None) -> str | None:
    """None when Qt can start; else one line (``<where>: <what>``) naming what is missing.

    >>> print(check_qt_libraries({"DISPLAY": ":0"}, _refuse("libxcb-cursor.so.0"), "linux"))
    Qt xcb platform: missing system library libxcb-cursor.so.0 (Debian/Ubuntu package libxcb-cursor0); install it with: sudo apt-get install libxcb-cursor0
    """
    platform = qt_platform(env, system)
    missing = missing_libraries(platform, loader)
    if not missing:
        return None
    names = ", ".join(f"{lib.soname} (Debian/Ubuntu package {lib.package})" for lib in missing)
    plural = "ies" if len(missing) > 1 else "y"
    them = "them" if len(missing) > 1 else "it"
    return (f"Qt {platform} platform: missing system librar{plural} {names}; "
            f"install {them} with: {apt_command(missing)}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m desktop_app.system_libs",
        description="Check the system libraries Qt needs to open Tenure's window on Linux.")
    parser.add_argument("--platform", default=None,
                        help="the Qt platform to check (default: the one Qt would use here)")
    args = parser.parse_args(argv)
    env = dict(os.environ)
    if args.platform:
        env["QT_QPA_PLATFORM"] = args.platform
    problem = check_qt_libraries(env)
    if problem is None:
        print(f"Qt {qt_platform(env) or 'platform'}: every system library it needs is here")
        return 0
    print(problem)
    return 1


if __name__ == "__main__":
    sys.exit(main())
