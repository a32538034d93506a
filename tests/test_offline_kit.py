"""The offline kit (installer/build_kit.py): built here, installed with no network, used.

The slow test builds the Linux kit for the running Python, checks that a damaged file
stops the installer before anything is installed, installs the kit inside a network
namespace with no network (``unshare -n``; see install_support.no_network_wrapper) and
runs ``tenure demo/study/memo --sign/verify`` and the window (offscreen) from it, still
with no network.
"""

from __future__ import annotations

import os
import struct
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest
from install_support import (
    ROOT,
    base_python,
    exercise_tenure,
    fill_wheelhouse,
    load_installer,
    no_network_env,
    no_network_wrapper,
    runtime_requirements,
    session_env,
)

build_kit = load_installer("build_kit")


def test_doctests_of_the_kit_builder() -> None:
    import doctest

    assert doctest.testmod(build_kit).failed == 0


def test_platform_tags_cover_every_kit_platform() -> None:
    # pip's platform tags (PEP 600 manylinux_x_y, win_amd64, macosx_x_y_arch; common practice)
    for name in build_kit.PLATFORMS:
        tags = build_kit.platform_tags(name)
        assert tags
    linux = build_kit.platform_tags("linux-aarch64")
    assert linux[0] == f"manylinux_2_{build_kit.GLIBC_MAX}_aarch64"
    assert "manylinux_2_17_aarch64" in linux and "manylinux2014_aarch64" in linux
    assert build_kit.platform_tags("macos-arm64") == [f"macosx_{build_kit.MACOS}_arm64"]


def test_icon_for_windows_is_a_valid_ico() -> None:
    png = (ROOT / "resources" / "icons" / "tenure.png").read_bytes()
    ico = build_kit.ico_from_png(png)
    # ICONDIR (reserved 0, type 1, count 1) then one 16-byte entry; the image follows
    assert struct.unpack("<HHH", ico[:6]) == (0, 1, 1)
    width, height, _, _, planes, bits, size, offset = struct.unpack("<BBBBHHII", ico[6:22])
    assert (width, height, planes, bits, size, offset) == (128, 128, 1, 32, len(png), 22)
    assert ico[22:] == png


def test_install_scripts_never_name_an_index() -> None:
    for name in ("install.sh", "install.ps1"):
        text = (ROOT / "installer" / "kit" / name).read_text(encoding="utf-8")
        assert "--no-index" in text and "--isolated" in text
        assert "http://" not in text and "https://" not in text and "index-url" not in text


