"""The check of Qt's system libraries before the window starts (desktop_app/system_libs.py)."""

from __future__ import annotations

import doctest
import os
import struct
import subprocess
import sys
from pathlib import Path

import pytest

from desktop_app import system_libs
from desktop_app.system_libs import (
    GUI_LIBRARIES,
    XCB_LIBRARIES,
    check_qt_libraries,
    missing_libraries,
    qt_platform,
)

ROOT = Path(__file__).resolve().parents[1]


def fake_loader(*missing: str):
    """Fails like dlopen for the sonames in ``missing``; records every name asked for."""
    asked: list[str] = []

    def load(soname: str) -> object:
        asked.append(soname)
        if soname in missing:
            raise OSError(f"{soname}: cannot open shared object file: No such file or directory")
        return object()

    load.asked = asked  # type: ignore[attr-defined]
    return load


def test_doctests() -> None:
    assert doctest.testmod(system_libs).failed == 0


@pytest.mark.parametrize(("env", "system", "expected"), [
    ({}, "linux", "xcb"),  # Qt 6's default on Linux outside a Wayland session
    ({"DISPLAY": ":0", "XDG_SESSION_TYPE": "x11"}, "linux", "xcb"),
    ({"XDG_SESSION_TYPE": "wayland", "WAYLAND_DISPLAY": "wayland-0"}, "linux", "wayland"),
    ({"XDG_SESSION_TYPE": "wayland"}, "linux", "xcb"),  # no compositor to talk to
    ({"QT_QPA_PLATFORM": "xcb"}, "linux", "xcb"),
    ({"QT_QPA_PLATFORM": " Offscreen "}, "linux", "offscreen"),
    ({"QT_QPA_PLATFORM": "wayland;xcb"}, "linux", "wayland"),
    ({"QT_QPA_PLATFORM": "xcb"}, "win32", None),
    ({}, "darwin", None),
])
def test_platform_qt_will_use(env, system, expected) -> None:
    assert qt_platform(env, system) == expected


def test_every_library_is_tried_and_the_missing_ones_named_in_order() -> None:
    load = fake_loader("libxcb-keysyms.so.1", "libxcb-cursor.so.0")
    missing = missing_libraries("xcb", load)
    assert [lib.soname for lib in missing] == ["libxcb-cursor.so.0", "libxcb-keysyms.so.1"]
    assert load.asked == [lib.soname for lib in GUI_LIBRARIES + XCB_LIBRARIES]


def test_the_message_is_one_line_with_library_and_package() -> None:
    line = check_qt_libraries({"DISPLAY": ":0"}, fake_loader("libxcb-icccm.so.4"), "linux")
    assert line == ("Qt xcb platform: missing system library libxcb-icccm.so.4 (Debian/Ubuntu "
                    "package libxcb-icccm4); install it with: sudo apt-get install libxcb-icccm4")
    two = check_qt_libraries({}, fake_loader("libglib-2.0.so.0", "libgthread-2.0.so.0"), "linux")
    assert "\n" not in two and two.endswith("sudo apt-get install libglib2.0-0")  # package once


def test_only_the_gui_libraries_matter_off_xcb() -> None:
    xcb_only = fake_loader(*(lib.soname for lib in XCB_LIBRARIES))
    assert check_qt_libraries({"QT_QPA_PLATFORM": "offscreen"}, xcb_only, "linux") is None
    assert check_qt_libraries({"QT_QPA_PLATFORM": "wayland"}, xcb_only, "linux") is None
    assert check_qt_libraries({}, xcb_only, "linux").startswith("Qt xcb platform:")
    gl = fake_loader("libEGL.so.1")
    assert "libegl1" in check_qt_libraries({"QT_QPA_PLATFORM": "offscreen"}, gl, "linux")
    # nothing is checked on Windows or macOS (Qt brings what it needs there)
    assert check_qt_libraries({}, fake_loader("libGL.so.1"), "win32") is None


