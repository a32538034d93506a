"""Set up Tenure in a private virtual environment, then run it or its tests.

Usage (from the repository root, with any Python 3.11+):

    python3 installer/bootstrap.py run     # set up if needed, open the window on the demo
    python3 installer/bootstrap.py test    # set up if needed, run the whole test suite

The environment lives in ``.venv`` beside this repository. It is rebuilt only
when ``pyproject.toml`` changes, so the second call is fast.
"""

from __future__ import annotations

import hashlib
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


def _wanted_stamp() -> str:
    digest = hashlib.sha256((ROOT / "pyproject.toml").read_bytes()).hexdigest()
    return f"{digest} {sys.version_info[:2]}"


def ensure_environment() -> Path:
    """Create the virtual environment and install Tenure with its test extra."""
    if sys.version_info < (3, 11):  # noqa: UP036 (this script runs on whatever python3 is)
        sys.exit("error: python: Tenure needs Python 3.11 or newer")
    python = _venv_python()
    if not python.exists():
        print("Creating the virtual environment in .venv ...", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    if not STAMP.exists() or STAMP.read_text() != _wanted_stamp():
        print("Installing Tenure and its dependencies (first run only) ...", flush=True)
        pip = [str(python), "-m", "pip", "install", "--disable-pip-version-check", "-q"]
        subprocess.run([*pip, "--upgrade", "pip"], check=True)
        subprocess.run([*pip, "-e", f"{ROOT}[test]"], check=True)
        STAMP.write_text(_wanted_stamp())
    return python


def main(argv: list[str]) -> int:
    if not argv or argv[0] not in {"run", "test"}:
        print(__doc__)
        return 2
    python = ensure_environment()
    if argv[0] == "run":
        return subprocess.call([str(python), "-m", "core.cli", *argv[1:]], cwd=ROOT)
    env = dict(os.environ, QT_QPA_PLATFORM=os.environ.get("QT_QPA_PLATFORM", "offscreen"))
    return subprocess.call([str(python), "-m", "pytest", *argv[1:]], cwd=ROOT, env=env)


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
