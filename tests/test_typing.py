"""Static typing of core/: mypy finds no error, and result types hold no ``Any``.

Source: mypy (the checker itself is the reference); ``typing.get_type_hints`` for the
result fields.
"""

from __future__ import annotations

import dataclasses
import subprocess
import sys
import typing
from pathlib import Path

import numpy as np
import pytest

from core import results

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.slow
def test_mypy_finds_no_error_in_core(tmp_path: Path) -> None:
    run = subprocess.run([sys.executable, "-m", "mypy", "core", "--cache-dir", str(tmp_path)],
                         cwd=ROOT, capture_output=True, text=True, timeout=900)
    assert run.returncode == 0, run.stdout + run.stderr


def _mentions_any(hint: object) -> bool:
    if hint is typing.Any:
        return True
    if typing.get_origin(hint) is np.ndarray:
        return False  # numpy's array type leaves the shape open (its own Any)
    return any(_mentions_any(arg) for arg in typing.get_args(hint))


def test_result_types_hold_no_any() -> None:
    checked = 0
    for obj in vars(results).values():
        if isinstance(obj, type) and dataclasses.is_dataclass(obj) \
                and obj.__module__ == results.__name__:
            for name, hint in typing.get_type_hints(obj).items():
                assert not _mentions_any(hint), (obj.__name__, name)
                checked += 1
    assert checked > 50
