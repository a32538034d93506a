"""Build the offline kit: everything a plant site needs to install Tenure with no internet.

    python3 installer/build_kit.py [--platform linux-x86_64|linux-aarch64|windows-x86_64|
                                    macos-arm64|macos-x86_64 ...] [--python 3.11 3.12 3.13]

Run it on a machine that reaches the package index. It writes
``dist/tenure-offline-VERSION/`` and ``dist/tenure-offline-VERSION.zip`` holding:

- ``wheels/``: the Tenure wheel, every dependency as a binary wheel for each chosen
  platform and Python (``pip download --only-binary=:all: --platform ... --python-version``),
  and pip itself (so the site's Python needs no ``ensurepip``);
- ``SHA256SUMS``: the SHA-256 of every other file in the kit;
- ``install.sh`` (Linux, macOS) and ``install.ps1`` (Windows): check every checksum first,
  create a virtual environment and install with ``--no-index`` from ``wheels/``; then a
  launcher (a desktop entry on Linux, a Start-menu shortcut on Windows). ``install.sh``
  also checks the system libraries Qt needs on Linux and says what to install;
- ``INSTALL.txt`` for the site's IT staff; ``kit-info.txt`` (what the kit is for);
  the icon.

Defaults: this machine's platform and Python. Nothing in the kit reaches the network.
"""

from __future__ import annotations

import argparse
import hashlib
import platform
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TEMPLATES = Path(__file__).resolve().parent / "kit"

PLATFORMS = ("linux-x86_64", "linux-aarch64", "windows-x86_64", "macos-arm64", "macos-x86_64")
PYTHONS = ("3.11", "3.12", "3.13")
# Oldest glibc the Linux wheels may need, and the newest the kit picks wheels for: a
# wheel tagged for a newer glibc than the site has would not install there.
GLIBC_MIN, GLIBC_MAX = 17, 39
MACOS = "13_0"  # pip also accepts wheels for older macOS releases (and universal2)


def platform_tags(name: str, glibc_max: int = GLIBC_MAX) -> list[str]:
    """pip ``--platform`` tags for a kit platform name.

    >>> platform_tags("windows-x86_64")
    ['win_amd64']
    >>> platform_tags("linux-x86_64", 18)
    ['manylinux_2_18_x86_64', 'manylinux_2_17_x86_64', 'manylinux2014_x86_64']
    """
    system, _, arch = name.partition("-")
    if system == "linux":
        tags = [f"manylinux_2_{v}_{arch}" for v in range(glibc_max, GLIBC_MIN - 1, -1)]
        return [*tags, f"manylinux2014_{arch}"]
    if system == "windows":
        return ["win_amd64"]
    if system == "macos":
        return [f"macosx_{MACOS}_{arch}"]
    raise ValueError(name)


def this_platform() -> str:
    machine = platform.machine().lower()
    arch = {"amd64": "x86_64", "x86_64": "x86_64", "arm64": "aarch64", "aarch64": "aarch64"}
    if sys.platform.startswith("linux"):
        return f"linux-{arch.get(machine, machine)}"
    if sys.platform == "win32":
        return "windows-x86_64"
    if sys.platform == "darwin":
        return "macos-arm64" if machine == "arm64" else "macos-x86_64"
    raise SystemExit(f"error: build_kit: no kit platform for {sys.platform} {machine}")


def version() -> str:
    return tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]["version"]


def _pip(*args: str, pip_args: list[str] | None = None) -> None:
    cmd = [sys.executable, "-m", "pip", *args, *(pip_args or [])]
    done = subprocess.run(cmd, capture_output=True, text=True)
    if done.returncode != 0:
        tail = (done.stderr or done.stdout).strip().splitlines()[-3:]
        raise SystemExit(f"error: build_kit: pip {args[0]} failed: {' / '.join(tail)}")


def build_wheel(out: Path, pip_args: list[str] | None = None) -> Path:
    """Tenure's wheel, built from a clean copy of the checkout (no stale build folders)."""
    out.mkdir(parents=True, exist_ok=True)
    skip = shutil.ignore_patterns(".git", ".venv", "dist", "build", "*.egg-info", "__pycache__",
                                  ".pytest_cache", ".ruff_cache", ".hypothesis", "tests",
                                  "benchmarks", "screenshots")
    with tempfile.TemporaryDirectory(prefix="tenure-wheel-") as tmp:
        src = Path(tmp) / "src"
        shutil.copytree(ROOT, src, ignore=skip)
        _pip("wheel", "-q", "--no-deps", "-w", str(out), str(src), pip_args=pip_args)
    wheels = sorted(out.glob(f"tenure-{version()}-*.whl"))
    if not wheels:
        raise SystemExit("error: build_kit: no wheel was built")
    return wheels[-1]


def download(wheels: Path, tenure_wheel: Path, kit_platform: str, python: str,
             pip_args: list[str] | None = None) -> None:
    """Every dependency of Tenure (and pip) as binary wheels for one platform and Python."""
    tags = [a for tag in platform_tags(kit_platform) for a in ("--platform", tag)]
    _pip("download", "-q", "--only-binary=:all:", "--implementation", "cp", "--python-version",
         python, *tags, "-d", str(wheels), str(tenure_wheel), "pip", pip_args=pip_args)


