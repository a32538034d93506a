"""Timing helpers shared by the benchmark scripts: best wall time of a Python call, and of a
command (the `tenure` CLI) in a fresh interpreter started from the repository root."""

from __future__ import annotations

import gc
import os
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

ROOT = Path(__file__).resolve().parents[1]

T = TypeVar("T")


def best_of(fn: Callable[[], T], repeat: int = 1) -> tuple[float, T]:
    """Best wall time of ``repeat`` calls and the last call's value, with the cyclic GC paused
    as timeit does (a full collection walks every object the benchmark holds and lands on
    whichever case runs)."""
    best = float("inf")
    for _ in range(max(repeat, 1)):
        gc.collect()
        gc.disable()
        try:
            start = time.perf_counter()
            value = fn()
            best = min(best, time.perf_counter() - start)
        finally:
            gc.enable()
    return best, value


def wall(cmd: list[str], repeat: int = 1, env: dict[str, str] | None = None) -> float:
    """Best wall time of ``repeat`` runs of ``cmd`` (offscreen, cwd = the repository root,
    ``env`` added to the environment); a failing run stops the benchmark with its stderr."""
    full_env = {**os.environ, "QT_QPA_PLATFORM": "offscreen", **(env or {})}
    best = float("inf")
    for _ in range(max(repeat, 1)):
        start = time.perf_counter()
        proc = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                              env=full_env, cwd=ROOT, check=False)
        best = min(best, time.perf_counter() - start)
        if proc.returncode != 0:
            raise SystemExit(f"{' '.join(cmd)} failed: {proc.stderr.decode()[-500:]}")
    return best


def cli_wall(args: list[str], repeat: int = 1, env: dict[str, str] | None = None) -> float:
    """Best wall time of ``python -m core.cli ARGS`` (what `tenure ARGS` runs)."""
    return wall([sys.executable, "-m", "core.cli", *args], repeat, env)
