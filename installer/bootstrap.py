"""Set up Tenure in a private virtual environment, then run it or its tests.

Usage (from the repository root, with any Python 3.11+):

    python3 installer/bootstrap.py run     # set up if needed, open the window on the demo
    python3 installer/bootstrap.py test    # set up if needed, run the whole test suite

The environment lives in ``.venv`` beside this repository. ``run`` installs what
running needs (the runtime dependencies); ``test`` adds the ``test`` extra. Pip runs
again only when ``pyproject.toml`` changes or an extra is missing, so the second call is
fast. This script needs the package index; a site without internet installs from the
offline kit instead (README, "Installing at a site without internet").
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
VENV = ROOT / ".venv"
STAMP = VENV / ".tenure-installed"


def _venv_python() -> Path:
    if os.name == "nt":
        return VENV / "Scripts" / "python.exe"
    return VENV / "bin" / "python"


def _digest() -> str:
    digest = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    return f"{digest} {sys.version_info[:2]}"


def _installed_extras() -> set[str] | None:
    """The extras installed for this pyproject.toml and Python, or None if out of date."""
    try:
        stamp = json.loads(STAMP.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(stamp, dict) or stamp.get("digest") != _digest():
        return None
    return set(stamp.get("extras", []))


def ensure_environment(extras: tuple[str, ...] = ()) -> Path:
    """Create the virtual environment and install Tenure (editable) with ``extras``."""
    if sys.version_info < (3, 11):  # noqa: UP036 (this script runs on whatever python3 is)
        sys.exit("error: python: Tenure needs Python 3.11 or newer")
    python = _venv_python()
    if not python.exists():
        print("Creating the virtual environment in .venv ...", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    installed = _installed_extras()
    if installed is None or not set(extras) <= installed:
        wanted = sorted(set(extras) | (installed or set()))
        what = f" and its {', '.join(wanted)} extra" if wanted else ""
        print(f"Installing Tenure{what} into .venv (first run only) ...", flush=True)
        pip = [str(python), "-m", "pip", "install", "--disable-pip-version-check", "-q"]
        target = f"{ROOT}[{','.join(wanted)}]" if wanted else str(ROOT)
        try:
            subprocess.run([*pip, "--upgrade", "pip"], check=True)
            subprocess.run([*pip, "-e", target], check=True)
        except subprocess.CalledProcessError as exc:
            print(f"error: installer: pip could not install Tenure (exit {exc.returncode}); "
                  "is the package index reachable? At a site without internet, use the "
                  "offline kit (README: Installing at a site without internet)",
                  file=sys.stderr)
            raise SystemExit(2) from None
        STAMP.write_text(json.dumps({"digest": _digest(), "extras": wanted}), encoding="utf-8")
    return python


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in {"run", "test"}:
        print(__doc__)
        return 2
    python = ensure_environment(() if argv[0] == "run" else ("test",))
    if argv[0] == "run":
        return subprocess.call([str(python), "-m", "core.cli", *argv[1:]], cwd=ROOT)
    env = dict(os.environ, QT_QPA_PLATFORM=os.environ.get("QT_QPA_PLATFORM", "offscreen"))
    # pyproject's addopts leave the slow tests out of a plain pytest run; this is the whole suite
    return subprocess.call([str(python), "-m", "pytest", "-m", "slow or not slow", *argv[1:]],
                           cwd=ROOT, env=env)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