def glibc_needed(wheels: Path) -> str | None:
    """The newest glibc any Linux wheel needs (each wheel: its most lenient tag), or None.

    >>> import tempfile; d = Path(tempfile.mkdtemp())
    >>> for n in ("a-1-cp311-cp311-manylinux_2_17_x86_64.manylinux2014_x86_64.whl",
    ...           "b-1-cp311-cp311-manylinux_2_28_x86_64.whl", "c-1-py3-none-any.whl"):
    ...     _ = (d / n).write_bytes(b"")
    >>> glibc_needed(d)
    '2.28'
    """
    legacy = {"manylinux1": 5, "manylinux2010": 12, "manylinux2014": 17}
    newest = None
    for wheel in wheels.glob("*.whl"):
        minors = []
        for tag in wheel.stem.split("-")[-1].split("."):
            m = re.match(r"manylinux_2_(\d+)_", tag)
            if m:
                minors.append(int(m.group(1)))
            elif tag.split("_")[0] in legacy:
                minors.append(legacy[tag.split("_")[0]])
        if minors:
            newest = max(newest or 0, min(minors))
    return None if newest is None else f"2.{newest}"


def ico_from_png(png: bytes) -> bytes:
    """A Windows .ico holding one PNG image (the format Windows Vista and later read)."""
    width, height = struct.unpack(">II", png[16:24])
    entry = struct.pack("<BBBBHHII", width % 256, height % 256, 0, 0, 1, 32, len(png), 6 + 16)
    return struct.pack("<HHH", 0, 1, 1) + entry + png


def sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def write_checksums(kit: Path) -> int:
    files = sorted(p for p in kit.rglob("*") if p.is_file() and p.name != "SHA256SUMS")
    lines = [f"{sha256(p)}  {p.relative_to(kit).as_posix()}\n" for p in files]
    (kit / "SHA256SUMS").write_text("".join(lines), encoding="utf-8", newline="\n")
    return len(files)


def build_kit(platforms: list[str], pythons: list[str], dist: Path, make_zip: bool = True,
              pip_args: list[str] | None = None) -> Path:
    name = f"tenure-offline-{version()}"
    kit = dist / name
    if kit.exists():
        shutil.rmtree(kit)
    wheels = kit / "wheels"
    wheels.mkdir(parents=True)
    started = time.monotonic()
    tenure = build_wheel(wheels, pip_args)
    print(f"built {tenure.name}", flush=True)
    for kit_platform in platforms:
        for python in pythons:
            download(wheels, tenure, kit_platform, python, pip_args)
            print(f"downloaded the wheels for {kit_platform}, Python {python}", flush=True)
    glibc = glibc_needed(wheels) if any(p.startswith("linux") for p in platforms) else None
    for template in ("install.sh", "install.ps1", "INSTALL.txt"):
        text = (TEMPLATES / template).read_text(encoding="utf-8")
        text = text.replace("@VERSION@", version()).replace("@PLATFORMS@", " ".join(platforms))
        text = text.replace("@PYTHONS@", " ".join(pythons)).replace("@GLIBC@", glibc or "-")
        newline = "\r\n" if template.endswith(".ps1") else "\n"
        (kit / template).write_text(text, encoding="utf-8", newline=newline)
    (kit / "install.sh").chmod(0o755)
    (kit / "kit-info.txt").write_text(
        f"version={version()}\nplatforms={' '.join(platforms)}\npythons={' '.join(pythons)}\n"
        f"glibc={glibc or '-'}\n", encoding="utf-8", newline="\n")
    png = (ROOT / "resources" / "icons" / "tenure.png").read_bytes()
    (kit / "tenure.png").write_bytes(png)
    (kit / "tenure.ico").write_bytes(ico_from_png(png))
    count = write_checksums(kit)
    size = sum(p.stat().st_size for p in kit.rglob("*") if p.is_file())
    print(f"{kit}: {count} files, {size / 1e6:.0f} MB, checksums in SHA256SUMS", flush=True)
    if make_zip:
        archive = shutil.make_archive(str(kit), "zip", root_dir=dist, base_dir=name)
        print(f"{archive}", flush=True)
    print(f"kit built in {time.monotonic() - started:.0f} s", flush=True)
    return kit


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python3 installer/build_kit.py",
        description="Build the offline installation kit (wheels, checksums, install scripts).")
    parser.add_argument("--platform", nargs="+", choices=PLATFORMS, default=None,
                        help="platforms to include (default: this one)")
    parser.add_argument("--python", nargs="+", choices=PYTHONS, default=None,
                        help="Python versions to include (default: this one)")
    parser.add_argument("--out", default=str(ROOT / "dist"), help="output folder (default dist/)")
    parser.add_argument("--no-zip", action="store_true", help="do not write the zip")
    parser.add_argument("--find-links", default=None,
                        help="also look for wheels in this folder (for example a wheelhouse)")
    args = parser.parse_args(argv)
    here = f"{sys.version_info[0]}.{sys.version_info[1]}"
    pip_args = ["--find-links", args.find_links] if args.find_links else []
    build_kit(args.platform or [this_platform()], args.python or [here], Path(args.out),
              not args.no_zip, pip_args)
    return 0


if __name__ == "__main__":
    sys.exit(main())
