"""Timing helpers shared by the benchmark scripts: best wall time of a Python call, and of a
command (the `tenure` CLI) in a fresh interpreter started from the repository root."""

from __future__ import annotations

import gc
import json
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

ROOT = Path(__file__).resolve().parents[1]

T = TypeVar("T")
K = TypeVar("K")


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


#: Compiled bytecode for the timed commands, kept out of the working tree.  An installed
#: copy runs from bytecode (pip compiles it at install time); a shell that sets
#: PYTHONDONTWRITEBYTECODE would otherwise make every run recompile the project from source.
PYCACHE = Path(tempfile.gettempdir()) / "tenure-bench-pycache"


def _environment(env: dict[str, str] | None) -> dict[str, str]:
    full = {**os.environ, "QT_QPA_PLATFORM": "offscreen", "PYTHONPYCACHEPREFIX": str(PYCACHE),
            **(env or {})}
    full.pop("PYTHONDONTWRITEBYTECODE", None)
    return full


def _run(cmd: list[str], env: dict[str, str]) -> float:
    start = time.perf_counter()
    proc = subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env,
                          cwd=ROOT, check=False)
    elapsed = time.perf_counter() - start
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {proc.stderr.decode()[-500:]}")
    return elapsed


def wall(cmd: list[str], repeat: int = 1, env: dict[str, str] | None = None,
         warm: bool = True) -> float:
    """Best wall time of ``repeat`` runs of ``cmd``, after one untimed run that compiles the
    bytecode when ``warm`` (offscreen, cwd = the repository root, ``env`` added to the
    environment); a failing run stops the benchmark with its stderr."""
    full_env = _environment(env)
    if warm:
        _run(cmd, full_env)
    return min(_run(cmd, full_env) for _ in range(max(repeat, 1)))


def cli_wall(args: list[str], repeat: int = 1, env: dict[str, str] | None = None,
             warm: bool = True) -> float:
    """Best wall time of ``python -m core.cli ARGS`` (what `tenure ARGS` runs)."""
    return wall([sys.executable, "-m", "core.cli", *args], repeat, env, warm)


def alternating_walls(commands: dict[K, list[str]], repeat: int = 1) -> dict[K, float]:
    """Best wall time of each command, one untimed run of each first, then timed in
    alternation round by round (a slow spell of the machine lands on every case)."""
    env = _environment(None)
    for cmd in commands.values():
        _run(cmd, env)
    best = {name: float("inf") for name in commands}
    for _ in range(max(repeat, 1)):
        for name, cmd in commands.items():
            best[name] = min(best[name], _run(cmd, env))
    return best


def study_cli_walls(documents: dict[K, dict], repeat: int = 1,
                    env: dict[str, str] | None = None) -> dict[K, float]:
    """Best wall time of `tenure study FILE --json` for each study document, the files
    written to a temporary folder, one warm-up run, then the cases timed in alternation round
    by round (a slow spell of the machine lands on every case, not on one)."""
    best = {name: float("inf") for name in documents}
    with tempfile.TemporaryDirectory() as folder:
        paths = {}
        for i, (name, doc) in enumerate(documents.items()):
            paths[name] = Path(folder) / f"study-{i}.json"
            paths[name].write_text(json.dumps(doc), encoding="utf-8")
        cli_wall(["study", str(next(iter(paths.values()))), "--json"], env=env)
        for _ in range(max(repeat, 1)):
            for name, path in paths.items():
                best[name] = min(best[name], cli_wall(["study", str(path), "--json"], env=env,
                                                      warm=False))
    return best
