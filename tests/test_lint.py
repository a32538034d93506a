"""The codebase stays ruff clean and core/ never imports Qt (DEVELOPERS.md conventions)."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_ruff_clean() -> None:
    ruff = shutil.which("ruff") or str(Path(sys.executable).with_name("ruff"))
    if not Path(ruff).exists():
        pytest.skip("ruff is not installed")
    done = subprocess.run([ruff, "check", "."], cwd=ROOT, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr


def test_core_never_imports_qt() -> None:
    pattern = re.compile(r"^\s*(from|import)\s+(PySide6|pyqtgraph|shiboken6)\b", re.MULTILINE)
    offenders = [str(p.relative_to(ROOT)) for p in (ROOT / "core").rglob("*.py")
                 if pattern.search(p.read_text(encoding="utf-8"))]
    assert offenders == []