def _kit_copy_with_damage(kit: Path, target: Path, damaged: str) -> None:
    """Hard links of the kit's files, except ``damaged``, which gets one byte changed."""
    for path in kit.rglob("*"):
        dest = target / path.relative_to(kit)
        if path.is_dir():
            dest.mkdir(parents=True, exist_ok=True)
            continue
        dest.parent.mkdir(parents=True, exist_ok=True)
        if path.relative_to(kit).as_posix() == damaged:
            data = bytearray(path.read_bytes())
            data[len(data) // 2] ^= 0x01
            dest.write_bytes(bytes(data))
        else:
            os.link(path, dest)


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the proof runs on Linux")
def test_kit_installs_and_runs_with_no_network(tmp_path: Path) -> None:
    here = f"{sys.version_info[0]}.{sys.version_info[1]}"
    house = fill_wheelhouse(runtime_requirements())
    kit = build_kit.build_kit([build_kit.this_platform()], [here], tmp_path / "dist",
                              make_zip=True, pip_args=["--find-links", str(house)])
    names = {p.relative_to(kit).as_posix() for p in kit.rglob("*") if p.is_file()}
    assert {"install.sh", "install.ps1", "INSTALL.txt", "SHA256SUMS", "kit-info.txt",
            "tenure.png", "tenure.ico"} <= names
    wheels = sorted(n for n in names if n.startswith("wheels/"))
    assert all(n.endswith(".whl") for n in wheels)  # binary wheels only, no source archives
    assert any(n.startswith("wheels/tenure-") for n in wheels)
    assert any(n.startswith("wheels/pip-") for n in wheels)
    assert any(n.startswith("wheels/pyside6_essentials-") for n in wheels)
    sums = (kit / "SHA256SUMS").read_text(encoding="utf-8").splitlines()
    assert sorted(line.split("  ", 1)[1] for line in sums) == sorted(names - {"SHA256SUMS"})
    with zipfile.ZipFile(kit.parent / (kit.name + ".zip")) as archive:
        assert f"{kit.name}/install.sh" in archive.namelist()

    wrapper, how = no_network_wrapper()
    home = tmp_path / "home"
    env = no_network_env(session_env(home), how)
    env["PATH"] = os.environ["PATH"]

    # A damaged wheel: named, and nothing is installed.
    damaged = next(n for n in wheels if "numpy" in n)
    broken = tmp_path / "broken-kit"
    _kit_copy_with_damage(kit, broken, damaged)
    done = subprocess.run([*wrapper, "sh", str(broken / "install.sh"), "--prefix",
                           str(tmp_path / "never"), "--python", base_python()],
                          capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 2
    assert f"damaged: {damaged}" in done.stderr and "nothing was installed" in done.stderr
    assert not (tmp_path / "never" / "venv").exists()

    # The kit itself, with no network.
    prefix = tmp_path / "site" / "tenure"
    done = subprocess.run([*wrapper, "sh", str(kit / "install.sh"), "--prefix", str(prefix),
                           "--python", base_python()],
                          capture_output=True, text=True, env=env, timeout=900)
    assert done.returncode == 0, done.stdout + done.stderr
    assert f"Checked {len(names) - 1} files against SHA256SUMS: all intact." in done.stdout
    assert "System libraries for the window: all present." in done.stdout \
        or "sudo apt-get install" in done.stdout  # the Qt libraries were checked either way
    desktop = (home / ".local" / "share" / "applications" / "tenure.desktop").read_text()
    assert f'Exec="{prefix}/venv/bin/tenure"' in desktop and "Name=Tenure" in desktop
    assert (home / ".local" / "bin" / "tenure").resolve() == (prefix / "venv/bin/tenure").resolve()

    exercise_tenure([str(prefix / "venv" / "bin" / "tenure")], tmp_path / "work", env,
                    wrapper, window_seconds=8)


def _mini_kit(folder: Path) -> Path:
    """install.sh with a tiny stand-in kit: two 'wheels', their checksums and kit-info."""
    kit = folder / "kit"
    (kit / "wheels").mkdir(parents=True)
    (kit / "install.sh").write_text((ROOT / "installer" / "kit" / "install.sh").read_text())
    (kit / "wheels" / "pip-99-py3-none-any.whl").write_bytes(b"not really a wheel")
    (kit / "wheels" / "tenure-0.1.0-py3-none-any.whl").write_bytes(b"nor this one")
    (kit / "kit-info.txt").write_text(f"version=0.1.0\nplatforms={build_kit.this_platform()}\n"
                                      "pythons=3.11\nglibc=2.17\n")
    (kit / "tenure.png").write_bytes(b"png")
    build_kit.write_checksums(kit)
    return kit


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="install.sh runs under sh")
def test_install_sh_names_every_damaged_or_missing_file_and_installs_nothing(tmp_path) -> None:
    kit = _mini_kit(tmp_path)
    (kit / "wheels" / "tenure-0.1.0-py3-none-any.whl").write_bytes(b"nor this one!")
    (kit / "tenure.png").unlink()
    done = subprocess.run(["sh", str(kit / "install.sh"), "--prefix", str(tmp_path / "p")],
                          capture_output=True, text=True)
    assert done.returncode == 2 and done.stdout == ""
    assert done.stderr.splitlines() == [
        "error: kit: these files are damaged or missing (copy the kit again; nothing was "
        "installed):", "  missing: tenure.png", "  damaged: wheels/tenure-0.1.0-py3-none-any.whl"]
    assert not (tmp_path / "p").exists()


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="install.sh runs under sh")
def test_install_sh_refuses_a_python_the_kit_has_no_wheels_for(tmp_path) -> None:
    kit = _mini_kit(tmp_path)
    fake = tmp_path / "python3.99"
    fake.write_text("#!/bin/sh\necho 3.99\n")
    fake.chmod(0o755)
    done = subprocess.run(["sh", str(kit / "install.sh"), "--python", str(fake), "--prefix",
                           str(tmp_path / "p")], capture_output=True, text=True)
    assert done.returncode == 2
    assert done.stderr.strip() == (f"error: python: {fake} is Python 3.99; this kit holds wheels "
                                   "for Python 3.11 (name another with --python, or build a kit "
                                   "with --python 3.99)")
    assert not (tmp_path / "p").exists()