def test_window_entry_exits_2_with_one_line_before_qt_starts(tmp_path: Path) -> None:
    # The real entry point (tenure with no command), with dlopen failing for one library:
    # one error line, exit 2, and no Qt module was even imported.
    script = (
        "import sys\n"
        "import desktop_app.system_libs as s\n"
        "s._dlopen = s._refuse('libxcb-keysyms.so.1')\n"
        "from core.cli import main\n"
        "rc = main([])\n"
        "assert not [m for m in sys.modules if m.startswith('PySide6')], 'Qt was imported'\n"
        "sys.exit(rc)\n")
    env = {k: v for k, v in os.environ.items() if k != "QT_QPA_PLATFORM"}
    env.update(DISPLAY=":99", TENURE_STATE_DIR=str(tmp_path), HOME=str(tmp_path),
               XDG_CONFIG_HOME=str(tmp_path / "cfg"), XDG_DATA_HOME=str(tmp_path / "data"))
    env.pop("XDG_SESSION_TYPE", None)
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 2, done.stderr
    assert done.stderr.splitlines() == [
        "error: Qt xcb platform: missing system library libxcb-keysyms.so.1 (Debian/Ubuntu "
        "package libxcb-keysyms1); install it with: sudo apt-get install libxcb-keysyms1"]


def test_install_script_mode_reports_and_exits_1() -> None:
    env = dict(os.environ)
    done = subprocess.run([sys.executable, "-m", "desktop_app.system_libs", "--platform",
                           "offscreen"], cwd=ROOT, env=env, capture_output=True, text=True)
    assert done.returncode == 0 and "every system library" in done.stdout


def _needed(path: Path) -> list[str]:
    """DT_NEEDED entries of a 64-bit little-endian ELF file (the ELF specification's layout)."""
    data = path.read_bytes()
    assert data[:4] == b"\x7fELF" and data[4] == 2 and data[5] == 1
    shoff, = struct.unpack_from("<Q", data, 0x28)
    shentsize, shnum = struct.unpack_from("<HH", data, 0x3A)
    sections = [struct.unpack_from("<IIQQQQIIQQ", data, shoff + i * shentsize)
                for i in range(shnum)]
    dynamic = next(s for s in sections if s[1] == 6)  # SHT_DYNAMIC
    strtab = sections[dynamic[6]]  # sh_link: the string table of the dynamic section
    names = []
    for off in range(dynamic[4], dynamic[4] + dynamic[5], 16):
        tag, value = struct.unpack_from("<qQ", data, off)
        if tag == 0:
            break
        if tag == 1:  # DT_NEEDED
            start = strtab[4] + value
            names.append(data[start:data.index(b"\0", start)].decode())
    return names


@pytest.mark.skipif(not sys.platform.startswith("linux") or sys.maxsize < 2**32,
                    reason="the lists are of Linux libraries (64-bit builds)")
def test_lists_cover_what_the_installed_qt_needs() -> None:
    # The lists must follow PySide6: every system library that Qt's GUI library and the xcb
    # plugin name as DT_NEEDED is in them (Qt's own libraries come with the wheel).
    import PySide6

    qt = Path(PySide6.__file__).parent / "Qt"
    bundled = {p.name for p in (qt / "lib").iterdir()}
    runtime = {"libc.so.6", "libm.so.6", "libstdc++.so.6", "libgcc_s.so.1", "libdl.so.2",
               "libpthread.so.0", "librt.so.1", "ld-linux-x86-64.so.2", "ld-linux-aarch64.so.1"}
    gui = set()
    for name in ("libQt6Gui.so.6", "libQt6DBus.so.6", "libQt6Widgets.so.6"):
        gui |= set(_needed(qt / "lib" / name))
    xcb = set(_needed(qt / "lib" / "libQt6XcbQpa.so.6"))
    xcb |= set(_needed(qt / "plugins" / "platforms" / "libqxcb.so"))
    listed_gui = {lib.soname for lib in GUI_LIBRARIES}
    listed_xcb = {lib.soname for lib in XCB_LIBRARIES}
    assert sorted(gui - bundled - runtime - listed_gui) == []
    assert sorted(xcb - bundled - runtime - listed_gui - listed_xcb) == []
